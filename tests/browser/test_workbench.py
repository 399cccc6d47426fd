"""The workbench in a real browser: JupyterLab in headless Chromium, driven with the mouse.

1. The quick-start notebook runs top to bottom and every view renders (screenshots).
2. A rectangle brushed in the first ternary selects the same samples in every view: checked in
   the kernel (model, each view's mark) and in the page (highlighted points, the selection bar,
   the builder's count). The time from mouse release to each highlight (median and maximum of
   several rectangles) is printed and written, not asserted: at 2,000 rows (points) and, in a
   second notebook, at 200,000 rows (density pictures), where no widget may be opened.
3. A split made by clicks in the balance builder becomes the exported ilr column.
4. Part names and group values carrying markup reach the page as text only.

Run with ``-s`` to see the timings; they are also written to test-artifacts/browser-timings.json.
"""

from __future__ import annotations

import json
import statistics

import pytest

from .conftest import ARTIFACTS, LARGE_NOTEBOOK, LARGE_ROWS

pytestmark = pytest.mark.browser

VIEW_NAMES = ("ternary-0", "ternary-1", "biplot", "discriminant")

# Kernel side: give each bqplot view and the selection bar a class the test can find (the
# public add_class of ipywidgets; the builder is found by its own "cw-builder" root) and
# describe the scatter mark of each view.
TAG_VIEWS = """
_cw_views = {"ternary-0": bench.ternaries[0], "ternary-1": bench.ternaries[1],
             "biplot": bench.biplot, "discriminant": bench.discriminant}
for _cw_name, _cw_view in _cw_views.items():
    _cw_view.add_class("cwtest-" + _cw_name)
bench.selection_bar.add_class("cwtest-selection-bar")
_cw_info = {
    name: {
        "mark": view.figure.marks.index(view.scatter),
        "density_mark": view.figure.marks.index(view.density),
        "n": len(view.scatter.x),
        "mode": view.active_mode,
        "selected_style": dict(view.scatter.selected_style),
        "unselected_style": dict(view.scatter.unselected_style),
    }
    for name, view in _cw_views.items()
}
_cw_info["n_rows"] = bench.model.n_rows
"""

# Page side: the scatter mark of a view (the mark group at the mark's index in the figure),
# and how many of its points carry a style.
MARK_JS = """
const markOf = (name, index) => {
  const fig = document.querySelector(`.cwtest-${name} svg.svg-figure`);
  const box = fig && fig.querySelector(":scope > g > g");
  return box ? box.children[index] || null : null;
};
// a style as the browser writes it back (e.g. "#111111" -> "rgb(17, 17, 17)"), computed once
// per style: the probe must cost little, as its time falls inside the timings measured
const styleTest = (style) => {
  const probe = document.createElement("div");
  const want = Object.entries(style).map(([k, v]) => {
    probe.style.setProperty(k, String(v));
    return [k, probe.style.getPropertyValue(k)];
  });
  return (el) => want.every(([k, v]) => el.style.getPropertyValue(k) === v);
};
const countStyled = (mark, style) => {
  const styled = styleTest(style);
  let n = 0;
  for (const dot of mark.querySelectorAll(".dot")) if (styled(dot)) n += 1;
  return n;
};
const anyStyled = (mark, style) => {
  const styled = styleTest(style);
  for (const dot of mark.querySelectorAll(".dot")) if (styled(dot)) return true;
  return false;
};
const countOf = (text) => {
  const m = /([\\d,]+) of [\\d,]+ rows? selected/.exec(text || "");
  return m ? Number(m[1].replace(/,/g, "")) : null;
};
"""


def builder_count(n: int) -> str:
    """The builder's count of selected rows, as it words it."""
    return f"{n:,} row selected" if n == 1 else f"{n:,} rows selected"


def tag_and_wait(nb) -> dict:
    """Tag the views, then wait until each draws all its points and the builder has drawn."""
    info = nb.kernel_json("_cw_info", setup=TAG_VIEWS)
    for name in VIEW_NAMES:
        nb.wait_js(
            MARK_JS
            + """
            const mark = markOf(arg.name, arg.info.mark);
            return Boolean(mark) && mark.querySelectorAll(".dot").length === arg.info.n;
            """,
            {"name": name, "info": info[name]},
            what=f"{name} to draw its {info[name]['n']} points",
        )
    nb.wait_js(
        """
        const root = document.querySelector(".cw-builder");
        const count = root && root.querySelector('[data-role="n-selected"]');
        return Boolean(root && root.querySelector('[data-role="dendrogram"]') && count
          && /^[\\d,]+ rows? selected$/.test(count.textContent));
        """,
        what="the balance builder to render",
    )
    nb.wait_js(
        MARK_JS
        + """
        const bar = document.querySelector(".cwtest-selection-bar");
        return Boolean(bar) && countOf(bar.textContent) !== null;
        """,
        what="the selection bar to render",
    )
    return info


