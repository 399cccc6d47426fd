"""The selection bar's count and the builder's numbers leave the kernel before the views'.

A selection change is answered by every observer of ``model.selection`` in turn, each
sending its messages as it runs; the page shows them in that order. The bar and the
builder are cheap to show, so they are called right after the model's own observers,
ahead of views made before them.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import traitlets as t

from compwidgets.intake import read_composition
from compwidgets.model import CompositionModel
from compwidgets.views._first import observe_first
from compwidgets.views.builder import BalanceBuilder
from compwidgets.views.selection_bar import SelectionBar

pytestmark = pytest.mark.usefixtures("recording_comms")


@pytest.fixture
def model():
    rng = np.random.default_rng(13)
    X = np.exp(rng.normal(size=(40, 4)))
    X[7, 2] = np.nan  # an incomplete row: the builder reads the model's selection mask

    frame = pd.DataFrame(X, columns=["Aa", "Bb", "Cc", "Dd"])
    return CompositionModel(read_composition(frame, check_total=False))


def test_bar_and_builder_answer_before_a_view_made_earlier(model):
    order: list[str] = []
    model.observe(lambda change: order.append("view"), names=["selection"])  # a view
    builder = BalanceBuilder(model)
    bar = SelectionBar(model)
    builder.observe(lambda change: order.append("builder"), names=["n_selected"])
    bar.count_label.observe(lambda change: order.append("bar"), names=["value"])
    model.select([1, 2, 3])
    assert order[-1] == "view" and set(order[:-1]) == {"builder", "bar"}
    assert bar.count_label.value == "3 of 40 rows selected"
    bar.close()
    builder.close()
    order.clear()
    model.select([4])
    assert order == ["view"]  # closed: no longer called


def test_the_first_observers_see_the_new_selection(model):
    builder = BalanceBuilder(model)
    sbp = np.array([[1, 1, -1, -1], [1, -1, 0, 0], [0, 0, 1, -1]])
    model.set_sbp(sbp)
    for rows in ([5, 6, 7, 8], [7, 9], [0, 7, 30, 31, 32]):
        model.select(rows)
        complete = [r for r in rows if r != 7]  # row 7 has no balance values
        assert builder.n_selected == len(rows)
        assert [s["n"] for s in builder.selection_stats] == [len(complete)] * 3
    builder.close()


def test_observe_first_goes_after_the_models_own_observers():
    class Thing(t.HasTraits):
        value = t.Int(0)
        seen: list

        @t.observe("value")
        def _own(self, change):
            self.seen.append("own")

    thing = Thing()
    thing.seen = []
    thing.observe(lambda change: thing.seen.append("earlier"), names=["value"])
    observe_first(thing, lambda change: thing.seen.append("first"), "value")
    thing.value = 1
    assert thing.seen == ["own", "first", "earlier"]
