"""The workbench on a table larger than memory: a sample for the points, all rows for the rest.

:func:`explore_lazy` (what :func:`compwidgets.explore` does with a
:class:`~compwidgets.lazy.LazyComposition`) draws a seeded uniform sample of
rows into an ordinary in-memory :class:`~compwidgets.composition.Composition`
and opens the usual workbench on it: every view, link and selection works as
on any table. Beside it, :class:`AllRows` (``bench.all_rows``) knows the lazy
composition and the sample's row positions:

- density pictures of the ternary views are counted over **all** rows,
  partition by partition (bin counts add), and each view's note says which
  layer is which;
- a selection drawn in a view is kept as the sampled rows (the model's
  selection, linked as always) **and** as its shape in that view's
  coordinates (:func:`selection_shape`), so that it can be applied to all
  rows (:meth:`AllRows.selected_mask`), lazily;
- statistics of the active parts and the balances of the SBP are computed
  over all rows (:meth:`AllRows.variation_matrix`, :meth:`AllRows.balance_summary`).
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from .. import core
from ..core import geometry
from ..core import ternary as core_ternary
from .composition import DEFAULT_SAMPLE, LazyComposition


def selection_shape(view) -> dict | None:
    """The shape of the last selection drawn in ``view``: kind and vertices, view coordinates.

    ``{"kind": "rectangle", "vertices": [[x0, y0], [x1, y1]]}`` (two corners) or
    ``{"kind": "polygon", "vertices": (k, 2)}``; None when the view holds none.
    The one place that reads a view's shape (its ``selection_shape`` trait).
    """
    return view.selection_shape


def _inside(x: np.ndarray, y: np.ndarray, shape: dict) -> np.ndarray:
    v = np.asarray(shape["vertices"], dtype=float)
    if shape["kind"] == "rectangle":
        return geometry.points_in_rectangle(x, y, sorted(v[:, 0]), sorted(v[:, 1]))
    return geometry.points_in_polygon(x, y, v)


def _part_block(values: pd.DataFrame, parts: Sequence[str], members) -> np.ndarray:
    """Values of ``parts`` (amalgamations summed) of one partition."""
    out = np.empty((len(values), len(parts)))
    for j, p in enumerate(parts):
        out[:, j] = values[list(members(p))].to_numpy(dtype=float).sum(axis=1)
    return out


def _placed(values: pd.DataFrame, parts, members, place):
    """(complete mask, x, y) of one partition: ``place`` maps its complete rows' part
    values (rows, parts) to their (x, y) in a view; other rows get NaN."""
    v = _part_block(values, parts, members)
    with np.errstate(invalid="ignore"):
        ok = np.all(np.isfinite(v) & (v > 0), axis=1)
    x = np.full(len(v), np.nan)
    y = np.full(len(v), np.nan)
    if ok.any():
        x[ok], y[ok] = place(v[ok])
    return ok, x, y


def _ternary_xy(values: pd.DataFrame, parts, members, centring):
    """(complete mask, x, y) of one partition in a ternary view's coordinates."""

    def place(v):
        closed = core.closure(v)
        if centring is not None:
            closed = core_ternary.perturb_closed(closed, centring)
        return core_ternary.ternary_to_xy(closed)

    return _placed(values, parts, members, place)


