"""Drawing tools of a scatter view in a real browser (JupyterLab, headless Chromium, the mouse).

A notebook of invented rows (written into the server's root by this module) shows one
ternary view between two tall outputs, so the page scrolls. The test then

1. clicks the "Lasso" tool button and checks that the figure did not move on the page;
2. draws two lassos in different places: after the second, the page shows one lasso
   outline at most and the model holds the rows of the second lasso only (checked in the
   kernel with matplotlib's point-in-polygon on the lasso's path turned into data units);
3. drags a rectangle, then presses inside it and drags a smaller one: the selection is the
   rows of the smaller rectangle (a press inside the old one started a new shape).
"""

from __future__ import annotations

import pytest

pytestmark = pytest.mark.browser

NOTEBOOK = "drawing_tools.ipynb"

SOURCE = """\
import numpy as np
import pandas as pd
from IPython.display import display

from compwidgets.intake import read_composition
from compwidgets.model import CompositionModel
from compwidgets.views.ternary import TernaryView

print("\\n".join(f"line {k} above the view" for k in range(60)))
rng = np.random.default_rng(4)  # invented numbers: a lognormal cloud of 600 rows
values = np.exp(rng.normal([1.0, 0.5, 0.0], 0.6, size=(600, 3)))
model = CompositionModel(read_composition(
    pd.DataFrame(values, columns=["A", "B", "C"]), check_total=False))
view = TernaryView(model, ["A", "B", "C"])
view.add_class("cwtest-drawing")
display(view)
"""
#: A second cell, so that the view's cell is not the active one after "run all" (a click
#: in it then makes it active, which is when JupyterLab may scroll).
BELOW = """print("\\n".join(f"line {k} below the view" for k in range(80)))"""


def notebook_json() -> str:
    import nbformat
    from nbformat.v4 import new_code_cell, new_notebook

    nb = new_notebook(
        cells=[new_code_cell(SOURCE), new_code_cell(BELOW)],
        metadata={
            "kernelspec": {"display_name": "Python 3", "language": "python", "name": "python3"}
        },
    )
    nb.cells[0]["id"], nb.cells[1]["id"] = "drawing-view", "drawing-below"
    return nbformat.writes(nb)


PLOT_AREA = ".cwtest-drawing svg.svg-figure rect.plotarea_events"

# Kernel side: the rows inside a path of page pixels (turned into data units with the
# plot area's box and the scales), by matplotlib's point-in-polygon.
INSIDE = """
import numpy as _np
from matplotlib.path import Path as _Path
_box = {box!r}
_px = _np.asarray({path!r}, dtype=float)
_sx, _sy = view.scale_x, view.scale_y
_x = _sx.min + (_px[:, 0] - _box["x"]) / _box["width"] * (_sx.max - _sx.min)
_y = _sy.max - (_px[:, 1] - _box["y"]) / _box["height"] * (_sy.max - _sy.min)
_in = _Path(_np.column_stack([_x, _y])).contains_points(_np.column_stack([view._x, view._y]))
_cw_inside = [int(r) for r in view.rows[_in]]
"""


# Kernel side: two places of the cloud (its median, and a point further right), as shares
# of the plot area from its top left corner.
CENTRES = """
import numpy as _np
def _share(x, y):
    return [float((x - view.scale_x.min) / (view.scale_x.max - view.scale_x.min)),
            float((view.scale_y.max - y) / (view.scale_y.max - view.scale_y.min))]
_mx, _my = _np.median(view._x), _np.median(view._y)
_far = _np.argsort(_np.hypot(view._x - _mx, view._y - _my))[len(view._x) // 3]
_cw_centres = [_share(_mx, _my), _share(view._x[_far], view._y[_far])]
"""


@pytest.fixture(scope="module")
def drawing(lab, open_notebook):
    (lab.root / NOTEBOOK).write_text(notebook_json())
    nb = open_notebook(NOTEBOOK)
    nb.run_all()
    nb.wait_js(
        "return document.querySelectorAll('.cwtest-drawing .dot').length === 600;",
        what="the view to draw its 600 points",
    )
    return nb


def selection(nb) -> list[int]:
    return nb.kernel_json("[int(r) for r in model.selection]")


def wait_selection(nb, previous: list[int]) -> list[int]:
    for _ in range(100):
        now = selection(nb)
        if now != previous:
            return now
        nb.page.wait_for_timeout(100)
    return selection(nb)


def drag(page, points) -> None:
    page.mouse.move(*points[0])
    page.mouse.down()
    for p in points[1:]:
        page.mouse.move(*p, steps=3)
    page.mouse.up()


