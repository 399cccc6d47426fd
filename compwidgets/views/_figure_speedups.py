"""Speed-ups of a view's bqplot figure in the browser (a widget that is never displayed).

Two costs of bqplot 0.13 made every linked view slow to follow a brush:

* On every change of ``selected``, its scatter view rewrites four default style
  properties of each point before it writes the selection styles: at 2,000 points about
  15 ms of script per view. The page takes over the selection restyle of the
  :attr:`FigureSpeedups.marks` (``js/scatter_restyle.js``, ``js/selection_paint.js``):
  only the selection styles, only on the points whose state changed. The picture is
  bqplot's, except that keys of a style are removed when they no longer apply (bqplot
  leaves them: see :mod:`._mark_selection`, whose kernel-side work-around stays, for a
  page where the take-over does not happen).
* A selection change reached the page as one message per mark, and the browser drew a
  frame (restyling thousands of points) between them, so the last view followed tens of
  milliseconds after the first. One helper serves every view of a model
  (:func:`figure_speedups`): it observes the selection before the views and sends the
  ``selected`` of all their marks in one message, painted in one go; the marks' own
  messages that follow change nothing more.
* Its brush sends the corners at each move of a drag, and ipywidgets sends a model's
  messages one at a time, so the release waited for the reply to the last move. The
  :attr:`FigureSpeedups.brushes` send their rectangle once, when the drag ends
  (``js/brush_hold.js``): the kernel sees ``brushing`` False and the final corners
  (the views act on nothing else).

The front end (``js/figure_speedups.js``) runs when the widget's model is created in the
page and takes over each view of these widgets, now and later, if it has the methods it
relies on; otherwise bqplot's own code keeps running.
"""

from __future__ import annotations

import weakref
from collections.abc import Sequence

import anywidget
import bqplot as bq
import ipywidgets as widgets
import numpy as np
import traitlets as t

from ._esm import bundle
from ._first import observe_first
from ._mark_selection import unselected_style_for

__all__ = ["FigureSpeedups", "figure_speedups"]

#: Entry module of the front end (joined with what it imports by ``_esm.bundle``).
ENTRY = "figure_speedups.js"


class FigureSpeedups(anywidget.AnyWidget):
    """Faster selection restyle of scatter marks and brushes synced at release (not displayed).

    Parameters
    ----------
    marks : sequence of bqplot.Scatter
        Marks whose views restyle their selection the fast way.
    brushes : sequence of bqplot.interacts.BrushSelector
        Brushes whose views send their rectangle when the drag ends.
    """

    _esm = bundle(ENTRY, hooks=("initialize",))

    marks = t.List(t.Instance(bq.Scatter)).tag(sync=True, **widgets.widget_serialization)
    brushes = t.List(t.Instance(bq.interacts.BrushSelector)).tag(
        sync=True, **widgets.widget_serialization
    )

    def __init__(
        self,
        marks: Sequence[bq.Scatter] = (),
        brushes: Sequence[bq.interacts.BrushSelector] = (),
        **kwargs,
    ) -> None:
        super().__init__(marks=list(marks), brushes=list(brushes), **kwargs)
        self._views: list[weakref.ref] = []

    # ------------------------------------------------------------------ views
    def add_view(self, view) -> None:
        """Serve ``view``: the marks that fade with the selection, and its brush.

        The view provides ``_fading_marks()`` and ``_mark_selections()``: [(mark, its
        ``selected``)] of the model's selection, for those marks (see
        :class:`~compwidgets.views._scatter.ScatterView`).
        """
        self._views.append(weakref.ref(view))
        with self.hold_sync():
            self.marks = [*self.marks, *view._fading_marks()]
            self.brushes = [*self.brushes, view.brush]

    def remove_view(self, view) -> None:
        """Stop serving ``view`` (closed)."""
        self._views = [r for r in self._views if r() is not None and r() is not view]
        gone = {id(m) for m in view._fading_marks()}
        if self.comm is None:
            return
        with self.hold_sync():
            self.marks = [m for m in self.marks if id(m) not in gone]
            self.brushes = [b for b in self.brushes if b is not view.brush]

    # -------------------------------------------------------------- selection
    def show_selections(self, selections: Sequence[tuple[bq.Scatter, np.ndarray | None]]) -> None:
        """Send the ``selected`` of several marks in one message, painted in one go.

        With each, the unselected style the mark will show (plain when nothing is
        selected, faded otherwise; see :func:`._mark_selection.unselected_style_for`).
        Marks without points are left out. The marks' own ``selected`` must still be
        set: this only paints ahead of them.
        """
        if self.comm is None:
            return
        entries, buffers = [], []
        for mark, selected in selections:
            if mark.x is None or not len(mark.x):
                continue
            entry = {
                "mark": f"IPY_MODEL_{mark.model_id}",
                "selected": None,
                "unselected_style": unselected_style_for(mark, selected),
            }
            if selected is not None:
                entry["selected"] = len(buffers)
                buffers.append(np.ascontiguousarray(selected, dtype="<u4").tobytes())
            entries.append(entry)
        if entries:
            self.send({"kind": "selections", "marks": entries}, buffers)

    def _on_model_selection(self, change) -> None:
        selections = []
        for ref in self._views:
            view = ref()
            if view is None or getattr(view, "_closed", True):
                continue
            try:
                selections += view._mark_selections()
            except Exception:  # noqa: BLE001 - the view's own update shows the error
                continue
        self.show_selections(selections)


#: The helper of each model (one per model, shared by its views).
_SHARED: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()


def figure_speedups(model) -> FigureSpeedups:
    """The :class:`FigureSpeedups` shared by every view of ``model`` (made on first use).

    It observes the model's selection ahead of the views (:func:`._first.observe_first`),
    so its one message reaches the page before the marks' own.
    """
    helper = _SHARED.get(model)
    if helper is None or helper.comm is None:
        helper = FigureSpeedups()
        observe_first(model, helper._on_model_selection, "selection")
        _SHARED[model] = helper
    return helper
