"""The balance builder in a real browser: layout, keyboard, its menu and its figure files.

A notebook written here shows two builders on invented tables, of 7 and of 24 parts, each
with the deepest partition (one part split off at a time), groups and a selection, so every
kind of mark is drawn. In Chromium:

1. no two balance bars, balance marks, leaf markers or part labels overlap, and all stay
   inside the figure (boxes measured with getBBox, labels as rotated rectangles), also after
   an automatic partition changes the tree's shape; screenshots go to test-artifacts/;
2. the keyboard: a split made with the keyboard leaves the focus in the builder, so Ctrl+Z
   and Ctrl+Shift+Z undo and redo it; every control has an accessible name (as Playwright
   computes it);
3. the automatic-partition menu: one button, entries named after the methods with a line
   each, keyboard navigation, and the kernel's SBP is the one the method gives;
4. "Save figure" (the control shown inside the builder) writes a PNG whose size is the
   dendrogram's times the scale (read back with Pillow) and an SVG whose part names are
   text nodes only (read back with the standard library's XML parser).
"""

from __future__ import annotations

import io
import re
import time
import xml.etree.ElementTree as ET

import pytest

from .conftest import ARTIFACTS, one_cell_notebook

pytestmark = pytest.mark.browser

NOTEBOOK = "builder_layout.ipynb"

SOURCE = """\
import ipywidgets as widgets
import numpy as np
import pandas as pd

from compwidgets.intake import read_composition
from compwidgets.model import CompositionModel
from compwidgets.views.builder import BalanceBuilder

OXIDES = ["SiO2", "Al2O3", "Fe2O3", "MgO", "CaO", "Na2O", "K2O"]


def invented_builder(n_parts, seed):
    # invented numbers: lognormal parts whose spreads differ, so that some balances vary
    # little (their bars are short) and others much
    rng = np.random.default_rng(seed)
    names = OXIDES[:n_parts] + [f"Trace{k:02d}_ppm" for k in range(n_parts - len(OXIDES))]
    sigma = np.linspace(0.05, 1.2, n_parts)
    values = rng.lognormal(mean=2.0, sigma=sigma, size=(240, n_parts))
    table = pd.DataFrame(values, columns=names[:n_parts])
    table["site"] = np.where(np.arange(240) % 3 == 0, "north", "south")
    model = CompositionModel(
        read_composition(table, parts=list(table.columns[:n_parts]), check_total=False),
        group_column="site",
    )
    # the deepest partition: one part split off at a time (D - 1 levels)
    sbp = np.zeros((n_parts - 1, n_parts), dtype=np.int8)
    for k in range(n_parts - 1):
        sbp[k, k] = 1
        sbp[k, k + 1 :] = -1
    model.set_sbp(sbp)
    model.select(np.arange(0, 240, 4))
    builder = BalanceBuilder(model)
    builder.add_class(f"cwtest-builder-{n_parts}")
    return builder


builders = {n: invented_builder(n, seed) for n, seed in ((7, 7), (24, 24))}
widgets.VBox([builders[7], builders[24]])
"""


@pytest.fixture(scope="module")
def builders(lab, open_notebook):
    """The notebook with both builders run and drawn."""
    (lab.root / NOTEBOOK).write_text(one_cell_notebook(SOURCE, "builder-layout"))
    nb = open_notebook(NOTEBOOK)
    nb.run_all()
    for n in (7, 24):
        state = f"""
            const root = document.querySelector(".cwtest-builder-{n} .cw-builder");
            const count = (sel) => root ? root.querySelectorAll(sel).length : -1;
            const seen = {{
              balances: count('[data-role="balance"]'),
              selection: count('svg [data-role="selection-mean"]'),
              scale: count('[data-role="scale"] line'),
              control: count('[data-role="figure-save"] button'),
              save: root ? root.querySelector('[data-role="figure-save"]').textContent : "",
            }};
            """
        try:
            nb.wait_js(
                state
                + f"""
                return seen.balances === {n - 1} && seen.selection === {n - 1}
                  && seen.scale > 0 && seen.control > 0;
                """,
                what=f"the {n}-part builder to draw its balances, statistics and figure control",
            )
        except AssertionError as err:
            raise AssertionError(f"{err}\nshown: {nb.js(state + 'return seen;')}") from None
    nb.lab_root = lab.root
    return nb


