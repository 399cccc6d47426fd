"""The biplot's part names in a real browser: no two ray labels overlap.

A notebook of our own (written into the server's root) shows the demo workbench and the
biplot of an invented table of 40 parts, 39 of whose rays point the same way. For every
ray label of both biplots the page's own text box (``getBBox()``, taken to page pixels with
``getScreenCTM()``) is read, and every pair of boxes is checked to be disjoint: what
Chromium draws, not the kernel's estimate of it.
"""

from __future__ import annotations

import json

import nbformat
import pytest
from nbformat.v4 import new_code_cell, new_notebook

pytestmark = pytest.mark.browser

PLOTS_NOTEBOOK = "plots_labels.ipynb"

SOURCE = """\
import numpy as np
import pandas as pd
from IPython.display import display

import compwidgets as cw
from compwidgets.views.biplot import BiplotView

bench = cw.explore(cw.demo.stream_sediments(), detection_limits=cw.demo.DETECTION_LIMITS)
bench.biplot.add_class("cwtest-demo-biplot")

# 40 invented parts with names of many lengths: one part varies and the 39 others keep
# their ratios, so 39 rays point the same way with nearly the same length and their
# names start on one spot
rng = np.random.default_rng(40)
names = [f"{stem}{k}" for k, stem in enumerate(["Q", "Wm", "Rt-", "Mix", "Lithic"] * 8)]
logs = rng.normal(0, 0.05, size=(300, 40))
logs[:, 0] += rng.normal(0, 1.5, 300)
wide = pd.DataFrame(np.exp(logs + 2.0), columns=names)
wide_model = cw.CompositionModel(
    cw.read_composition(wide, parts=names, units=dict.fromkeys(names, "wt%"), check_total=False)
)
wide_biplot = BiplotView(wide_model)
wide_biplot.add_class("cwtest-wide-biplot")
display(bench)
display(wide_biplot)
"""

TAG = """
_cw_labels = {
    "demo-biplot": {
        "mark": bench.biplot.figure.marks.index(bench.biplot.ray_labels),
        "names": [str(n) for n in bench.biplot.ray_labels.text],
    },
    "wide-biplot": {
        "mark": wide_biplot.figure.marks.index(wide_biplot.ray_labels),
        "names": [str(n) for n in wide_biplot.ray_labels.text],
    },
}
"""

# Page side: the text elements of a view's label mark and their boxes in page pixels.
BOXES_FN = """
const boxesOf = (name, index) => {
  const fig = document.querySelector(`.cwtest-${name} svg.svg-figure`);
  const box = fig && fig.querySelector(":scope > g > g");
  const mark = box ? box.children[index] : null;
  if (!mark) return null;
  const out = [];
  for (const el of mark.querySelectorAll("text")) {
    const b = el.getBBox();
    const m = el.getScreenCTM();
    const corners = [[b.x, b.y], [b.x + b.width, b.y], [b.x, b.y + b.height],
                     [b.x + b.width, b.y + b.height]].map(([x, y]) => {
      const p = fig.createSVGPoint();
      p.x = x; p.y = y;
      return p.matrixTransform(m);
    });
    const xs = corners.map((p) => p.x), ys = corners.map((p) => p.y);
    out.push({text: el.textContent, x0: Math.min(...xs), x1: Math.max(...xs),
              y0: Math.min(...ys), y1: Math.max(...ys)});
  }
  return out;
};
"""
BOXES_JS = BOXES_FN + "return boxesOf(arg.name, arg.mark);"
DRAWN_JS = (
    BOXES_FN
    + """
const out = boxesOf(arg.name, arg.mark);
return Boolean(out) && out.length === arg.names.length
  && out.every((b, i) => b.text === arg.names[i] && b.x1 > b.x0);
"""
)


@pytest.fixture(scope="module")
def plots(lab, open_notebook):
    nb_json = new_notebook(
        cells=[new_code_cell(SOURCE)],
        metadata={
            "kernelspec": {"display_name": "Python 3", "language": "python", "name": "python3"}
        },
    )
    nb_json.cells[0]["id"] = "plots-labels"
    (lab.root / PLOTS_NOTEBOOK).write_text(nbformat.writes(nb_json))
    nb = open_notebook(PLOTS_NOTEBOOK)
    seconds = nb.run_all()
    print(f"plots notebook: all cells ran in {seconds:.1f} s")
    nb.labels = nb.kernel_json("_cw_labels", setup=TAG)
    for name, info in nb.labels.items():
        nb.wait_js(
            DRAWN_JS,
            {"name": name, "mark": info["mark"], "names": info["names"]},
            what=f"the {name} to draw its {len(info['names'])} part names",
        )
    return nb


def _overlaps(boxes: list[dict]) -> list[tuple[str, str]]:
    """Pairs of boxes whose interiors intersect (by definition of an axis-aligned box)."""
    pairs = []
    for i, a in enumerate(boxes):
        for b in boxes[i + 1 :]:
            if a["x0"] < b["x1"] and b["x0"] < a["x1"] and a["y0"] < b["y1"] and b["y0"] < a["y1"]:
                pairs.append((a["text"], b["text"]))
    return pairs


@pytest.mark.parametrize(("name", "n_parts"), [("demo-biplot", 17), ("wide-biplot", 40)])
def test_ray_labels_are_pairwise_disjoint_in_the_page(plots, name, n_parts):
    info = plots.labels[name]
    assert len(info["names"]) == n_parts
    boxes = plots.js(BOXES_JS, {"name": name, "mark": info["mark"]})
    assert [b["text"] for b in boxes] == info["names"]
    assert all(b["x1"] - b["x0"] > 3 and b["y1"] - b["y0"] > 5 for b in boxes)  # drawn text
    overlaps = _overlaps(boxes)
    print(f"{name}: {len(boxes)} labels, overlapping pairs: {json.dumps(overlaps)}")
    assert overlaps == []
    plots.screenshot(plots.page.locator(f".cwtest-{name}"), f"ray-labels-{name}")