@pytest.fixture(scope="module")
def quick_start(open_notebook):
    """The quick start, run top to bottom, with every view rendered; ``.info`` describes them."""
    nb = open_notebook("01_quick_start.ipynb")
    seconds = nb.run_all()
    print(f"quick start: all cells ran in {seconds:.1f} s")
    nb.info = tag_and_wait(nb)
    return nb


def dom_counts(nb) -> dict:
    """What the page shows: styled points per view, the bar's and the builder's counts."""
    return nb.js(
        MARK_JS
        + """
        const out = {views: {}};
        for (const [name, info] of Object.entries(arg)) {
          const mark = markOf(name, info.mark);
          out.views[name] = {
            dots: mark.querySelectorAll(".dot").length,
            selected: countStyled(mark, info.selected_style),
            unselected: countStyled(mark, info.unselected_style),
          };
        }
        out.bar = countOf(document.querySelector(".cwtest-selection-bar").textContent);
        out.builder = document.querySelector(
          '.cw-builder [data-role="n-selected"]').textContent;
        return out;
        """,
        {name: nb.info[name] for name in VIEW_NAMES},
    )


# ------------------------------------------------------------------------------------ tests
def test_quick_start_renders_every_view(quick_start):
    nb = quick_start
    info = nb.info
    for name in VIEW_NAMES:
        assert info[name]["mode"] == "points", f"{name} is not in points mode: {info}"
        assert info[name]["n"] > 0.9 * info["n_rows"], f"{name} shows too few rows: {info}"
    # explore() showed its progress in the cell output while it built, then closed it: no
    # progress bar is left, and no widget view failed
    left = nb.js(
        """
        const out = panel.content.node;
        return {
          progress: out.querySelectorAll(".cw-progress").length,
          visible: [...out.querySelectorAll(".cw-progress")].filter(
            (e) => e.offsetParent !== null).length,
          failed: (out.textContent.match(/Error displaying widget|model not found/g) || [])
            .length,
        };
        """
    )
    assert left["visible"] == 0 and left["failed"] == 0, left

    # the ternary corners are labelled with the view's parts (SVG text)
    parts = nb.kernel_json("[list(v.parts) for v in bench.ternaries]")
    for k, triple in enumerate(parts):
        texts = nb.page.locator(f".cwtest-ternary-{k} svg.svg-figure text").all_text_contents()
        for part in triple:
            assert part in texts, f"ternary {k}: no label {part!r} among {sorted(set(texts))[:40]}"

    # the notebook puts the builder's Ward suggestion on the model: the dendrogram draws one
    # balance per split of the active parts (D - 1 for a complete partition), the first over
    # the root group, and the table lists them
    active = nb.kernel_json("list(bench.model.active_parts)")
    root_id = nb.kernel_json('bench.builder.tree["id"]')
    builder = nb.page.locator(".cw-builder")
    assert builder.locator('[data-role="balance"]').count() == len(active) - 1
    assert builder.locator(f'[data-role="balance"][data-node-id="{root_id}"]').count() == 1
    assert builder.locator('[data-role="balance-row"]').count() == len(active) - 1

    # the selection bar and the builder show the model's selection (the notebook selects one
    # catchment in code)
    n = nb.kernel_json("len(bench.model.selection)")
    assert n > 0
    counts = dom_counts(nb)
    assert counts["bar"] == n
    assert counts["builder"] == builder_count(n)

    shots = {
        "ternary-0": ".cwtest-ternary-0",
        "ternary-1": ".cwtest-ternary-1",
        "biplot": ".cwtest-biplot",
        "builder": ".cw-builder",
        "selection-bar": ".cwtest-selection-bar",
        "workbench": ".cw-workbench",
    }
    for name, selector in shots.items():
        path = nb.screenshot(nb.page.locator(selector), f"quick-start-{name}")
        assert path.stat().st_size > 1000, f"screenshot {path} is (nearly) empty"


#: Rectangles brushed per table; the times reported are their median and maximum.
BRUSHES = 5

