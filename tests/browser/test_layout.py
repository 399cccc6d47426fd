"""The workbench's screen layout in a real browser, at 1920 x 1080 and at 1366 x 768.

The quick start runs in JupyterLab (its own copy, so that resizing the page leaves the other
tests alone); then, at each window size, the page is measured:

* the plots sit side by side (bqplot figures larger than 250 x 200 px of two different views
  share a row: their tops differ by less than 80 px and their boxes do not overlap), at
  1920 x 1080;
* the builder's dendrogram and a brushable ternary figure are both inside the window at once,
  with the workbench scrolled to its top, at 1920 x 1080;
* no cell of the grid overlaps another and nothing is wider than the notebook (the grid wraps);
* no text is cut: every element with its own text (or an input, select or button), visible,
  outside any SVG, whose overflow is not a scroll box, has ``scrollWidth <= clientWidth + 1``,
  and the placeholder of an empty field fits in it (measured with a canvas in the field's
  font), unless it shows its full text on hover (a ``title`` holding it);
* every SVG text label of a figure lies inside its figure's box;
* every control has an accessible name.

Screenshots of both sizes go to ``test-artifacts/layout-<width>x<height>.png``.
"""

from __future__ import annotations

import json

import pytest

from .conftest import ARTIFACTS, LAYOUT_NOTEBOOK

pytestmark = pytest.mark.browser

SIZES = ((1920, 1080), (1366, 768))