# JavaScript: every drawn thing of one dendrogram, in the SVG's own px.
GEOMETRY_JS = """
const root = document.querySelector(`.cwtest-builder-${arg} .cw-builder`);
const svg = root.querySelector('svg[data-role="dendrogram"]');
const pad = (el) => {
  const style = getComputedStyle(el);
  return style.stroke && style.stroke !== "none" ? parseFloat(style.strokeWidth) / 2 : 0;
};
const boxOf = (el) => {
  const b = el.getBBox(), p = pad(el);
  return [b.x - p, b.y - p, b.x + b.width + p, b.y + b.height + p];
};
const union = (els) => {
  const boxes = els.map(boxOf);
  if (!boxes.length) return null;
  return [Math.min(...boxes.map((b) => b[0])), Math.min(...boxes.map((b) => b[1])),
          Math.max(...boxes.map((b) => b[2])), Math.max(...boxes.map((b) => b[3]))];
};
const balances = [...svg.querySelectorAll('[data-role="balance"]')].map((g) => {
  const kids = [...g.children].filter((e) => e.localName !== "title");
  const is = (e, ...names) => names.some((n) => e.classList.contains(n));
  return {
    id: g.getAttribute("data-node-id"),
    bars: kids.filter((e) => is(e, "cw-bar", "cw-bar-extension")).map(boxOf),
    axis: union(kids.filter((e) => is(e, "cw-axis"))),
    marks: union(kids.filter((e) => !is(e, "cw-hit", "cw-bar", "cw-bar-extension", "cw-axis"))),
    extended: g.querySelector(".cw-bar-extension") !== null,
  };
});
const labels = [...svg.querySelectorAll('[data-role="part-label"]')].map((t) => {
  const b = t.getBBox(), m = t.getCTM();
  const at = (x, y) => [m.a * x + m.c * y + m.e, m.b * x + m.d * y + m.f];
  return {text: t.textContent, corners: [at(b.x, b.y), at(b.x + b.width, b.y),
          at(b.x + b.width, b.y + b.height), at(b.x, b.y + b.height)]};
});
const svgCtm = svg.getCTM();
return {
  width: Number(svg.getAttribute("width")), height: Number(svg.getAttribute("height")),
  balances,
  labels,
  dots: [...svg.querySelectorAll(".cw-leaf-dot")].map(boxOf),
  scale: union([...svg.querySelectorAll('[data-role="scale"] line, [data-role="scale"] text')]),
  identity: svgCtm === null || (svgCtm.a === 1 && svgCtm.d === 1),
};
"""

TOLERANCE = 0.5  # px of antialiasing and rounding


def boxes_overlap(a, b) -> bool:
    return (
        a[0] < b[2] - TOLERANCE
        and b[0] < a[2] - TOLERANCE
        and a[1] < b[3] - TOLERANCE
        and b[1] < a[3] - TOLERANCE
    )


def box_corners(b):
    return [(b[0], b[1]), (b[2], b[1]), (b[2], b[3]), (b[0], b[3])]


def polygons_overlap(p, q) -> bool:
    """Convex polygons overlap unless some edge normal separates them (separating axes)."""
    for poly in (p, q):
        for i in range(len(poly)):
            (x1, y1), (x2, y2) = poly[i], poly[(i + 1) % len(poly)]
            nx, ny = y2 - y1, x1 - x2
            norm = (nx * nx + ny * ny) ** 0.5 or 1.0
            a = [(x * nx + y * ny) / norm for x, y in p]
            b = [(x * nx + y * ny) / norm for x, y in q]
            if max(a) <= min(b) + TOLERANCE or max(b) <= min(a) + TOLERANCE:
                return False
    return True


def parents_of(tree: dict) -> dict[str, str | None]:
    out: dict[str, str | None] = {}

    def walk(node, parent):
        if node["children"]:
            out[node["id"]] = parent
            for child in node["children"]:
                walk(child, node["id"])

    walk(tree, None)
    return out