PLAN_BRUSHES = """
import numpy as _np
from compwidgets.core import ternary as _ternary
_v = bench.ternaries[0]
# every shown row, projected here from the closed parts (barycentric -> Cartesian)
_xy = _np.asarray(bench.model.closed(list(_v.parts)))[_v.rows] @ _ternary.VERTICES
_x, _y = _xy[:, 0], _xy[:, 1]
_order = _np.argsort(_x)
_boxes = []
for _q in (0.5, 0.4, 0.6, 0.3, 0.7, 0.45, 0.55, 0.35, 0.65, 0.2, 0.8):
    _c = int(_order[int(_q * (_x.size - 1))])
    for _h in (0.05, 0.08, 0.12, 0.18):
        _inside = (_np.abs(_x - _x[_c]) <= _h) & (_np.abs(_y - _y[_c]) <= _h)
        if 0.02 * _x.size <= _inside.sum() <= 0.6 * _x.size:
            _boxes.append({"x": [_x[_c] - _h, _x[_c] + _h], "y": [_y[_c] - _h, _y[_c] + _h],
                           "n": int(_inside.sum())})
            break
_cw_plan = {"boxes": _boxes, "tool": _v.tool, "select_mode": _v.select_mode,
            "centred": _v.centred, "scale_x": [_v.scale_x.min, _v.scale_x.max],
            "scale_y": [_v.scale_y.min, _v.scale_y.max]}
"""

CHECK_BRUSH = """
import numpy as _np
from compwidgets.core import ternary as _ternary
_m = bench.model
_sel = _np.asarray(_m.selection)
_v0 = bench.ternaries[0]
# the view empties the brush once it took the rectangle: read the shape it kept
(_x0, _y0), (_x1, _y1) = _v0.selection_shape["vertices"]
_sx, _sy = sorted([_x0, _x1]), sorted([_y0, _y1])
# barycentric -> Cartesian with the triangle's vertices: a second route to the view's points
_xy = _np.asarray(_m.closed(list(_v0.parts)))[_v0.rows] @ _ternary.VERTICES
_in = ((_xy[:, 0] >= _sx[0]) & (_xy[:, 0] <= _sx[1])
       & (_xy[:, 1] >= _sy[0]) & (_xy[:, 1] <= _sy[1]))
_cw_check = {
    "n": int(_sel.size),
    "brush": [_sx, _sy],
    "rows_in_rectangle": int(_in.sum()),
    "selection_is_rectangle": bool(_np.array_equal(_np.sort(_v0.rows[_in]), _sel)),
    "views": {
        name: {
            "mark_selected": 0 if v.scatter.selected is None else len(v.scatter.selected),
            "shown_and_selected": int(_np.isin(v.rows, _sel).sum()),
        }
        for name, v in _cw_views.items()
    },
    "builder": int(bench.builder.n_selected),
    "bar": int(bench.selection_bar.count),
}
"""

# Page side: watch every view from mouse up until it shows the new selection. Points mode:
# a point carries the selected style. Density mode: the density picture changed (its
# <image> shows another blob) and, when the selection holds points of the hover subsample,
# those are styled too.
WATCH_JS = """
const T = {up: null, done: {}};
window.__cwT = T;
window.addEventListener("mouseup", () => { if (T.up === null) T.up = performance.now(); },
                        {capture: true, once: true});
const WHOLE = {subtree: true, attributes: true, childList: true, characterData: true};
// targets: [element, observer options]; a restyle of a scatter rewrites the style of every
// point, so its first point's style attribute is watched, not thousands of them
const watch = (name, targets, test) => {
  const check = () => {
    if (T.up !== null && !(name in T.done) && test()) {
      T.done[name] = performance.now();
      obs.disconnect();
    }
  };
  const obs = new MutationObserver(check);
  for (const [target, options] of targets) obs.observe(target, options);
};
const firstPoint = (mark) => {
  const dot = mark.querySelector(".dot");
  return dot ? [dot, {attributes: true, attributeFilter: ["style"]}] : [mark, WHOLE];
};
const imageOf = (name, index) => {
  const mark = markOf(name, index);
  const img = mark && mark.querySelector("image");
  return img ? img.getAttribute("href") || img.getAttribute("xlink:href") : null;
};
for (const [name, info] of Object.entries(arg.views)) {
  const mark = markOf(name, info.mark);
  if (info.mode === "density") {
    const before = imageOf(name, info.density_mark);
    watch(name, [[markOf(name, info.density_mark), WHOLE], firstPoint(mark)],
      () => imageOf(name, info.density_mark) !== before
        && (!arg.expect[name] || anyStyled(mark, info.selected_style)));
  } else {
    watch(name, [firstPoint(mark)], () => anyStyled(mark, info.selected_style));
  }
}
const count = document.querySelector('.cw-builder [data-role="n-selected"]');
watch("builder", [[count, WHOLE]], () => count.textContent !== "0 rows selected");
const bar = document.querySelector(".cwtest-selection-bar");
watch("selection bar", [[bar, WHOLE]], () => (countOf(bar.textContent) || 0) > 0);
return true;
"""