class AllRows:
    """What the workbench computes over all rows of a :class:`LazyComposition`.

    Parameters
    ----------
    lazy : LazyComposition
    model : CompositionModel
        The model of the sample the views show.
    positions : ndarray
        Row position (over all rows) of each sampled row, in the model's order.
    """

    def __init__(self, lazy: LazyComposition, model, positions: np.ndarray):
        self.lazy = lazy
        self.model = model
        self.positions = np.asarray(positions)
        self._counts: dict = {}  # density counts of all rows, per view geometry
        self._moments: dict = {}  # clr moments of all rows, per parts and groups
        self._statistics: dict = {}  # balance statistics, per parts, groups and SBP
        self._shown: list = []  # the views whose density layer counts all rows

    def _members(self, parts) -> tuple:
        return tuple((p, tuple(self.model.members(p))) for p in parts)

    # ---------------------------------------------------------- coordinates
    def _geometry(self, view):
        """(key, function (values partition) -> (ok, x, y)) of ``view``'s coordinates.

        The key names what the coordinates depend on (parts and their members,
        centring, biplot fit and plane), so that counts found once are kept.
        """
        from ..views.biplot import BiplotView
        from ..views.ternary import TernaryView

        model = self.model
        if isinstance(view, TernaryView):
            parts = list(view.parts)
            groups = {p: model.members(p) for p in parts}
            centring = view._centring if view.centred else None
            key = (
                "ternary",
                self._members(parts),
                None if centring is None else np.asarray(centring).tobytes(),
            )
            return key, lambda values: _ternary_xy(values, parts, groups.__getitem__, centring)
        if isinstance(view, BiplotView):
            fit = view.biplot
            if fit is None:
                raise core.CompositionError("BiplotView: no biplot fitted (too few rows)")
            parts = list(fit.parts)
            groups = {p: model.members(p) for p in parts}
            cx, cy = view._plane()
            components = [cx] if cy is None else [cx, cy]
            key = (
                "biplot",
                self._members(parts),
                fit.scaling,
                tuple(components),
                fit.right_vectors.tobytes(),
                fit.clr_mean.tobytes(),
            )
            return key, lambda values: _biplot_xy(values, parts, groups.__getitem__, fit, cx, cy)
        raise core.CompositionError(
            f"{type(view).__name__}: all rows can be placed in a ternary view or the biplot "
            "(whose axes are fitted on the sample), not in this view"
        )

    def _projector(self, view):
        """A function (values partition) -> (ok, x, y) in ``view``'s coordinates."""
        return self._geometry(view)[1]

    def density_counts(self, views: Sequence) -> list[np.ndarray]:
        """Bin counts of all rows on each view's density grid, in one pass (exact).

        Counts found before for the same geometry (parts, centring, fit, plane,
        grid) are a lookup; the others are counted together in one pass.
        """
        keys, todo = [], []
        for view in views:
            image = view._density_image
            key, project = self._geometry(view)
            key = (*key, tuple(image.extent), tuple(np.atleast_1d(image.bins)))
            keys.append(key)
            if key not in self._counts and key not in [k for k, _ in todo]:
                todo.append((key, (project, image.extent, image.bins)))
        if todo:
            found = self._count([grid for _, grid in todo])
            for (key, _), counts in zip(todo, found, strict=True):
                self._counts[key] = counts
        return [self._counts[key] for key in keys]

    def _count(self, grids: list) -> list[np.ndarray]:
        import dask

        def counts(values):
            out = []
            for project, extent, bins in grids:
                ok, x, y = project(values)
                index = geometry.bin_index(x[ok], y[ok], extent, bins)
                out.append(geometry.counts_from_bins(index, bins))
            return out

        (pieces,) = dask.compute([dask.delayed(counts)(b) for b in self.lazy.values.to_delayed()])
        return [np.sum([p[k] for p in pieces], axis=0) for k in range(len(grids))]

    def show_density(self, *views) -> None:
        """Draw the views' density layers from all rows (density mode), saying which is which.

        The views are then followed: after a change of the active parts (or
        their amalgamations), of a ternary's parts or centring, or of the
        biplot's plane or scaling, their all-row density is drawn again
        (counted once per geometry, then looked up).
        """
        for view in views:
            if view not in self._shown:
                self._shown.append(view)
                self._follow(view)
        self._redraw(views)

    def _follow(self, view) -> None:
        names = [
            n
            for n in ("parts", "centred", "grid_step", "scaling", "components", "mode")
            if view.has_trait(n)
        ]
        view.observe(lambda change: self._redraw([view]), names=names)
        if len(self._shown) == 1:
            self.model.observe(
                lambda change: self._redraw(self._shown), names=["active_parts", "amalgamations"]
            )

    def _redraw(self, views) -> None:
        sample = f"a seeded sample of {self.model.n_rows:,} of {self.lazy.n_rows:,} rows"
        dense = []
        for view in views:
            if view.active_mode == "density" and self._drawable(view):
                dense.append(view)
            else:
                view._set_note("rows", f"points: {sample}")
        for view, counts in zip(dense, self.density_counts(dense) if dense else [], strict=True):
            self._draw_density(view, counts, sample)

    @staticmethod
    def _drawable(view) -> bool:
        from ..views.biplot import BiplotView

        return not isinstance(view, BiplotView) or view.biplot is not None

    def _draw_density(self, view, counts: np.ndarray, sample: str) -> None:
        from ..views.biplot import BiplotView

        view._density_image.set_all_counts(counts)
        view._render_density()
        fit = "; axes fitted on the sample" if isinstance(view, BiplotView) else ""
        view._set_note(
            "rows",
            f"grey density: all {self.lazy.n_rows:,} rows; selection and hover points: "
            f"{sample}{fit}",
        )

    # ------------------------------------------------------------ selection
    def selected_mask(self, view, shape: dict | None = None):
        """Lazy boolean Series (all rows): inside the shape drawn in ``view`` (or ``shape``)."""
        shape = shape or selection_shape(view)
        if shape is None:
            raise core.CompositionError(f"{type(view).__name__}: no selection shape drawn yet")
        project = self._projector(view)

        def inside(values):
            ok, x, y = project(values)
            mask = np.zeros(len(values), dtype=bool)
            mask[ok] = _inside(x[ok], y[ok], shape)
            return pd.Series(mask, index=values.index, name="selected")

        return self.lazy.values.map_partitions(
            inside, meta=pd.Series(dtype=bool, name="selected", index=self.lazy.values._meta.index)
        )

    def selected_rows(self, view, shape: dict | None = None, what: str = "values"):
        """Lazy DataFrame of the rows of all rows inside the shape (``what``: a frame name,
        or ``"ilr"`` for the balances of the model's SBP)."""
        frame = ilr_frame(self) if what == "ilr" else getattr(self.lazy, what)
        mask = self.selected_mask(view, shape)
        return frame[mask]

    # ------------------------------------------------------------ statistics
    def part_values(self, parts: Sequence[str] | None = None):
        """Lazy DataFrame of the values of ``parts`` (amalgamations summed) of all rows."""
        parts = list(self.model.active_parts if parts is None else parts)
        members = {p: self.model.members(p) for p in parts}

        def block(values):
            return pd.DataFrame(
                _part_block(values, parts, members.__getitem__), index=values.index, columns=parts
            )

        meta = pd.DataFrame({p: pd.Series(dtype=float) for p in parts})
        meta.index = self.lazy.values._meta.index
        return self.lazy.values.map_partitions(block, meta=meta)

    def complete_values(self, parts: Sequence[str] | None = None):
        """:meth:`part_values` of the rows with a positive value in every part."""
        v = self.part_values(parts)
        return v[((v > 0) & v.notnull()).all(axis=1)]

    def variation_matrix(self, parts: Sequence[str] | None = None) -> pd.DataFrame:
        """Variation matrix of ``parts`` over all complete rows (one pass, exact)."""
        return core.variation_matrix(self.complete_values(parts))

    def balance_summary(self) -> pd.DataFrame:
        """Per balance of the model's SBP, over all complete rows: mean, variance and its
        share of the total variance of the active parts (one pass of partition-wise sums)."""
        from ..core._lazy import clr_moments

        model = self.model
        sbp = core.require_sbp(model.sbp, model.active_parts)
        basis = core.sbp_basis(sbp, complete=False)
        m = clr_moments(self.complete_values())
        cov = m.gram / (m.n - core.DDOF)
        variance = np.einsum("ij,jk,ik->i", basis, cov, basis)
        return pd.DataFrame(
            {
                "mean": basis @ m.mean,
                "variance": variance,
                "share": variance / np.trace(cov),
                "rows": m.n,
            },
            index=pd.Index(list(model.balance_names), name="balance"),
        )

    def _group_source(self):
        model = self.model
        column = model.group_column
        if not column:
            return None, [], ""
        cats, _ = model.group_codes()
        return self.lazy.metadata[column], list(cats), column

    def builder_statistics(self, sbp: np.ndarray, names: Sequence[str]):
        """The builder's statistics over all rows: ``(entries, total, n_used, n_rows)``.

        ``entries`` (one per SBP row) hold ``n``, ``n_missing``, ``variance``,
        ``share``, ``mean``, ``groups`` and, with a grouping, ``separation`` over
        all rows complete in the active parts
        (:func:`compwidgets.core._lazy.summarize_balances`); one pass over all
        rows per set of active parts and grouping (the clr moments), kept, and the
        figures of each SBP kept too (a renamed balance only changes its name).
        """
        from ..core import _lazy

        model = self.model
        parts = list(model.active_parts)
        groups, cats, column = self._group_source()
        base = (self._members(parts), column, tuple(cats))
        sbp = np.asarray(sbp, dtype=np.int8)
        key = (base, sbp.shape, sbp.tobytes())
        if key not in self._statistics:
            values = self.part_values(parts)
            if base not in self._moments:
                self._moments[base] = _lazy.balance_moments(values, groups, cats)
            moments = self._moments[base]
            entries, total = _lazy.summarize_balances(values, sbp, groups, cats, moments=moments)
            self._statistics[key] = (entries, total, moments.total.n, moments.n_rows)
        entries, total, n_used, n_rows = self._statistics[key]
        named = [{**e, "name": str(name)} for e, name in zip(entries, names, strict=True)]
        return named, total, n_used, n_rows

    def show_statistics(self, builder) -> None:
        """Make ``builder`` show its balances' statistics over all rows (and say so)."""
        builder.set_statistics_source(self.builder_statistics)


