"""The workbench in one call: :func:`explore`.

``explore(data)`` reads the table (or takes a Composition or a model), builds
the shared model and every view on it, and lays them out in one displayable
widget. The returned :class:`Workbench` keeps the model and each view as
attributes so the work can go on in code.
"""

from __future__ import annotations

from collections.abc import Sequence
from os import PathLike

import ipywidgets as w
import numpy as np
import pandas as pd

from .composition import Composition
from .core import CompositionError
from .intake import read_composition
from .model import CompositionModel

#: A metadata column with at most this many distinct values can be a grouping column.
MAX_GROUPS = 12

#: Smallest median share of the active composition for a part in a default ternary.
MIN_SHARE = 0.01


def default_group_column(metadata: pd.DataFrame) -> str:
    """The first metadata column that looks categorical ("" when none does).

    A column qualifies when it is categorical, text or boolean with 2 to
    :data:`MAX_GROUPS` distinct values, each value shared by at least two rows.
    Categorical columns are preferred.
    """
    candidates = []
    for name in metadata.columns:
        column = metadata[name]
        numeric = pd.api.types.is_numeric_dtype(column) and not pd.api.types.is_bool_dtype(column)
        if numeric:
            continue
        counts = column.value_counts(dropna=True)
        if 2 <= len(counts) <= MAX_GROUPS and counts.min() >= 2:
            rank = 0 if isinstance(column.dtype, pd.CategoricalDtype) else 1
            candidates.append((rank, len(candidates), str(name)))
    return min(candidates)[2] if candidates else ""


def default_id_column(metadata: pd.DataFrame) -> str:
    """A metadata column that names each sample ("" when none; then the index does).

    The first text column whose values are all present and unique, preferring
    names with "id" or "sample" in them.
    """
    candidates = []
    for name in metadata.columns:
        column = metadata[name]
        if pd.api.types.is_numeric_dtype(column) or isinstance(column.dtype, pd.CategoricalDtype):
            continue
        if column.notna().all() and column.is_unique:
            label = str(name).lower()
            rank = 0 if ("id" in label or "sample" in label) else 1
            candidates.append((rank, len(candidates), str(name)))
    return min(candidates)[2] if candidates else ""


def default_ternary_parts(model: CompositionModel, count: int = 2) -> list[list[str]]:
    """Triples of active parts that spread the data, one per ternary view.

    Only parts whose median share of the active composition is at least
    :data:`MIN_SHARE` take part (when three or more do), since a ternary of parts
    that differ a thousandfold in size piles every point in one corner. For
    each triple: the pair of those parts with the largest log-ratio variance
    (variation matrix), and the part that adds most log-ratio variance to both;
    later triples use the parts not shown yet first.
    """
    active = list(model.active_parts)
    if len(active) < 3:
        raise CompositionError(f"a ternary view needs 3 active parts, got {active}")
    share = np.nanmedian(model.closed(active), axis=0)
    parts = [p for p, s in zip(active, share, strict=True) if s >= MIN_SHARE]
    if len(parts) < 3:
        parts = active
    T = model.variation_matrix(parts).to_numpy()
    triples: list[list[str]] = []
    unused = list(range(len(parts)))
    for _ in range(count):
        pool = unused if len(unused) >= 3 else list(range(len(parts)))
        sub = T[np.ix_(pool, pool)]
        i, j = np.unravel_index(np.argmax(sub), sub.shape)
        score = sub[i] + sub[j]
        score[[i, j]] = -np.inf
        k = int(np.argmax(score))
        triple = [pool[i], pool[j], pool[k]]
        triples.append([parts[p] for p in triple])
        unused = [p for p in unused if p not in triple]
    return triples