CLEARED_JS = """
const count = document.querySelector('.cw-builder [data-role="n-selected"]');
if (count.textContent !== "0 rows selected") return false;
const bar = document.querySelector(".cwtest-selection-bar");
if (countOf(bar.textContent) !== 0) return false;
// nothing selected: no point keeps the selected or the unselected look of an earlier one
return Object.entries(arg).every(([name, info]) =>
  countStyled(markOf(name, info.mark), info.selected_style) === 0
  && countStyled(markOf(name, info.mark), info.unselected_style) === 0);
"""

#: What is measured, in the file test-artifacts/browser-timings.json.
TIMINGS = ARTIFACTS / "browser-timings.json"
_RECORDED: dict = {}


def brush_timings(nb) -> tuple[dict, dict]:
    """Brush BRUSHES rectangles in ternary 0 with the mouse; per view the times (ms) from
    mouse release to the highlight, and the kernel's check of the last brush."""
    info = nb.info
    page = nb.page
    views = {name: info[name] for name in VIEW_NAMES}
    plan = nb.kernel_json("_cw_plan", setup=PLAN_BRUSHES)
    assert len(plan["boxes"]) >= BRUSHES, f"too few rectangles with 2-60 % of the points: {plan}"
    assert plan["tool"] == "brush" and plan["select_mode"] == "replace" and not plan["centred"]
    figure = page.locator(".cwtest-ternary-0 svg.svg-figure")
    times: dict[str, list[float]] = {}
    check: dict = {}
    for box in plan["boxes"][:BRUSHES]:
        nb.execute("bench.model.clear_selection()")
        nb.wait_js(MARK_JS + CLEARED_JS, views, what="every view to show an empty selection")
        page.wait_for_timeout(400)  # let the pictures of the empty selection arrive
        expect = nb.kernel_json(
            "_cw_expect",
            setup=(
                "import numpy as _np\n"
                f"_bx, _by = {box['x']!r}, {box['y']!r}\n"
                "_m = bench.model\n"
                "from compwidgets.core import ternary as _ternary\n"
                "_v0 = bench.ternaries[0]\n"
                "_p = _np.asarray(_m.closed(list(_v0.parts)))[_v0.rows] @ _ternary.VERTICES\n"
                "_rows = _v0.rows[(_p[:, 0] >= _bx[0]) & (_p[:, 0] <= _bx[1])"
                " & (_p[:, 1] >= _by[0]) & (_p[:, 1] <= _by[1])]\n"
                "_cw_expect = {n: bool(_np.isin(v._mark_rows, _rows).any())"
                " for n, v in _cw_views.items()}\n"
            ),
        )
        figure.scroll_into_view_if_needed()
        area = page.locator(".cwtest-ternary-0 svg.svg-figure rect.plotarea_events")
        area = area.bounding_box()
        (x0, x1), (y0, y1) = plan["scale_x"], plan["scale_y"]

        def to_px(x, y, area=area, x0=x0, x1=x1, y0=y0, y1=y1):
            return (
                area["x"] + (x - x0) / (x1 - x0) * area["width"],
                area["y"] + (y1 - y) / (y1 - y0) * area["height"],
            )

        (bx0, bx1), (by0, by1) = box["x"], box["y"]
        nb.js(MARK_JS + WATCH_JS, {"views": views, "expect": expect})
        page.mouse.move(*to_px(bx0, by1))
        page.mouse.down()
        page.mouse.move(*to_px(bx1, by0), steps=12)
        page.mouse.up()
        try:
            nb.wait_js(
                """
                const T = window.__cwT;
                return T.up !== null && [...arg, "builder", "selection bar"]
                  .every((k) => k in T.done);
                """,
                list(VIEW_NAMES),
                timeout=90_000,
                what="every view to show the brushed selection",
            )
        except AssertionError as err:
            seen = nb.js("return window.__cwT")
            raise AssertionError(f"{err}; seen from mouse up: {seen}") from None
        done = nb.js(
            "const T = window.__cwT; const out = {};"
            "for (const [k, t] of Object.entries(T.done)) out[k] = t - T.up; return out;"
        )
        for name, ms in done.items():
            times.setdefault(name, []).append(round(ms, 1))
        check = nb.kernel_json("_cw_check", setup=CHECK_BRUSH)
        # the mouse moves in whole pixels: about the planned rows, exactly the brushed ones
        assert check["n"] > 0, (check, box)
        assert check["selection_is_rectangle"], f"selection != rows inside the brush: {check}"
    return times, check


