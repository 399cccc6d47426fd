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
import pandas as pd

from . import core
from .composition import Composition
from .core import CompositionError
from .intake import read_composition
from .model import CompositionModel

#: A metadata column with at most this many distinct values can be a grouping column.
MAX_GROUPS = 12

#: Rows looked at first when deciding whether a column can be a grouping column.
_HEAD_ROWS = 5000

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
        head = column.iloc[:_HEAD_ROWS]
        if head.nunique(dropna=True) > MAX_GROUPS:
            continue  # more values in the first rows than a grouping has: no need to count all
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

    The rule is :func:`compwidgets.core.ternary.spread_triples` (parts of at least
    :data:`MIN_SHARE` median share; the triples whose points spread most in the
    triangle; later triples use parts not shown yet first), measured on a seeded
    sample of the rows.
    """
    active = list(model.active_parts)
    if len(active) < 3:
        raise CompositionError(f"a ternary view needs 3 active parts, got {active}")
    # a row with a part missing counts for the triples it is complete in
    triples = core.ternary.spread_triples(model.part_values(active), count, min_share=MIN_SHARE)
    return [[active[p] for p in triple] for triple in triples]


def release_freed_memory() -> None:
    """Hand memory freed by Python back to the system (glibc's ``malloc_trim``; else nothing).

    Building the workbench on a long table allocates and frees many temporary
    arrays; the C allocator keeps freed blocks for reuse, so the process's
    resident size only grows, and the next step's temporaries come on top of
    it. Trimming between the steps kept the peak at 10**6 rows about 50 MB lower
    (measured here). Nothing in use is touched.
    """
    global _MALLOC_TRIM
    if _MALLOC_TRIM is None:
        try:
            import ctypes
            import ctypes.util

            _MALLOC_TRIM = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6").malloc_trim
        except (OSError, AttributeError):  # not glibc: nothing to do
            _MALLOC_TRIM = False
    if _MALLOC_TRIM:
        _MALLOC_TRIM(0)


_MALLOC_TRIM = None


#: Human names of the views that are not ternaries (shown above each view).
VIEW_NAMES = {
    "biplot": "clr biplot",
    "discriminant": "Group discriminant (ilr)",
    "builder": "Balance dendrogram",
    "panels": "Parts and triage",
}


def ternary_title(k: int, parts: Sequence[str]) -> str:
    """The name of ternary view ``k`` (from 0): "Ternary 1 · MgO–K2O–CaO"."""
    return f"Ternary {k + 1} \u00b7 " + "\u2013".join(str(p) for p in parts)


class Workbench(w.VBox):
    """The linked workbench: builder, two ternaries, biplot, discriminant, parts, triage.

    The screen, top to bottom:

    * the selection bar: one line of controls that wraps (count, clear, invert,
      group from the selection, exports of the ilr coordinates, SBP and selected
      rows);
    * the progress line of a change of the active parts (hidden otherwise);
    * a grid of cells, each a view under its human name ("Ternary 1 · A–B–C",
      "clr biplot", ...), in rows that wrap with the width of the notebook. The
      first row holds the balance builder (it takes the room left over) next to
      the ternaries, so that a balance and a brushable view are seen together
      without scrolling at 1920 x 1080; then the clr biplot, the parts and
      triage tabs (``sidebar``: a cell of its own, at most about 800 px wide and
      scrolling inside when taller than the screen) and the discriminant view.
      On a narrower screen (1366 x 768) the same cells wrap into more rows; no
      cell is wider than the notebook and text wraps instead of being cut.

    Parameters
    ----------
    model : CompositionModel
    ternary_parts : list of two triples of part names, optional
    mode : {"auto", "points", "density"}
    progress : callable, optional
        Called as ``progress(done, total, stage)`` while the workbench is built.

    Attributes
    ----------
    model : CompositionModel
    ternaries : list of TernaryView
    biplot : BiplotView
    discriminant : DiscriminantView
    builder : BalanceBuilder
    picker : SubcompositionPicker
    triage : TriagePanel
        Its outlier screening runs when its tab is first opened (then after each
        change of the active parts while it has been shown).
    selection_bar : SelectionBar
    sidebar : ipywidgets.Tab
        The "parts" (picker) and "triage" tabs.
    grid : ipywidgets.Box
        The cells of the views (CSS class ``cw-grid``).
    titles : dict of str to ipywidgets.Label
        The name shown above each cell, by key ("ternary-1", "ternary-2",
        "biplot", "discriminant", "builder", "panels").
    progress : ProgressLine
        Stage and progress of a change of the active parts (hidden otherwise).
    """

    def __init__(
        self,
        model: CompositionModel,
        ternary_parts: Sequence[Sequence[str]] | None = None,
        mode: str = "auto",
        progress=None,
    ):
        from .views import _layout
        from .views._progress import ProgressLine
        from .views.biplot import BiplotView
        from .views.builder import BalanceBuilder
        from .views.discriminant import DiscriminantView
        from .views.picker import SubcompositionPicker
        from .views.selection_bar import SelectionBar
        from .views.ternary import TernaryView
        from .views.triage import TriagePanel

        self.model = model
        self.progress = ProgressLine()
        shown = progress if progress is not None else (lambda done, total, text: None)

        def report(done: int, total: int, text: str) -> None:
            release_freed_memory()  # between stages: what a stage freed goes back first
            shown(done, total, text)

        n_stages = 8
        report(0, n_stages, "choosing the ternary parts")
        triples = ternary_parts or default_ternary_parts(model)
        ident = default_id_column(model.metadata)

        # A change of the active parts runs every view's observer in turn, in the order
        # they were registered: a first observer shows the progress line, one after each
        # view moves it on, and a last one hides it.
        self._stages: list[str] = []
        self._depth = 0
        self._watch_parts(self._parts_begin)

        def following(view, label: str):
            self._stages.append(label)
            done = len(self._stages)
            self._watch_parts(lambda change: self._parts_step(done))
            return view

        # the biplot first: its fit needs the most memory for a moment, the less is held
        # by then the lower the peak on a long table
        report(1, n_stages, VIEW_NAMES["biplot"])
        self.biplot = following(
            BiplotView(model, mode=mode, id_column=ident), VIEW_NAMES["biplot"]
        )
        self.ternaries = []
        for k, p in enumerate(triples):
            report(2 + k, n_stages, ternary_title(k, p))
            view = TernaryView(model, parts=list(p), mode=mode, id_column=ident)
            self.ternaries.append(following(view, f"ternary {k + 1}"))
        report(4, n_stages, VIEW_NAMES["discriminant"])
        self.discriminant = following(
            DiscriminantView(model, mode=mode, id_column=ident), "discriminant"
        )
        for view in self.ternaries:  # their decision boundaries use the discriminant's priors
            w.link((self.discriminant, "priors"), (view, "boundary_priors"))
        report(5, n_stages, VIEW_NAMES["builder"])
        self.builder = following(BalanceBuilder(model), "balance builder")
        report(6, n_stages, "parts and variation matrix")
        self.picker = following(
            SubcompositionPicker(model, ternaries=self.ternaries), "variation matrix"
        )
        report(7, n_stages, "triage")
        self.triage = TriagePanel(model)  # screens for outliers when its tab opens
        self.views = [*self.ternaries, self.biplot, self.discriminant]
        self.selection_bar = SelectionBar(model)
        self._watch_parts(self._parts_end)

        sidebar = w.Tab(children=[self.picker, self.triage])
        sidebar.titles = ("parts", "triage")
        sidebar.observe(self._tab_changed, names=["selected_index"])
        self.sidebar = sidebar

        self.titles: dict[str, w.Label] = {}
        cells = []

        def cell(key: str, title: str, view, kind: str):
            self.titles[key] = w.Label(value=title)
            cells.append(_layout.titled(self.titles[key], view, kind))

        cell("builder", VIEW_NAMES["builder"], self.builder, "builder")
        for k, view in enumerate(self.ternaries):
            cell(f"ternary-{k + 1}", ternary_title(k, view.parts), view, "view")
            view.observe(self._retitle(k), names=["parts"])
        cell("biplot", VIEW_NAMES["biplot"], self.biplot, "view")
        cell("panels", VIEW_NAMES["panels"], sidebar, "panels")
        cell("discriminant", VIEW_NAMES["discriminant"], self.discriminant, "view")
        self.grid = _layout.grid(cells)
        super().__init__(
            children=[_layout.stylesheet(), self.selection_bar, self.progress, self.grid],
            layout=w.Layout(grid_gap="8px"),
        )
        self.add_class(_layout.ROOT)
        report(n_stages, n_stages, "ready")

    def _retitle(self, k: int):
        def retitle(change) -> None:
            text = ternary_title(k, change["new"])
            label = self.titles[f"ternary-{k + 1}"]
            if label.value != text:
                label.value = text

        return retitle

    # ----------------------------------------------------------- progress
    def _watch_parts(self, handler) -> None:
        self.model.observe(handler, names=["active_parts", "amalgamations"])

    def _parts_begin(self, change) -> None:
        self._depth += 1
        if self._depth == 1:
            self.progress.show(0, len(self._stages), f"updating {self._stages[0]}")

    def _parts_step(self, done: int) -> None:
        if self._depth >= 1 and done < len(self._stages):
            self.progress.show(done, len(self._stages), f"updating {self._stages[done]}")

    def _parts_end(self, change) -> None:
        self._depth = max(0, self._depth - 1)
        if self._depth == 0:
            self.progress.hide()

    def _tab_changed(self, change) -> None:
        if change["new"] == 1:  # the triage tab: its outlier screening runs now
            self.triage.show()


def _explore_lazy(data, active_parts, group, ternary_parts, mode, read_options) -> Workbench:
    """explore() of a table larger than memory (see :mod:`compwidgets.lazy.workbench`)."""
    from .lazy.workbench import explore_lazy

    sample = {k: read_options.pop(k) for k in ("sample_size", "seed") if k in read_options}
    lazy = (
        data
        if type(data).__name__ == "LazyComposition"
        else read_composition(data, **read_options)
    )
    return explore_lazy(
        lazy,
        active_parts=active_parts,
        group=group,
        ternary_parts=ternary_parts,
        mode=mode,
        **sample,
    )


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
        Or a table larger than memory: a dask DataFrame, a Parquet file or folder,
        a glob of Parquet/CSV files, or a ``LazyComposition``. The views then show
        a seeded uniform sample of rows (``sample_size=``, default 200,000;
        ``seed=``, default 0) and the ternaries' density pictures count all rows;
        ``bench.all_rows`` (:class:`compwidgets.lazy.workbench.AllRows`) applies
        a drawn selection shape and computes statistics over all rows.
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
    from .intake.load import is_lazy_source

    if is_lazy_source(data) or type(data).__name__ == "LazyComposition":
        return _explore_lazy(data, active_parts, group, ternary_parts, mode, read_options)
    progress = _cell_progress()
    try:
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
                rows = f" of {len(data):,} rows" if isinstance(data, pd.DataFrame) else ""
                progress(0, 1, f"reading the table{rows}")
                composition = read_composition(data, **read_options)
                release_freed_memory()
            if group is None:
                group = default_group_column(composition.metadata)
            progress(0, 1, "building the model")
            model = CompositionModel(composition, active_parts=active_parts, group_column=group)
        return Workbench(model, ternary_parts=ternary_parts, mode=mode, progress=progress)
    finally:
        progress.close()


class _CellProgress:
    """The build's progress in the cell output (only in a kernel; nothing in a script)."""

    def __init__(self):
        self.line = None
        try:
            from IPython import get_ipython
            from IPython.display import display
        except ImportError:  # pragma: no cover - IPython comes with ipywidgets
            return
        shell = get_ipython()
        if shell is None or getattr(shell, "kernel", None) is None:
            return
        from .views._progress import ProgressLine

        self.line = ProgressLine()
        display(self.line)

    def __call__(self, done: int, total: int, text: str) -> None:
        if self.line is not None:
            self.line.show(done, total, f"explore: {text}")

    def close(self) -> None:
        if self.line is not None:
            self.line.close()  # its view leaves the cell output
            self.line = None


def _cell_progress() -> _CellProgress:
    return _CellProgress()