def _biplot_xy(values: pd.DataFrame, parts, members, fit, cx: int, cy: int | None):
    """(complete mask, x, y) of one partition in a biplot's plane (the sample's fit)."""
    from ..core import _lazy

    components = [cx] if cy is None else [cx, cy]

    def place(v):
        coords = _lazy.biplot_row_coords(fit, v, components)
        return coords[:, 0], (np.zeros(len(v)) if cy is None else coords[:, 1])

    return _placed(values, parts, members, place)


def ilr_frame(all_rows: AllRows):
    """Lazy DataFrame of the balances of the model's SBP over all rows (NaN: incomplete)."""
    model = all_rows.model
    sbp = core.require_sbp(model.sbp, model.active_parts, complete=True)
    names = list(model.balance_names)
    values = all_rows.part_values()

    def block(v: pd.DataFrame) -> pd.DataFrame:
        a = v.to_numpy(dtype=float)
        with np.errstate(invalid="ignore"):
            ok = np.all(np.isfinite(a) & (a > 0), axis=1)
        out = np.full((len(v), len(names)), np.nan)
        if ok.any():
            out[ok] = core.balances(a[ok], sbp)
        return pd.DataFrame(out, index=v.index, columns=names)

    meta = pd.DataFrame({n: pd.Series(dtype=float) for n in names})
    meta.index = values._meta.index
    return values.map_partitions(block, meta=meta)