def record_timings(key: str, times: dict, extra: dict) -> dict:
    """Median and maximum per view, written with this session's other figures to TIMINGS."""
    summary = {
        name: {"median": statistics.median(ms), "max": max(ms), "all": ms}
        for name, ms in sorted(times.items())
    }
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    report = _RECORDED  # this session's figures only (the file is rewritten each time)
    report[key] = {"brush_release_to_highlight_ms": summary, **extra}
    TIMINGS.write_text(json.dumps(report, indent=1))
    print(f"\nbrush -> highlight, {key} (ms from mouse up):", json.dumps(report[key], indent=1))
    return summary


def test_brush_in_one_ternary_selects_in_every_view(quick_start):
    nb = quick_start
    info = nb.info
    page = nb.page
    # the page's speed-ups (views/_figure_speedups.py) took over the points of each view
    # and the brush of each view whose tool is the rectangle
    taken = nb.js(
        MARK_JS
        + """
        const out = {};
        for (const [name, info] of Object.entries(arg)) {
          const brush = document.querySelector(`.cwtest-${name} [data-cw-brush]`);
          out[name] = [markOf(name, info.mark).getAttribute("data-cw-restyle"),
                       brush && brush.getAttribute("data-cw-brush")];
        }
        return out;
        """,
        {name: info[name] for name in VIEW_NAMES},
    )
    assert taken["ternary-0"] == ["fast", "at-release"], taken
    assert all(restyle == "fast" for restyle, _ in taken.values()), taken
    times, check = brush_timings(nb)
    expected = {name: check["views"][name]["mark_selected"] for name in VIEW_NAMES}
    # the page may still be applying the last styles: wait until the counts settle
    nb.wait_js(
        MARK_JS
        + """
        return Object.entries(arg.views).every(([name, info]) =>
          countStyled(markOf(name, info.mark), info.selected_style) === arg.expected[name]);
        """,
        {"views": {name: info[name] for name in VIEW_NAMES}, "expected": expected},
        what="the highlighted points to match the kernel's selection",
    )
    shown = dom_counts(nb)
    record_timings(
        f"{info['n_rows']:,} rows (points)",
        times,
        {
            "selected_last": check["n"],
            "points_per_view": {name: info[name]["n"] for name in VIEW_NAMES},
        },
    )
    for name in ("ternary-0", "ternary-1", "biplot"):
        nb.screenshot(page.locator(f".cwtest-{name}"), f"brushed-{name}")

    n = check["n"]
    assert n > 0, f"the brush selected nothing: {check}"
    for name in VIEW_NAMES:
        view = check["views"][name]
        assert view["shown_and_selected"] > 0, f"{name} shows none of the selection: {check}"
        assert view["mark_selected"] == view["shown_and_selected"], (name, check)
        dom = shown["views"][name]
        assert dom["selected"] == view["mark_selected"], (name, dom, check)
        assert dom["unselected"] == dom["dots"] - view["mark_selected"], (name, dom, check)
    assert check["builder"] == n and check["bar"] == n
    assert shown["builder"] == builder_count(n)
    assert shown["bar"] == n


DENSITY_CHECK = """
import io as _io
import numpy as _np
from PIL import Image as _Image
_m = bench.model
_cw_density = {}
for _name, _v in _cw_views.items():
    # the picture shown is the one of the model's selection: decode it (Pillow) and compare
    # its selection layer with the counts of the selected rows on the view's grid
    _img = _np.asarray(_Image.open(_io.BytesIO(_v.density.image.value)).convert("RGBA"))
    _counts = _v._density_image.counts_of_rows(_m.selection)
    _cw_density[_name] = {
        "widgets": len({id(p) for p in _v._pictures}),
        "shown_is_one_of_them": any(_v.density.image is p for p in _v._pictures),
        "cells_with_selection": int((_counts > 0).sum()) if _counts is not None else 0,
        "opaque_cells": int((_img[..., 3] > 0).sum()),
    }
"""