class Workbench(w.AppLayout):
    """The linked workbench: picker, triage, two ternaries, biplot, builder, selection bar.

    Attributes
    ----------
    model : CompositionModel
    ternaries : list of TernaryView
    biplot : BiplotView
    discriminant : DiscriminantView
    builder : BalanceBuilder
    picker : SubcompositionPicker
    triage : TriagePanel
    selection_bar : SelectionBar
    """

    def __init__(
        self,
        model: CompositionModel,
        ternary_parts: Sequence[Sequence[str]] | None = None,
        mode: str = "auto",
    ):
        from .views.biplot import BiplotView
        from .views.builder import BalanceBuilder
        from .views.discriminant import DiscriminantView
        from .views.picker import SubcompositionPicker
        from .views.selection_bar import SelectionBar
        from .views.ternary import TernaryView
        from .views.triage import TriagePanel

        self.model = model
        triples = ternary_parts or default_ternary_parts(model)
        ident = default_id_column(model.metadata)
        self.ternaries = [
            TernaryView(model, parts=list(p), mode=mode, id_column=ident) for p in triples
        ]
        self.biplot = BiplotView(model, mode=mode, id_column=ident)
        self.discriminant = DiscriminantView(model, mode=mode, id_column=ident)
        self.builder = BalanceBuilder(model)
        self.picker = SubcompositionPicker(model, ternaries=self.ternaries)
        self.triage = TriagePanel(model)
        self.views = [*self.ternaries, self.biplot, self.discriminant]
        self.selection_bar = SelectionBar(model, views=self.views)

        # the variation heat table of many parts is wider than the column: scroll it there
        sidebar = w.Tab(children=[self.picker, self.triage], layout=w.Layout(overflow="auto"))
        sidebar.titles = ("parts", "triage")
        # each view keeps its own (equal-aspect) width; the row wraps on narrow screens
        plots = w.Box(
            children=self.views,
            layout=w.Layout(display="flex", flex_flow="row wrap", grid_gap="8px"),
        )
        super().__init__(
            header=self.selection_bar,
            left_sidebar=sidebar,
            center=plots,
            footer=self.builder,
            pane_widths=["420px", 1, 0],
            grid_gap="8px",
        )
        # every row as tall as its content (AppLayout's own sizes are fixed or fractions)
        self.layout.grid_template_rows = "auto auto auto"
        self.add_class("cw-workbench")


def explore(
    data: pd.DataFrame | str | PathLike | Composition | CompositionModel,
    *,
    active_parts: Sequence[str] | None = None,
    group: str | None = None,
    ternary_parts: Sequence[Sequence[str]] | None = None,
    mode: str = "auto",
    **read_options,
) -> Workbench:
    """Open the linked workbench on a table, a Composition or a model.

    Parameters
    ----------
    data : DataFrame, path to CSV/Excel, Composition or CompositionModel
    active_parts : list of str, optional
        The subcomposition under study (default: every part). Which columns of
        a table are parts is an intake option (``parts=``, see ``read_options``).
    group : str, optional
        Grouping column for colours (default: a metadata column that looks
        categorical; "" for none).
    ternary_parts : list of two triples of part names, optional
        Parts of the two ternary views (default: chosen from the variation matrix).
    mode : {"auto", "points", "density"}
        Drawing mode of the scatter views (auto: by row count).
    **read_options
        Passed to :func:`compwidgets.read_composition` (units, detection_limits, ...).

    Returns
    -------
    Workbench
        Display it in a notebook cell; ``.model`` and each view are attributes.
    """
    if isinstance(data, CompositionModel):
        if read_options:
            raise TypeError("read options apply to a table, not to an existing model")
        model = data
        if active_parts is not None:
            model.active_parts = list(active_parts)
        if group is not None:
            model.group_column = group
    else:
        if isinstance(data, Composition):
            if read_options:
                raise TypeError("read options apply to a table, not to a Composition")
            composition = data
        else:
            composition = read_composition(data, **read_options)
        if group is None:
            group = default_group_column(composition.metadata)
        model = CompositionModel(composition, active_parts=active_parts, group_column=group)
    return Workbench(model, ternary_parts=ternary_parts, mode=mode)