def test_tool_buttons_lasso_and_rectangle_in_the_page(drawing):
    nb = drawing
    page = nb.page
    page.locator(".cwtest-drawing").scroll_into_view_if_needed()
    area = page.locator(PLOT_AREA)
    before = area.bounding_box()

    # 1. a tool button does not move the figure
    page.locator(".cwtest-drawing .widget-toggle-button", has_text="Lasso").click()
    nb.wait_js(
        """
        return [...document.querySelectorAll(".cwtest-drawing .widget-toggle-button")]
          .some((b) => b.textContent.trim() === "Lasso" && b.classList.contains("mod-active"));
        """,
        what="the lasso button to be on",
    )
    assert nb.kernel_json("view.tool") == "lasso"
    page.wait_for_timeout(500)
    after = area.bounding_box()
    assert abs(after["y"] - before["y"]) <= 1 and abs(after["x"] - before["x"]) <= 1, (
        before,
        after,
    )

    # 2. two lassos: the second stands alone
    box = after

    def ring(cx, cy, r):
        import math

        return [
            (box["x"] + box["width"] * (cx + r * math.cos(a / 12 * 2 * math.pi)),
             box["y"] + box["height"] * (cy + r * math.sin(a / 12 * 2 * math.pi)))
            for a in range(13)
        ]  # fmt: skip

    # two places of the cloud, as shares of the plot area from its top left corner
    (c1, c2) = nb.kernel_json("_cw_centres", setup=CENTRES)
    first = ring(*c1, 0.06)
    drag(page, first)
    got_first = wait_selection(nb, [])
    assert got_first, "the first lasso selected nothing"
    drag(page, ring(*c2, 0.06))
    got_second = set(wait_selection(nb, got_first))
    # the browser's lasso follows the mouse in whole pixels: rows well inside the ring
    # are selected, rows well outside are not (and none of the first lasso's)
    inner = nb.kernel_json("_cw_inside", setup=INSIDE.format(box=box, path=ring(*c2, 0.054)))
    outer = nb.kernel_json("_cw_inside", setup=INSIDE.format(box=box, path=ring(*c2, 0.066)))
    print(f"\nlassos: first {len(got_first)} rows, second {len(got_second)}, "
          f"inside the second {len(inner)} to {len(outer)}")  # fmt: skip
    assert inner and set(inner) <= got_second <= set(outer)
    assert set(got_first) - set(outer), "the lassos overlap too much to tell them apart"
    page.wait_for_timeout(300)
    outlines = nb.js(
        "return document.querySelectorAll('.cwtest-drawing .lassoselector path').length;"
    )
    assert outlines <= 1, f"{outlines} lasso outlines drawn"

    # 3. a rectangle, then a press inside it starts a smaller one
    nb.execute("view.tool = 'brush'")
    nb.wait_js(
        "return document.querySelector('.cwtest-drawing .brushintsel') !== null;",
        what="the rectangle tool",
    )
    page.wait_for_timeout(300)

    def at(fx, fy):
        return (box["x"] + fx * box["width"], box["y"] + fy * box["height"])

    previous = selection(nb)
    drag(page, [at(0.3, 0.45), at(0.5, 0.6), at(0.75, 0.85)])
    big = wait_selection(nb, previous)
    shape = nb.kernel_json("view.selection_shape")
    assert shape["kind"] == "rectangle" and big
    drag(page, [at(0.45, 0.6), at(0.5, 0.65), at(0.6, 0.75)])  # starts inside the first
    small = wait_selection(nb, big)
    inner = nb.kernel_json(
        "_cw_inside",
        setup=INSIDE.format(
            box=box, path=[at(0.45, 0.6), at(0.6, 0.6), at(0.6, 0.75), at(0.45, 0.75)]
        ),
    )
    assert small and set(small) <= set(big) and len(small) < len(big)
    # the rectangle's corners are the mouse's positions in whole pixels
    shape = nb.kernel_json("view.selection_shape")
    (x0, y0), (x1, y1) = shape["vertices"]
    inside = nb.kernel_json(
        f"[int(r) for r in view.rows[(view._x >= {x0}) & (view._x <= {x1}) & (view._y >= {y0})"
        f" & (view._y <= {y1})]]"
    )
    assert small == inside
    assert abs(len(small) - len(inner)) <= max(3, len(inner) // 10), (len(small), len(inner))
    nb.screenshot(page.locator(".cwtest-drawing"), "drawing-tools")