def test_brush_at_200000_rows_in_density_mode(open_notebook):
    nb = open_notebook(LARGE_NOTEBOOK)
    seconds = nb.run_all()
    print(f"{LARGE_NOTEBOOK}: all cells ran in {seconds:.1f} s")
    nb.info = tag_and_wait(nb)
    info = nb.info
    assert info["n_rows"] == LARGE_ROWS
    for name in VIEW_NAMES:
        assert info[name]["mode"] == "density", info
    opened_before = nb.kernel_json("len(_cw_opened)", setup=COUNT_COMMS)
    times, check = brush_timings(nb)
    opened = nb.kernel_json("len(_cw_opened)") - opened_before
    density = nb.kernel_json("_cw_density", setup=DENSITY_CHECK)
    summary = record_timings(
        f"{LARGE_ROWS:,} rows (density)",
        times,
        {"selected_last": check["n"], "widgets_opened_by_the_brushes": opened},
    )
    for name in ("ternary-0", "ternary-1", "biplot"):
        nb.screenshot(nb.page.locator(f".cwtest-{name}"), f"density-brushed-{name}")
    assert opened == 0, "a selection change opened a widget"
    for name, d in density.items():
        assert d["widgets"] == 2 and d["shown_is_one_of_them"], (name, d)
        assert d["cells_with_selection"] > 0, (name, d)
    assert check["builder"] == check["n"] and check["bar"] == check["n"]
    assert set(summary) >= {"ternary-1", "biplot", "builder", "selection bar"}


# Kernel side: count the comms opened from now on (a new widget opens one).
COUNT_COMMS = """
import comm as _comm
_cw_opened = []
if not getattr(_comm, "_cw_counting", False):
    _cw_create = _comm.create_comm
    def _cw_count(**kwargs):
        _cw_opened.append(kwargs.get("target_name"))
        return _cw_create(**kwargs)
    _comm.create_comm = _cw_count
    _comm._cw_counting = True
"""


SPLIT_CHECK = """
import numpy as _np
import compwidgets as _cw
from compwidgets import core as _core
_m = bench.model
_num, _den = {num!r}, {den!r}
_parts = list(_m.active_parts)
_S = _np.array([[1 if p in _num else -1 if p in _den else 0 for p in _parts]])
_ilr = _cw.export.ilr_frame(_m, require_complete=False)
_ok = _m.complete_rows()
_X = _m.part_values()[_ok]
_ref = _np.asarray(_core.balances(_X, _S, complete=False))[:, 0]
# the balance formula itself, numpy only: sqrt(rs/(r+s)) * ln(g(numerator) / g(denominator))
# (Egozcue & Pawlowsky-Glahn 2005)
_r, _s = len(_num), len(_den)
_L = _np.log(_X)
_formula = _np.sqrt(_r * _s / (_r + _s)) * (
    _L[:, [_parts.index(p) for p in _num]].mean(axis=1)
    - _L[:, [_parts.index(p) for p in _den]].mean(axis=1))
_col = _ilr.to_numpy()[:, 0] if _ilr.shape[1] else _np.zeros(0)
_cw_split = {{
    "columns": [str(c) for c in _ilr.columns],
    "index_kept": bool(_ilr.index.equals(_m.index)),
    "sbp": None if _m.sbp is None else _m.sbp.tolist(),
    "expected_sbp": _S.tolist(),
    "nan_where_incomplete": bool(_np.isnan(_col[~_ok]).all()) if _col.size else False,
    "max_diff_core": float(_np.max(_np.abs(_col[_ok] - _ref))) if _col.size else None,
    "max_diff_formula": float(_np.max(_np.abs(_col[_ok] - _formula))) if _col.size else None,
    "n_complete": int(_ok.sum()),
}}
"""