def overlaps(geo: dict, parents: dict) -> list[str]:
    """Every pair of drawn things that overlaps (empty when none does)."""
    found = []
    bals = geo["balances"]
    for i, a in enumerate(bals):
        for j, b in enumerate(bals):
            if i < j and boxes_overlap(a["marks"], b["marks"]):
                found.append(f"marks of {a['id']} and {b['id']}")
            if i < j and any(boxes_overlap(p, q) for p in a["bars"] for q in b["bars"]):
                found.append(f"bars of {a['id']} and {b['id']}")
            if i == j:
                continue
            if boxes_overlap(a["axis"], b["marks"]):
                found.append(f"axis of {a['id']} and marks of {b['id']}")
            for bar in b["bars"]:
                if boxes_overlap(bar, a["marks"]):
                    found.append(f"bar of {b['id']} and marks of {a['id']}")
                # a bar starts on its parent's axis (the tree's joint): only there may they meet
                if parents.get(b["id"]) != a["id"] and boxes_overlap(bar, a["axis"]):
                    found.append(f"bar of {b['id']} and axis of {a['id']}")
    drawn = [(f"marks of {b['id']}", b["marks"]) for b in bals]
    drawn += [(f"bar of {b['id']}", bar) for b in bals for bar in b["bars"]]
    drawn += [(f"axis of {b['id']}", b["axis"]) for b in bals]
    drawn += [(f"leaf marker {k}", box) for k, box in enumerate(geo["dots"])]
    if geo["scale"]:
        drawn.append(("the scale bar", geo["scale"]))
    labels = geo["labels"]
    for i, label in enumerate(labels):
        for other in labels[i + 1 :]:
            if polygons_overlap(label["corners"], other["corners"]):
                found.append(f"labels {label['text']!r} and {other['text']!r}")
        for what, box in drawn:
            if polygons_overlap(label["corners"], box_corners(box)):
                found.append(f"label {label['text']!r} and {what}")
        for x, y in label["corners"]:
            if not (-TOLERANCE <= x <= geo["width"] + TOLERANCE) or not (
                -TOLERANCE <= y <= geo["height"] + TOLERANCE
            ):
                found.append(f"label {label['text']!r} outside the figure")
    for what, box in drawn:
        if box[0] < -TOLERANCE or box[1] < -TOLERANCE or box[2] > geo["width"] + TOLERANCE:
            found.append(f"{what} outside the figure")
        if box[3] > geo["height"] + TOLERANCE:
            found.append(f"{what} outside the figure")
    for k, a in enumerate(drawn):
        for b in drawn[k + 1 :]:
            if a[0].startswith("leaf") or b[0].startswith("leaf") or "scale" in a[0] + b[0]:
                if boxes_overlap(a[1], b[1]):
                    found.append(f"{a[0]} and {b[0]}")
    return found


def check_layout(nb, n: int, shot: str) -> dict:
    geo = nb.js(GEOMETRY_JS, n)
    tree = nb.kernel_json(f"builders[{n}].tree")
    assert geo["identity"], "the dendrogram is drawn at 1:1"
    assert len(geo["balances"]) == n - 1
    assert len(geo["labels"]) == n
    bad = overlaps(geo, parents_of(tree))
    nb.screenshot(nb.page.locator(f".cwtest-builder-{n} .cw-builder"), shot)
    assert bad == [], f"{n} parts: {bad[:10]}"
    return geo


def test_no_two_bars_marks_or_labels_overlap_at_7_and_24_parts(builders):
    nb = builders
    # the control: the same check does see an overlap of two labels put on top of each other
    geo = nb.js(GEOMETRY_JS, 7)
    squeezed = dict(geo, labels=[geo["labels"][0], geo["labels"][0]])
    assert overlaps(squeezed, {}) != []
    seven = check_layout(nb, 7, "builder-7-parts")
    wide = check_layout(nb, 24, "builder-24-parts")
    assert wide["width"] > seven["width"] and wide["height"] > seven["height"]
    assert any(b["extended"] for b in wide["balances"]), "short bars get a dotted end"


def focus_info(nb, n: int) -> dict:
    return nb.js(
        f"""
        const root = document.querySelector(".cwtest-builder-{n} .cw-builder");
        const a = document.activeElement;
        return {{inBuilder: root.contains(a), key: a.getAttribute("data-focus-key"),
                tag: a.tagName}};
        """
    )


def wait_tree(nb, n: int, splits: int, what: str) -> None:
    deadline = time.monotonic() + 30
    while time.monotonic() < deadline:
        tree = nb.kernel_json(f"builders[{n}].tree")
        if len(parents_of(tree)) == splits:
            return
        time.sleep(0.2)
    raise AssertionError(f"the kernel's tree never had {splits} splits ({what})")