def explore_lazy(
    lazy: LazyComposition,
    *,
    sample_size: int = DEFAULT_SAMPLE,
    seed: int = 0,
    active_parts=None,
    group=None,
    ternary_parts=None,
    mode: str = "auto",
):
    """The workbench on a seeded sample of ``lazy``'s rows, with ``bench.all_rows``."""
    from ..model import CompositionModel
    from ..workbench import Workbench, default_group_column

    composition, positions = lazy.sample(sample_size, seed)
    if group is None:
        group = default_group_column(composition.metadata)
    model = CompositionModel(composition, active_parts=active_parts, group_column=group)
    bench = Workbench(model, ternary_parts=ternary_parts, mode=mode)
    bench.all_rows = AllRows(lazy, model, positions)
    bench.all_rows.show_density(*bench.ternaries, bench.biplot)
    bench.all_rows.show_statistics(bench.builder)
    import ipywidgets as widgets

    bench.statistics_note = widgets.Label(
        f"balance table and dendrogram: n, mean, variance, share, group means, ANOVA F and "
        f"between share over all {lazy.n_rows:,} rows (complete rows of the active parts); "
        f"quantiles, Kruskal-Wallis H and the selection from the sample of {model.n_rows:,} rows"
    )
    _place_above(bench, bench.builder, bench.statistics_note)
    return bench


def _place_above(bench, view, note) -> None:
    """Put ``note`` right above ``view`` in the box that holds it (the view's grid cell)."""
    boxes = [bench]
    while boxes:
        box = boxes.pop()
        children = list(getattr(box, "children", ()))
        if view in children:
            k = children.index(view)
            box.children = (*children[:k], note, *children[k:])
            return
        boxes.extend(c for c in children if hasattr(c, "children"))
    bench.children = (*bench.children, note)  # not found: at the end of the workbench