def test_builder_split_by_clicks_exports_that_balance(quick_start):
    nb = quick_start
    page = nb.page
    builder = page.locator(".cw-builder")

    nb.execute("bench.builder.reset()")
    before = nb.kernel_json(
        "_cw_before",
        setup=(
            "import compwidgets as _cw\n"
            "try:\n"
            "    _f = _cw.export.ilr_frame(bench.model, require_complete=False)\n"
            "    _cw_before = list(_f.columns)\n"
            "except Exception as err:\n"
            "    _cw_before = type(err).__name__ + ': ' + str(err)\n"
        ),
    )
    assert isinstance(before, str) and before.startswith("ExportError"), before
    nb.wait_js(
        """return document.querySelectorAll(
             '.cw-builder [data-role="balance-row"]').length === 0;""",
        what="the builder to show no balance",
    )

    parts = nb.kernel_json("list(bench.builder.parts)")
    root_id = nb.kernel_json('bench.builder.tree["id"]')
    numerator = parts[::3]  # every third part on the numerator side
    denominator = [p for p in parts if p not in numerator]

    builder.locator(f'[data-role="leaf"][data-node-id="{root_id}"] rect.cw-leaf-hit').click()
    chips = builder.locator('[data-role="splitter"] [data-role="chip"]')
    chips.first.wait_for()
    assert chips.count() == len(parts)
    for index, part in enumerate(parts):
        want = "numerator" if part in numerator else "denominator"
        chip = builder.locator(f'[data-role="chip"][data-part-index="{index}"]')
        assert chip.text_content() == part
        if chip.get_attribute("data-side") != want:
            chip.click()  # moves it to the other side (the editor redraws)
            chip = builder.locator(f'[data-role="chip"][data-part-index="{index}"]')
            assert chip.get_attribute("data-side") == want, part
    preview = builder.locator('[data-role="split-preview"]').text_content()
    assert preview == f"new balance: {','.join(numerator)} | {','.join(denominator)}"

    nb.js(
        """
        window.__cwSplit = {click: null, done: null};
        const root = document.querySelector(".cw-builder");
        root.addEventListener("click", () => { window.__cwSplit.click = performance.now(); },
                              {capture: true, once: true});
        const obs = new MutationObserver(() => {
          const cell = root.querySelector('[data-role="balance-row"] [data-role="variance"]');
          if (cell && cell.textContent !== "\\u2013") {
            window.__cwSplit.done = performance.now();
            obs.disconnect();
          }
        });
        obs.observe(root, {subtree: true, childList: true, characterData: true});
        return true;
        """
    )
    builder.locator('[data-role="apply-split"]').click()
    rows = builder.locator('[data-role="balance-row"]')
    nb.wait_js(
        "return window.__cwSplit.done !== null;",
        timeout=60_000,
        what="the new balance with its variance in the builder's table",
    )
    split_ms = nb.js("return window.__cwSplit.done - window.__cwSplit.click;")
    print(f"\nbuilder: split click -> balance row with its variance: {split_ms:.0f} ms")
    assert rows.count() == 1
    name_box = rows.first.locator('[data-role="name-input"]')
    shown_name = name_box.input_value() or name_box.get_attribute("placeholder")
    shown_num = rows.first.locator('[data-role="numerator"]').text_content().split(", ")
    shown_den = rows.first.locator('[data-role="denominator"]').text_content().split(", ")
    assert shown_num == numerator and shown_den == denominator
    nb.screenshot(builder, "builder-after-split")

    result = nb.kernel_json("_cw_split", setup=SPLIT_CHECK.format(num=shown_num, den=shown_den))
    print(
        "builder split, kernel side:", json.dumps({k: v for k, v in result.items() if k != "sbp"})
    )
    assert result["columns"] == [shown_name]
    assert result["sbp"] == result["expected_sbp"]
    assert result["index_kept"]
    assert result["n_complete"] > 0
    assert result["nan_where_incomplete"]
    assert result["max_diff_core"] <= 1e-9, result
    assert result["max_diff_formula"] <= 1e-9, result


XSS_PARTS = ("<img src=x onerror=alert(1)>", '<img src=x onerror="window.__xss=1">')
XSS_GROUP = '<b onmouseover="window.__xss=2">bold</b><script>window.__xss=3</script>'


