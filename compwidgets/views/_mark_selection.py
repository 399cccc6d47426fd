"""Show a selection on a bqplot scatter mark, clearing it for real when nothing is selected.

The views fade unselected points by a fill (or stroke) opacity: it repaints much faster
in Chromium than ``opacity``, which makes each of thousands of SVG elements a compositing
group of its own. But bqplot's scatter (0.13) does not remove the properties of the
selected and unselected styles when it restyles (its ``apply_styles`` hands
``clear_style`` the list of styles wrapped in one more list, so the keys it clears are
"0" to "3"); it rewrites only fill, stroke, opacity and stroke-width. A fill opacity once
set would so stay after the selection is cleared, and every point would remain faded.

:func:`show_selection` works around it with bqplot's own style handlers. Before a mark
goes from a selection to none, its unselected style becomes the *plain* one (every
opacity 1): bqplot then restyles the elements unselected so far, and the selected ones
already carry opacity 1. Before a selection is shown, the *faded* unselected style comes
back; with nothing selected that restyles nothing. The two are separate messages, in
this order, because a mark's messages are applied in the order they are sent.
"""

from __future__ import annotations

import numpy as np

from ._common import UNSELECTED_OPACITY

__all__ = ["same_array", "show_selection", "unselected_style_for"]


def same_array(a, b) -> bool:
    """Equality of two optional arrays (None equals None only)."""
    if a is None or b is None:
        return a is None and b is None
    return np.array_equal(np.asarray(a), np.asarray(b))


def unselected_style_for(mark, selected) -> dict:
    """The unselected style ``mark`` shows with ``selected``: plain for None, else faded."""
    opacity = "1" if selected is None else UNSELECTED_OPACITY
    return {key: opacity for key in mark.unselected_style}


def show_selection(mark, selected, **traits) -> None:
    """Set ``mark.selected`` to ``selected``, drawing every element plainly for None.

    Parameters
    ----------
    mark : bqplot.Scatter
        A mark whose unselected style holds only opacities (fill-opacity, stroke-opacity);
        while a selection is shown they are at ``UNSELECTED_OPACITY``, else at 1.
    selected : array of int or None
        Positions of the selected elements; None when nothing is selected (an empty
        array means a selection of which the mark holds no element: all faded).
    **traits
        Other traits of the mark (e.g. new ``x`` and ``y``) sent with ``selected``.
    """
    style = unselected_style_for(mark, selected)
    if selected is None:
        if mark.selected is not None and mark.unselected_style != style:
            mark.unselected_style = style  # its own message, before the selection goes
    elif mark.unselected_style != style:
        mark.unselected_style = style
    with mark.hold_sync():
        for name, value in traits.items():
            setattr(mark, name, value)
        if not same_array(mark.selected, selected):
            mark.selected = selected
