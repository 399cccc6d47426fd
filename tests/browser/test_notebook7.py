"""The quick start in Jupyter Notebook 7 (the JupyterLab one is in test_workbench.py).

A server of its own (``jupyter notebook``, started like the JupyterLab fixture) opens the quick
start at /notebooks/; it runs top to bottom, every view renders (each draws all its points, the
builder its dendrogram, the bar its count), and a rectangle brushed with the mouse in the first
ternary selects the same rows in every view (kernel and page agree, as in the JupyterLab test).
"""

from __future__ import annotations

import time

import pytest

from .conftest import QUICK_START, LabNotebook, start_lab
from .test_workbench import VIEW_NAMES, brush_timings, builder_count, dom_counts, tag_and_wait

pytestmark = pytest.mark.browser


@pytest.fixture(scope="module")
def notebook7(chromium_executable, tmp_path_factory):
    pytest.importorskip("notebook", minversion="7")
    server = start_lab(
        tmp_path_factory.mktemp("notebook7"), {QUICK_START.name: QUICK_START}, app="notebook"
    )
    try:
        yield server
    finally:
        server.stop()


def test_quick_start_renders_and_links_in_notebook_7(notebook7, browser):
    page = browser.new_page()
    try:
        started = time.monotonic()
        page.goto(notebook7.classic_url(QUICK_START.name), wait_until="domcontentloaded")
        nb = LabNotebook(page, QUICK_START.name)
        nb.wait_kernel_idle()
        # the page is Notebook 7's own (one notebook, no JupyterLab launcher or side panels)
        app = nb.js("return window.jupyterapp.name;")
        assert "Notebook" in app, app
        print(f"\nNotebook 7 ({app}): open after {time.monotonic() - started:.1f} s")
        nb.run_all()
        nb.info = tag_and_wait(nb)
        for name in VIEW_NAMES:
            assert nb.info[name]["n"] > 0.9 * nb.info["n_rows"], nb.info
        n = nb.kernel_json("len(bench.model.selection)")  # the notebook selects a catchment
        assert n > 0 and dom_counts(nb)["bar"] == n

        times, check = brush_timings(nb)
        print("Notebook 7, brush -> highlight (ms):", times)
        shown = dom_counts(nb)
        assert check["selection_is_rectangle"] and check["n"] > 0, check
        for name in VIEW_NAMES:
            assert check["views"][name]["shown_and_selected"] > 0, (name, check)
        nb.wait_js(
            "return document.querySelector('.cw-builder [data-role=\"n-selected\"]')"
            ".textContent === arg;",
            builder_count(check["n"]),
            what="the builder to count the brushed rows",
        )
        assert check["builder"] == check["n"] and check["bar"] == check["n"]
        assert shown["bar"] == check["n"]
        nb.screenshot(page.locator(".cw-workbench"), "notebook7-workbench")
    finally:
        page.close()
