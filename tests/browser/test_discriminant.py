"""The discriminant view in a real browser: a click on a confusion cell selects its rows.

The groups notebook (example_notebooks/04_telling_groups_apart.ipynb) runs top to bottom;
then the test clicks one cell of the discriminant view's cross-validated confusion grid with
the mouse and checks, in the kernel and in the page, that exactly the rows of that cell (true
group i, assigned to group j) are selected and show highlighted in the ternary diagram.
"""

from __future__ import annotations

import pytest

from .test_workbench import MARK_JS

pytestmark = pytest.mark.browser

TAG = """
view.add_class("cwtest-discriminant")
ternary.add_class("cwtest-groups-ternary")
model.clear_selection()
_cv = view.rule.cross_validation
_K = len(view.rule.classes)
# the off-diagonal cell with the most rows, else the first diagonal one
_off = [(int(_cv.confusion[i, j]), i, j) for i in range(_K) for j in range(_K) if i != j]
_n, _i, _j = max(_off)
if _n == 0:
    _i = _j = 0
_cw_plan = {
    "K": _K, "i": _i, "j": _j, "n_cell": int(_cv.confusion[_i, _j]),
    "mark": ternary.figure.marks.index(ternary.scatter),
    "n_points": len(ternary.scatter.x),
    "selected_style": dict(ternary.scatter.selected_style),
    "classes": list(view.rule.classes),
}
"""

CHECK = """
import numpy as _np
_cell = view.rule.cross_validation.cell_rows(_cw_plan["i"], _cw_plan["j"])
_sel = _np.asarray(model.selection)
_cw_check = {
    "selected": int(_sel.size),
    "is_cell": bool(_np.array_equal(_sel, _cell)),
    "in_ternary": int(_np.isin(ternary.rows, _sel).sum()),
    "ternary_mark": 0 if ternary.scatter.selected is None else len(ternary.scatter.selected),
    "true_groups": sorted(set(model.metadata["catchment"].iloc[_sel].astype(str))),
}
"""


@pytest.fixture(scope="module")
def groups(open_notebook):
    nb = open_notebook("04_telling_groups_apart.ipynb")
    seconds = nb.run_all()
    print(f"groups notebook: all cells ran in {seconds:.1f} s")
    nb.plan = nb.kernel_json("_cw_plan", setup=TAG)
    nb.wait_js(
        """
        const grid = document.querySelectorAll(".cwtest-discriminant .heatmapcell");
        return grid.length === arg.K * arg.K;
        """,
        nb.plan,
        what="the confusion grid to draw its cells",
    )
    nb.wait_js(
        MARK_JS
        + """
        const mark = markOf("groups-ternary", arg.mark);
        return Boolean(mark) && mark.querySelectorAll(".dot").length === arg.n_points
          && countStyled(mark, arg.selected_style) === 0;
        """,
        nb.plan,
        what="the ternary to draw its points with nothing selected",
    )
    return nb


def test_clicking_a_confusion_cell_selects_its_rows_in_the_ternary(groups):
    nb = groups
    plan = nb.plan
    k = plan["i"] * plan["K"] + plan["j"]
    # the cell shows its count as text, and sits in row i, column j of the grid
    label = nb.js(
        """
        const labels = document.querySelectorAll(".cwtest-discriminant .heatmapcell_label");
        return labels[arg].textContent;
        """,
        k,
    )
    assert label == str(plan["n_cell"]), (label, plan)
    cell = nb.page.locator(".cwtest-discriminant .heatmapcell").nth(k)
    cell.scroll_into_view_if_needed()
    box = cell.bounding_box()
    cx, cy = box["x"] + box["width"] / 2, box["y"] + box["height"] / 2
    nb.page.mouse.click(cx, cy)

    check = nb.kernel_json("_cw_check", setup=CHECK)
    for _ in range(40):  # the click reaches the kernel a moment later
        if check["selected"]:
            break
        nb.page.wait_for_timeout(250)
        check = nb.kernel_json("_cw_check", setup=CHECK)
    print(
        "confusion cell click:",
        plan["classes"][plan["i"]],
        "->",
        plan["classes"][plan["j"]],
        check,
    )
    assert check["is_cell"], check
    assert check["selected"] == plan["n_cell"] > 0
    assert check["true_groups"] == [plan["classes"][plan["i"]]]
    assert check["ternary_mark"] == check["in_ternary"] > 0
    nb.wait_js(
        MARK_JS
        + """
        const mark = markOf("groups-ternary", arg.plan.mark);
        return countStyled(mark, arg.plan.selected_style) === arg.n;
        """,
        {"plan": plan, "n": check["in_ternary"]},
        what="the ternary to highlight the rows of the clicked cell",
    )
    nb.screenshot(nb.page.locator(".cwtest-discriminant"), "discriminant-after-cell-click")
    nb.screenshot(nb.page.locator(".cwtest-groups-ternary"), "ternary-after-cell-click")