def test_markup_in_the_table_renders_as_text(open_notebook):
    nb = open_notebook("xss_labels.ipynb")
    nb.page.evaluate("window.__xss = 0")
    nb.run_all()
    nb.info = tag_and_wait(nb)
    parts = nb.kernel_json("list(bench.model.parts)")
    assert parts[:2] == list(XSS_PARTS)

    found = nb.js(
        """
        const bench = document.querySelector(".cw-workbench");
        const texts = (sel) => [...bench.querySelectorAll(sel)].map((e) => e.textContent);
        return {
          ternary0: texts(".cwtest-ternary-0 svg.svg-figure text"),
          biplot: texts(".cwtest-biplot svg.svg-figure text"),
          builderTitles: texts(".cw-builder title"),
          // ipywidgets shows the spaces of option labels as no-break spaces
          options: texts("option").map((t) => t.replace(/\u00a0/g, " ")),
        };
        """
    )
    for part in XSS_PARTS:
        assert part in found["ternary0"], f"{part!r} is not a ternary label"
        assert part in found["biplot"], f"{part!r} is not a biplot label"
        assert part in found["options"], f"{part!r} is not a picker option"
        assert any(part in t for t in found["builderTitles"]), f"{part!r} not in the builder"
    # the legend shows the group value as text (shortened with an ellipsis when long)
    legend = [
        t
        for t in found["ternary0"]
        if t == XSS_GROUP or (len(t) > 8 and t.endswith("\u2026") and XSS_GROUP.startswith(t[:-1]))
    ]
    assert legend, f"the group value is not a ternary legend text: {found['ternary0']}"

    # hover a point of the markup group: the tooltip names its group as text
    row = nb.kernel_json(
        "_cw_row",
        setup=(
            "import numpy as _np\n"
            "_v = bench.ternaries[0]\n"
            "_codes = bench.model.group_codes()\n"
            "_k = _codes[0].index(" + repr(XSS_GROUP) + ")\n"
            "_cw_row = [int(i) for i in _np.flatnonzero(_codes[1][_v.rows] == _k)]\n"
            "_v.tool = 'none'\n"  # selection tool Off: the brush layer would catch the pointer
        ),
    )
    nb.wait_js(
        """
        const buttons = document.querySelectorAll(".cwtest-ternary-0 .widget-toggle-button");
        return [...buttons].some(
          (b) => b.textContent.trim() === "Off" && b.classList.contains("mod-active"));
        """,
        what="the selection tool to be Off",
    )
    nb.page.locator(".cwtest-ternary-0 svg.svg-figure").scroll_into_view_if_needed()
    hovered = None
    for _attempt in range(20):  # the brush layer goes away a moment after the tool changes
        hovered = nb.js(
            MARK_JS
            + """
            const mark = markOf("ternary-0", arg.mark);
            const dots = mark.querySelectorAll(".dot");
            for (const i of arg.rows) {
              const r = dots[i].getBoundingClientRect();
              const x = r.left + r.width / 2, y = r.top + r.height / 2;
              if (document.elementFromPoint(x, y) === dots[i]) return [x, y];
            }
            return null;
            """,
            {"mark": nb.info["ternary-0"]["mark"], "rows": row},
        )
        if hovered is not None:
            break
        nb.page.wait_for_timeout(250)
    assert hovered is not None, "no point of the markup group is uncovered in ternary 0"
    nb.page.mouse.move(hovered[0] - 30, hovered[1] - 30)
    nb.page.mouse.move(*hovered, steps=5)
    nb.wait_js(
        """
        return [...document.querySelectorAll(".bqplot_mark_tooltip")]
          .some((t) => t.textContent.includes(arg));
        """,
        "site: " + XSS_GROUP,
        timeout=30_000,
        what="the tooltip to show the group value as text",
    )
    nb.page.wait_for_timeout(500)  # let any injected handler run before looking for it

    injected = nb.js(
        """
        return {
          imgX: [...document.querySelectorAll("img")].filter(
            (e) => e.getAttribute("src") === "x").length,
          handlers: document.querySelectorAll("[onerror], [onmouseover]").length,
          scripts: [...document.querySelectorAll("script")].filter(
            (e) => e.textContent.includes("__xss")).length,
          boldInViews: document.querySelectorAll(".cw-workbench b").length,
          flag: window.__xss,
        };
        """
    )
    nb.screenshot(nb.page.locator(".cwtest-ternary-0"), "xss-ternary-0")
    assert injected == {"imgX": 0, "handlers": 0, "scripts": 0, "boldInViews": 0, "flag": 0}
    assert nb.dialogs == [], f"a dialog opened: {nb.dialogs}"

    # control: the same strings parsed as markup on purpose (outside the views) do trip the
    # detectors above, so their silence means the views showed the names as text
    control = nb.js(
        """
        const box = document.createElement("div");
        document.body.appendChild(box);
        box.innerHTML = arg.join("");  // deliberately unsafe, test-only
        await new Promise((resolve) => setTimeout(resolve, 1500));
        const out = {
          imgX: [...document.querySelectorAll("img")].filter(
            (e) => e.getAttribute("src") === "x").length,
          flag: window.__xss,
        };
        box.remove();
        return out;
        """,
        list(XSS_PARTS),
    )
    nb.page.wait_for_timeout(500)
    assert control == {"imgX": 2, "flag": 1}, control
    assert nb.dialogs == ["alert: 1"], nb.dialogs