#: Page side: measures the workbench as it is drawn now.
MEASURE_JS = """
const bench = document.querySelector(".cw-workbench");
const W = window.innerWidth, H = window.innerHeight;
const box = (el) => {
  const r = el.getBoundingClientRect();
  return {left: r.left, top: r.top, right: r.right, bottom: r.bottom,
          width: r.width, height: r.height};
};
const visible = (el) => {
  if (!el.getClientRects().length) return false;
  const s = getComputedStyle(el);
  return s.visibility !== "hidden" && s.display !== "none";
};
const describe = (el) => {
  const cls = typeof el.className === "string" ? el.className : "";
  return `${el.tagName.toLowerCase()}.${cls.split(/\\s+/).slice(0, 3).join(".")}`;
};
const ownText = (el) => [...el.childNodes]
  .filter((n) => n.nodeType === Node.TEXT_NODE).map((n) => n.textContent).join("").trim();

// figures: the bqplot ones (large enough to be plots) and the builder's dendrogram
const figures = [...bench.querySelectorAll("svg.svg-figure")]
  .filter((s) => visible(s)).map((s) => ({el: s, r: box(s)}))
  .filter((f) => f.r.width > 250 && f.r.height > 200);
// pairs of figures of two different views sharing a row
let sideBySide = 0;
for (let i = 0; i < figures.length; i++) {
  for (let j = i + 1; j < figures.length; j++) {
    const a = figures[i].r, b = figures[j].r;
    if (figures[i].el.closest(".cwlayout-view") === figures[j].el.closest(".cwlayout-view")) {
      continue;
    }
    const apart = a.right <= b.left + 1 || b.right <= a.left + 1;
    if (Math.abs(a.top - b.top) < 80 && apart) sideBySide += 1;
  }
}
const inWindow = (r) => r.left >= -1 && r.top >= -1 && r.right <= W + 1 && r.bottom <= H + 1;
const dendrogram = bench.querySelector('.cw-builder [data-role="dendrogram"]');
const ternary = document.querySelector(".cwlayout-ternary-1 svg.svg-figure");

// cells of the grid: none overlaps another, none is wider than the notebook's output
const cells = [...bench.querySelectorAll(".cw-grid > .cw-cell")].filter(visible);
const overlaps = [];
for (let i = 0; i < cells.length; i++) {
  for (let j = i + 1; j < cells.length; j++) {
    const a = box(cells[i]), b = box(cells[j]);
    const x = Math.min(a.right, b.right) - Math.max(a.left, b.left);
    const y = Math.min(a.bottom, b.bottom) - Math.max(a.top, b.top);
    if (x > 1 && y > 1) overlaps.push([i, j, a, b]);
  }
}
const output = bench.closest(".jp-OutputArea-output") || bench.parentElement;
const outBox = box(output);
const tooWide = [bench, ...cells, ...bench.querySelectorAll(".cw-grid > .cw-cell *")]
  .filter((el) => visible(el) && !el.closest("svg"))
  .filter((el) => box(el).right > outBox.right + 1 && !el.closest(".jupyter-widget-tab-contents"))
  .slice(0, 10).map((el) => [describe(el), box(el).right, outBox.right]);

// clipped text (the notes' rule), except text shown in full on hover
const clipped = [];
for (const el of bench.querySelectorAll("*")) {
  if (el.closest("svg") || !visible(el)) continue;
  const control = el.matches("input, select, button, textarea");
  const text = control ? (el.value || el.textContent || "").trim() : ownText(el);
  if (!text) continue;
  const ox = getComputedStyle(el).overflowX;
  if (ox === "auto" || ox === "scroll") continue;
  if (el.scrollWidth <= el.clientWidth + 1) continue;
  const hover = el.closest("[title]");
  if (hover && hover.getAttribute("title").includes(text)) continue;
  clipped.push({el: describe(el), classes: String(el.className), text: text.slice(0, 80),
                scroll: el.scrollWidth, client: el.clientWidth,
                whiteSpace: getComputedStyle(el).whiteSpace});
}

// a placeholder wider than its empty field is cut too (scrollWidth does not count it)
const pen = document.createElement("canvas").getContext("2d");
for (const el of bench.querySelectorAll("input[placeholder], textarea[placeholder]")) {
  if (el.value || !el.placeholder || !visible(el) || el.closest("svg")) continue;
  const s = getComputedStyle(el);
  pen.font = `${s.fontStyle} ${s.fontWeight} ${s.fontSize} ${s.fontFamily}`;
  const room = el.clientWidth - parseFloat(s.paddingLeft) - parseFloat(s.paddingRight);
  if (pen.measureText(el.placeholder).width <= room + 1) continue;
  if ((el.getAttribute("title") || "").includes(el.placeholder)) continue;
  clipped.push({el: describe(el), text: "placeholder: " + el.placeholder.slice(0, 70),
                need: pen.measureText(el.placeholder).width, room});
}

// SVG labels inside their figure
const strayLabels = [];
for (const svg of bench.querySelectorAll("svg")) {
  if (svg.parentElement.closest("svg") || !visible(svg)) continue;
  const frame = box(svg);
  if (frame.width < 20 || frame.height < 20) continue;  // icons
  for (const t of svg.querySelectorAll("text")) {
    if (!t.textContent.trim() || !visible(t)) continue;
    const s = getComputedStyle(t);
    if (s.opacity === "0" || t.closest("[opacity='0']")) continue;
    const r = box(t);
    if (r.width === 0 || r.height === 0) continue;
    if (r.left < frame.left - 1 || r.right > frame.right + 1
        || r.top < frame.top - 1 || r.bottom > frame.bottom + 1) {
      strayLabels.push({text: t.textContent.slice(0, 40), label: r, figure: frame,
                        in: describe(svg.parentElement)});
    }
  }
}

// accessible names of the controls
const nameOf = (el) => {
  const aria = el.getAttribute("aria-label");
  if (aria && aria.trim()) return aria.trim();
  const by = el.getAttribute("aria-labelledby");
  if (by) {
    const t = by.split(/\\s+/).map((id) => document.getElementById(id))
      .filter(Boolean).map((n) => n.textContent).join(" ").trim();
    if (t) return t;
  }
  if (el.labels && el.labels.length) {
    const t = [...el.labels].map((l) => l.textContent).join(" ").trim();
    if (t) return t;
  }
  if (el.matches("button") && el.textContent.trim()) return el.textContent.trim();
  if (el.getAttribute("title") && el.getAttribute("title").trim()) return el.title.trim();
  return "";
};
const unnamed = [...bench.querySelectorAll("input, select, textarea, button")]
  .filter((el) => visible(el) && el.type !== "hidden" && !nameOf(el))
  .slice(0, 20).map((el) => {
    const cell = el.closest(".cw-cell");
    const title = cell ? cell.querySelector(".cw-cell-title").textContent : "";
    const near = (el.closest(".widget-inline-hbox") || el.parentElement).textContent;
    return `${describe(el)} in ${title}: ${(el.value || near || "").slice(0, 40)}`;
  });

return {
  window: [W, H], figures: figures.map((f) => f.r), sideBySide,
  dendrogram: dendrogram ? box(dendrogram) : null, ternary: ternary ? box(ternary) : null,
  dendrogramInWindow: Boolean(dendrogram) && inWindow(box(dendrogram)),
  ternaryInWindow: Boolean(ternary) && inWindow(box(ternary)),
  bench: box(bench), output: outBox,
  cells: cells.map((c) => [c.querySelector(".cw-cell-title").textContent, box(c)]),
  overflow: bench.scrollWidth - bench.clientWidth,
  overlaps, tooWide, clipped: clipped.slice(0, 30), nClipped: clipped.length,
  strayLabels: strayLabels.slice(0, 20), nStray: strayLabels.length, unnamed,
};
"""