def test_keyboard_split_then_ctrl_z_and_ctrl_shift_z_reach_the_builder(builders):
    nb = builders
    page = nb.page
    nb.execute("builders[7].reset()")
    wait_tree(nb, 7, 0, "reset")
    root = page.locator(".cwtest-builder-7 .cw-builder")
    page.wait_for_function(
        "() => document.querySelectorAll('.cwtest-builder-7 [data-role=\"balance\"]').length === 0"
    )
    root.locator('[data-role="leaf"]').focus()
    page.keyboard.press("Enter")  # opens the split editor, focus on the first chip
    assert focus_info(nb, 7)["key"].startswith("chip:")
    page.keyboard.press("Enter")  # moves that part to the other side
    page.keyboard.press("Escape")  # cancel: back to the leaf
    assert focus_info(nb, 7)["key"].startswith("leaf:")
    page.keyboard.press("Enter")
    root.locator('[data-role="apply-split"]').focus()
    page.keyboard.press("Enter")  # split
    wait_tree(nb, 7, 1, "the keyboard split")
    page.wait_for_function(
        """() => {
          const cell = document.querySelector(
            '.cwtest-builder-7 [data-role="balance-row"] [data-role="variance"]');
          return cell && cell.textContent !== "\\u2013";
        }"""
    )
    after_split = focus_info(nb, 7)
    assert after_split["inBuilder"] and after_split["key"].startswith("balance:"), after_split
    page.keyboard.press("Control+z")
    wait_tree(nb, 7, 0, "Ctrl+Z after the split")
    assert focus_info(nb, 7)["inBuilder"]
    page.keyboard.press("Control+Shift+z")
    wait_tree(nb, 7, 1, "Ctrl+Shift+Z after the undo")
    assert focus_info(nb, 7)["inBuilder"]
    # the undo button keeps the focus while there is more to undo; at the first step it is
    # disabled and hands the focus to redo (and the other way round)
    root.locator('[data-role="undo"]').focus()
    page.keyboard.press("Enter")  # back to the single group (the reset)
    wait_tree(nb, 7, 0, "the undo button")
    assert focus_info(nb, 7)["key"] == "undo"
    page.keyboard.press("Enter")  # back to the partition the notebook made
    wait_tree(nb, 7, 6, "the undo button, again")
    info = focus_info(nb, 7)
    assert info["inBuilder"] and info["key"] == "redo", info
    page.keyboard.press("Enter")
    wait_tree(nb, 7, 0, "the redo button")
    assert focus_info(nb, 7)["key"] == "redo"
    page.keyboard.press("Enter")
    wait_tree(nb, 7, 1, "the redo button, again")
    assert focus_info(nb, 7)["key"] == "undo"


def test_every_control_has_an_accessible_name(builders):
    from playwright.sync_api import expect

    nb = builders
    root = nb.page.locator(".cwtest-builder-7 .cw-builder")
    root.locator('[data-role="leaf"]').first.click()  # the editor with its chips
    root.locator('[data-role="suggest-open"]').click()  # the menu entries
    controls = root.locator(
        "button, input, select, [role=button], [role=menuitem], [tabindex='0']"
    ).all()
    assert len(controls) > 15
    for control in controls:
        if not control.is_visible():
            continue
        expect(control).to_have_accessible_name(re.compile(r"\w"), timeout=2000)
    nb.page.keyboard.press("Escape")