TAG = """
bench.ternaries[0].add_class("cwlayout-ternary-1")
for _cw_view in bench.views:
    _cw_view.add_class("cwlayout-view")
_cw_parts = [list(v.parts) for v in bench.ternaries]
"""


@pytest.fixture(scope="module")
def laid_out(open_notebook):
    """The quick start run at 1920 x 1080 with every view drawn."""
    nb = open_notebook(LAYOUT_NOTEBOOK)
    nb.page.set_viewport_size({"width": SIZES[0][0], "height": SIZES[0][1]})
    nb.run_all()
    nb.kernel_json("_cw_parts", setup=TAG)
    nb.wait_js(
        """
        const bench = document.querySelector(".cw-workbench");
        if (!bench) return false;
        const figs = [...bench.querySelectorAll("svg.svg-figure")].filter(
          (s) => s.getBoundingClientRect().width > 250);
        return figs.length >= 3 && Boolean(document.querySelector(".cwlayout-ternary-1"))
          && Boolean(bench.querySelector('.cw-builder [data-role="dendrogram"] rect'));
        """,
        what="the workbench to draw its figures and the builder",
    )
    return nb


def measure(nb, width: int, height: int, name: str) -> dict:
    """Resize the window, show the workbench from its top, measure it and screenshot it."""
    page = nb.page
    page.set_viewport_size({"width": width, "height": height})
    page.wait_for_timeout(800)  # let the grid and the figures reflow
    nb.js(
        """
        const bench = document.querySelector(".cw-workbench");
        bench.scrollIntoView({block: "start", inline: "nearest"});
        return true;
        """
    )
    page.wait_for_timeout(400)
    found = nb.js(MEASURE_JS)
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / f"{name}.png"))
    (ARTIFACTS / f"{name}.json").write_text(json.dumps(found, indent=1))
    print(f"\n{name}:", json.dumps({k: found[k] for k in ("sideBySide", "nClipped", "nStray")}))
    return found


@pytest.mark.parametrize("width, height", SIZES, ids=[f"{w}x{h}" for w, h in SIZES])
def test_the_workbench_fits_the_screen_without_cut_text(laid_out, width, height):
    found = measure(laid_out, width, height, f"layout-{width}x{height}")
    assert (ARTIFACTS / f"layout-{width}x{height}.png").stat().st_size > 10_000
    if width >= 1920:
        # the plots share rows (the grid wraps with the width, not one column)
        assert len(found["figures"]) >= 4, found["figures"]
        assert found["sideBySide"] >= 1, f"plots do not sit side by side: {found['figures']}"
        # the builder and a brushable view are on screen together, without scrolling
        assert found["dendrogramInWindow"], (found["dendrogram"], found["window"])
        assert found["ternaryInWindow"], (found["ternary"], found["window"])
    # it wraps cleanly: no cell over another, nothing wider than the notebook
    assert found["overlaps"] == [], found["overlaps"]
    assert found["overflow"] <= 1 and found["tooWide"] == [], found["tooWide"]
    assert found["clipped"] == [], f"{found['nClipped']} cut texts: {found['clipped']}"
    assert found["strayLabels"] == [], f"{found['nStray']} labels out: {found['strayLabels']}"
    assert found["unnamed"] == [], f"controls without an accessible name: {found['unnamed']}"