def test_automatic_partition_menu_in_the_page(builders):
    from playwright.sync_api import expect

    nb = builders
    page = nb.page
    root = page.locator(".cwtest-builder-24 .cw-builder")
    trigger = root.locator('[data-role="suggest-open"]')
    assert root.locator('[data-role="suggest"]').count() == 2
    trigger.focus()
    page.keyboard.press("ArrowDown")
    menu = root.locator('[role="menu"]')
    expect(menu).to_be_visible()
    entries = menu.locator('[role="menuitem"]')
    expect(entries.nth(0)).to_contain_text("principal balances")
    expect(entries.nth(1)).to_contain_text("Ward clustering of parts")
    for k in range(2):
        note = entries.nth(k).locator(".cw-menu-note").text_content()
        assert len(note) > 30, note
    nb.screenshot(root, "builder-menu-open")
    page.keyboard.press("ArrowDown")
    page.keyboard.press("Enter")  # Ward clustering of parts
    expect(menu).to_be_hidden()
    deadline = time.monotonic() + 60
    same = False
    while time.monotonic() < deadline and not same:
        same = nb.kernel_json(
            "bool(np.array_equal(builders[24].model.sbp, _ward))",
            setup=(
                "from compwidgets.core.principal import ward_sbp as _w\n"
                "_m = builders[24].model\n"
                "_ok = _m.complete_rows()\n"
                "_ward = _w(np.asarray(_m.clr())[_ok], list(_m.active_parts))\n"
            ),
        )
        time.sleep(0.2)
    assert same, "the kernel's SBP is Ward's partition of the parts"
    assert focus_info(nb, 24)["key"] == "suggest-open"
    nb.wait_js(
        """
        const root = document.querySelector(".cwtest-builder-24 .cw-builder");
        return root.querySelectorAll('svg [data-role="selection-mean"]').length === 23;
        """,
        what="the statistics of Ward's partition",
    )
    check_layout(nb, 24, "builder-24-parts-ward")


def png_dimensions(data: bytes) -> tuple[int, int]:
    from PIL import Image

    with Image.open(io.BytesIO(data)) as image:
        return image.size


def wait_file(path, what: str, timeout: float = 60):
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if path.is_file() and path.stat().st_size > 0:
            time.sleep(0.2)  # let the write finish
            return path.read_bytes()
        time.sleep(0.2)
    raise AssertionError(f"{what}: {path} was not written")


def test_save_figure_writes_png_at_scale_and_svg_with_text_nodes(builders):
    from playwright.sync_api import expect

    nb = builders
    page = nb.page
    root = page.locator(".cwtest-builder-7 .cw-builder")
    control = root.locator('[data-role="figure-save"]')
    size = nb.js(
        """
        const svg = document.querySelector('.cwtest-builder-7 svg[data-role="dendrogram"]');
        return [Number(svg.getAttribute("width")), Number(svg.getAttribute("height"))];
        """
    )
    # PNG at 4x, through the control's own fields
    control.locator("select").nth(1).select_option(label="4\u00d7")
    control.locator("input[type=text]").fill("dendro-7-parts.png")
    control.locator("button", has_text="Save figure").click()
    data = wait_file(nb.lab_root / "dendro-7-parts.png", "the PNG")
    assert png_dimensions(data) == (round(size[0] * 4), round(size[1] * 4))
    (ARTIFACTS / "dendro-7-parts.png").write_bytes(data)
    expect(control).to_contain_text(
        f"Saved dendro-7-parts.png (PNG, {round(size[0] * 4)} \u00d7 {round(size[1] * 4)} px"
    )
    # SVG: choose the format; the file name follows
    control.locator("select").nth(0).select_option(label="SVG")
    page.wait_for_function(
        """() => document.querySelector(
          '.cwtest-builder-7 [data-role="figure-save"] input[type=text]').value
          === "dendro-7-parts.svg" """
    )
    control.locator("button", has_text="Save figure").click()
    text = wait_file(nb.lab_root / "dendro-7-parts.svg", "the SVG")
    (ARTIFACTS / "dendro-7-parts.svg").write_bytes(text)
    tree = ET.fromstring(text)
    ns = "{http://www.w3.org/2000/svg}"
    assert tree.tag == f"{ns}svg"
    assert (float(tree.get("width")), float(tree.get("height"))) == tuple(map(float, size))
    parts = nb.kernel_json("list(builders[7].parts)")
    texts = [el.text or "" for el in tree.iter(f"{ns}text")]
    for part in parts:
        assert any(t.startswith(part[:12]) for t in texts), f"{part} is not a text node"
    for el in tree.iter():
        assert el.tag.split("}")[-1] not in {"title", "script", "foreignObject"}
        for name, value in el.attrib.items():
            assert not any(part in value for part in parts), f"{part} in {name}={value!r}"
            assert not name.startswith(("on", "data-", "aria-")), name
    # the figure is styled by itself (no class names, no stylesheet needed)
    shown = nb.js("return document.querySelectorAll('.cwtest-builder-7 svg .cw-bar').length;")
    bars = [el for el in tree.iter(f"{ns}line") if el.get("stroke-width") == "4px"]
    assert len(bars) == shown + 1  # the balances' bars and the scale bar
    assert all(el.get("stroke", "none") != "none" for el in bars)
