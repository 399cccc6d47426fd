"""Telling the groups of a model apart on its active parts, and assigning new samples.

:class:`GroupDiscriminant` fits a linear (or quadratic) discriminant rule
(:mod:`compwidgets.core.discriminant`, scikit-learn) on the ilr coordinates of
the model's active parts, with the model's grouping column as the groups. It
keeps what it was fitted on (parts, amalgamations, groups, rows), so it can

* cross-validate itself (stratified k-fold) into a confusion matrix,
* :meth:`~GroupDiscriminant.classify` another table, read with the same intake
  options (parts matched by name; a missing part is refused by name), giving
  each new sample a group, the posterior probabilities and a flag when it is
  far from every training group (robust distance above a stated cut-off),
* export itself as a scikit-learn ``Pipeline``: the
  :class:`~compwidgets.transformer.BalanceTransformer` of the model's SBP (or
  the pivot SBP) followed by the discriminant.

Assignments are exploratory: they depend on the groups the rule was trained
on, and a sample from none of them is still given one (the far flag helps,
it does not prove). Decisions such as provenance calls used in reports rest on
validated methods and local practice, not on this rule alone.

Example
-------
>>> import compwidgets as cw
>>> table = cw.demo.stream_sediments(n=400)  # invented survey, five catchments
>>> model = cw.CompositionModel(cw.read_composition(table), group_column="catchment")
>>> model.active_parts = ["SiO2", "Al2O3", "MgO", "CaO", "Na2O", "K2O"]
>>> rule = GroupDiscriminant(model)  # the model's groups, on its active parts
>>> rule.confusion_frame().shape  # cross-validated counts, true x assigned
(5, 5)
>>> new = rule.classify(cw.demo.stream_sediments(n=5, seed=3))  # read like the survey
>>> list(new.columns[:6])
['group', 'posterior', 'far', 'distance', 'nearest', 'note']
>>> rule.pipeline().named_steps["balances"]  # doctest: +ELLIPSIS
BalanceTransformer(...)
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from functools import cached_property

import numpy as np
import pandas as pd

from . import core
from .composition import Composition
from .core import discriminant as cd
from .model import CompositionModel

__all__ = ["CAUTION", "GroupDiscriminant", "intake_options"]

#: Shown with every assignment (view, notebook, docs).
CAUTION = (
    "Assignments are exploratory: they depend on the training groups, and a sample from "
    "none of them is still given one. Decisions (e.g. provenance calls used in reports) "
    "rest on validated methods and local practice."
)

#: read_composition options rebuilt from a Composition's settings, by settings key.
_SETTING_OPTIONS = {
    "units_given": "units",
    "default_unit": "default_unit",
    "unit": "common_unit",
    "replacement": "replacement",
    "fraction": "fraction",
    "negative_is_below_detection": "negative_is_below_detection",
    "check_total": "check_total",
    "total_window": "total_window",
    "total_tolerance": "total_tolerance",
    "decimal": "decimal",
    "thousands": "thousands",
    "below_tokens": "below_tokens",
    "missing_tokens": "missing_tokens",
}
#: Options that name parts (a new table without those parts would refuse them).
_PART_OPTIONS = ("units", "detection_limits", "convert")


def intake_options(composition: Composition) -> dict:
    """The :func:`~compwidgets.read_composition` options a Composition was read with.

    Everything but what depends on the table itself: units, common unit,
    formula conversions, detection limits given as an argument (limits a
    table carried in its ``attrs`` are the new table's own business),
    replacement and its fraction, the total check, decimal and thousands
    marks, tokens, and the index column when one was named (a detected
    sample-id column is detected again in the new table).
    """
    settings = composition.settings
    options = {
        option: settings[key]
        for key, option in _SETTING_OPTIONS.items()
        if settings.get(key) is not None
    }
    if "total_window" in options:
        options["total_window"] = tuple(options["total_window"])
    if (
        settings.get("detection_limits") is not None
        and settings.get("detection_limits_source", "argument") == "argument"
    ):
        options["detection_limits"] = settings["detection_limits"]
    if settings.get("index_source") == "index_col" and settings.get("index_col") is not None:
        options["index_col"] = settings["index_col"]
    conversions = settings.get("conversions") or {}
    if conversions:
        options["convert"] = {name: c["to"] for name, c in conversions.items()}
    return options


def _read_like(table, options: dict) -> Composition:
    """Read ``table`` with ``options``; per-part options keep only the parts it has."""
    from .intake import read_composition

    try:
        return read_composition(table, **options)
    except core.CompositionError:
        named = {k: v for k, v in options.items() if isinstance(v, Mapping) and k in _PART_OPTIONS}
        if not named:
            raise
    # the table lacks some parts the options name: learn its parts, then keep those
    plain = {k: v for k, v in options.items() if k not in named}
    first = read_composition(table, **plain)
    known = set(first.parts) | set(first.settings.get("columns", {}).values())
    for key, value in named.items():
        plain[key] = {k: v for k, v in value.items() if str(k) in known}
    return read_composition(table, **plain)


class GroupDiscriminant:
    """A discriminant rule for the groups of a model, fitted on its active parts.

    Parameters
    ----------
    model : CompositionModel
        Its ``group_column`` gives the groups and ``active_parts`` the parts
        (amalgamations summed); the rule keeps a snapshot of both.
    kind : {"linear", "quadratic"}, default "linear"
    priors : {"proportional", "equal"}, default "proportional"
    n_splits : int, default 5
        Folds of the stratified cross-validation.
    max_fit_rows : int or None, default 20,000
        Fit on a stratified random sample of at most this many rows (seeded);
        assignments are computed for every row.
    max_cv_rows : int or None, default 10,000
        Cross-validate a stratified random sample of at most this many rows.
    seed : int, default 0
        Seed of the samples and of the shuffled folds.
    far_quantile : float, default 0.999
        Quantile of the far-from-every-group cut-off: a new member of a normal
        group is flagged with probability close to ``1 - far_quantile``
        (:func:`compwidgets.core.discriminant.mcd_prediction_cutoff`, one cut-off
        per group from the rows its robust fit used).
    far_rows_per_group : int or None, default 500
        Rows of each group its robust (MCD) centre and scatter are fitted on
        (a seeded random subset beyond): more rows give steadier estimates and
        cost more time.

    Attributes
    ----------
    fit : compwidgets.core.discriminant.DiscriminantFit
    parts : list of str
        The active parts at fit time.
    members : dict of str -> list of str
        The parts of the composition summed into each of them.
    group_column : str
    rows : ndarray of uint32
        Model row positions complete in the parts (assigned, drawn).
    codes : ndarray of int
        Group code of each model row in ``fit.classes`` (-1: no group, or a
        group left out of the fit).
    """

    def __init__(
        self,
        model: CompositionModel,
        kind: str = "linear",
        priors: str = "proportional",
        *,
        n_splits: int = 5,
        max_fit_rows: int | None = 20_000,
        max_cv_rows: int | None = 10_000,
        seed: int = 0,
        far_quantile: float = cd.DEFAULT_FAR_QUANTILE,
        far_rows_per_group: int | None = 500,
    ):
        if not isinstance(model, CompositionModel):
            raise TypeError(f"GroupDiscriminant needs a CompositionModel, got {type(model)}")
        if not model.group_column:
            raise core.CompositionError(
                "the model has no grouping column; set model.group_column (or make a group "
                "from a selection with model.selection_to_group) first"
            )
        self.kind, self.priors = kind, priors
        self.n_splits, self.max_cv_rows, self.seed = int(n_splits), max_cv_rows, int(seed)
        self.far_quantile, self.far_rows_per_group = float(far_quantile), far_rows_per_group
        self.parts = list(model.active_parts)
        self.members = {p: list(model.members(p)) for p in self.parts}
        self.group_column = model.group_column
        self.settings = dict(model.composition.settings)
        self._composition = model.composition
        self._sbp = None if model.sbp is None else np.array(model.sbp, dtype=np.int8)
        self._balance_names = list(model.balance_names)
        self.index = model.index
        complete = model.complete_rows(self.parts)
        every = bool(complete.all())
        self.rows = np.flatnonzero(complete).astype(np.uint32)
        values = np.asarray(model.part_values(self.parts))
        # row-major (the coordinates of every row are computed from it): the model's own
        # read-only values when every row is complete and they are row-major, else one copy
        self.values = np.ascontiguousarray(values if every else values[self.rows])
        categories, all_codes = model.group_codes()
        row_codes = all_codes if every else all_codes[self.rows]
        labels = pd.Categorical.from_codes(row_codes, categories=categories)  # no row loop
        self.fit = cd.fit_discriminant(
            pd.DataFrame(self.values, columns=self.parts, copy=False),
            labels,
            kind=kind,
            priors=priors,
            classes=categories,
            min_group_rows=cd.default_min_group_rows(kind, len(self.parts) - 1, n_splits),
            max_rows=max_fit_rows,
            seed=seed,
        )
        lookup = {name: k for k, name in enumerate(self.fit.classes)}
        # the fitted group of each category (-1: left out); code -1 reads the last entry
        remap = np.array([lookup.get(c, -1) for c in categories] + [-1], dtype=np.int64)
        self.codes = remap[row_codes]
        self.coordinates = self.fit.coordinates(self.values)

    # ------------------------------------------------------------ the model's rows
    @property
    def classes(self) -> list[str]:
        return list(self.fit.classes)

    @cached_property
    def posteriors(self) -> np.ndarray:
        """Posterior probabilities (len(rows), K) of the rows shown."""
        return self.fit.posteriors(self.coordinates)

    @cached_property
    def axis_coordinates(self) -> np.ndarray:
        """Coordinates (len(rows), n_axes) of the rows on the discriminant axes."""
        return self.fit.axis_coordinates(self.coordinates)

    @cached_property
    def cross_validation(self) -> cd.CrossValidation:
        """Stratified k-fold assignments; ``rows`` are model row positions."""
        cv = cd.cross_validate(
            self.fit,
            self.coordinates,
            self.codes,
            n_splits=self.n_splits,
            seed=self.seed,
            max_rows=self.max_cv_rows,
        )
        return dataclasses.replace(cv, rows=self.rows[cv.rows])

    @cached_property
    def distances(self) -> cd.GroupDistances:
        """Robust centre and scatter of each training group (computed when first asked).

        One MCD per group, on at most ``far_rows_per_group`` of its rows (a seeded
        random subset): :func:`compwidgets.core.discriminant.fit_group_distances`.
        """
        return cd.fit_group_distances(
            self.fit,
            self.coordinates,
            self.codes,
            quantile=self.far_quantile,
            max_rows_per_group=self.far_rows_per_group,
            seed=self.seed,
        )

    def confusion_frame(self) -> pd.DataFrame:
        """Cross-validated counts: rows = true group, columns = assigned group."""
        cv = self.cross_validation
        names = pd.Index(self.classes)
        return pd.DataFrame(
            cv.confusion,
            index=names.rename(f"{self.group_column} (true)"),
            columns=names.rename("assigned (cross-validated)"),
        )

    def loadings_frame(self) -> pd.DataFrame:
        """clr loadings (parts x axes) of the discriminant directions; each column sums to 0."""
        L = self.fit.clr_loadings
        return pd.DataFrame(
            L, index=pd.Index(self.parts, name="part"), columns=_axis_names(L.shape[1])
        )

    def assignments(self) -> pd.DataFrame:
        """Group, posterior probabilities and cross-validated group of every model row."""
        complete = np.zeros(self.index.size, dtype=bool)
        complete[self.rows] = True
        out = self._frame(self.index, complete, self.rows, self.posteriors, None)
        out.insert(1, "cross-validated", self._cv_labels())
        return out

    def _cv_labels(self) -> pd.Series:
        cv = self.cross_validation
        out = pd.Series(None, index=self.index, dtype=object)
        out.iloc[cv.rows] = np.asarray(self.classes, dtype=object)[cv.predicted]
        return out

    # ---------------------------------------------------------------- new samples
    def part_frame(self, composition: Composition) -> pd.DataFrame:
        """Values of the rule's parts in a Composition (amalgamations summed), its index.

        Raises
        ------
        CompositionError
            Naming the parts the composition lacks.
        """
        missing = sorted(
            {m for p in self.parts for m in self.members[p] if m not in composition.parts}
        )
        if missing:
            raise core.CompositionError(
                f"the table lacks part(s) {', '.join(missing)} that the rule uses "
                f"(parts: {', '.join(self.parts)}); its parts are "
                f"{', '.join(composition.parts)}"
            )
        frame = composition.values
        data = {p: frame[self.members[p]].to_numpy(dtype=float).sum(axis=1) for p in self.parts}
        return pd.DataFrame(data, index=frame.index)

    def classify(self, table, **read_options) -> pd.DataFrame:
        """Assign the samples of another table to the rule's groups.

        Parameters
        ----------
        table : DataFrame, path or Composition
            A table is read with :func:`~compwidgets.read_composition` and the
            intake options of the training table (:func:`intake_options`),
            updated by ``read_options``; a Composition is used as it is.
            Parts are matched by name; a part (or amalgamation member) the
            table lacks raises, naming it.
        **read_options
            Options overriding the training table's (e.g. ``parts=``).

        Returns
        -------
        DataFrame, one row per sample of the table (its index), with columns
            ``group`` (assigned; None where a part is missing or zero),
            ``posterior`` (of that group), ``far`` (True when the robust
            distance to every training group exceeds the cut-off of
            :attr:`far_cutoffs`), ``distance`` (robust distance to the nearest
            group), ``nearest`` (that group), ``note`` (why a row has no
            group), then ``posterior: <group>`` for each group.
        """
        if isinstance(table, Composition):
            if read_options:
                raise TypeError("read options apply to a table, not to a Composition")
            composition = table
        else:
            composition = _read_like(table, {**intake_options(self._composition), **read_options})
        frame = self.part_frame(composition)
        values = frame.to_numpy(dtype=float)
        complete = np.all(np.isfinite(values) & (values > 0), axis=1)
        rows = np.flatnonzero(complete)
        Y = self.fit.coordinates(values[rows]) if rows.size else np.zeros((0, len(self.parts) - 1))
        post = self.fit.posteriors(Y) if rows.size else np.zeros((0, len(self.classes)))
        out = self._frame(frame.index, complete, rows, post, Y)
        bad = ~complete
        if bad.any():
            parts = np.array(self.parts, dtype=object)
            empty = ~(np.isfinite(values) & (values > 0))
            out.loc[bad, "note"] = [
                "missing or zero in " + ", ".join(parts[e]) for e in empty[bad]
            ]
        return out

    @property
    def far_cutoffs(self) -> pd.Series:
        """Robust distance beyond which a sample is far from each group, by group.

        :func:`compwidgets.core.discriminant.mcd_prediction_cutoff` of the rows
        each group's robust fit used (NaN for a group without one).
        """
        gd = self.distances
        return pd.Series(
            gd.cutoff_row(), index=pd.Index(self.classes, name="group"), name="cutoff"
        )

    def _frame(self, index, complete, rows, post, Y) -> pd.DataFrame:
        n = len(index)
        names = np.asarray(self.classes, dtype=object)
        group = np.full(n, None, dtype=object)
        best = np.full(n, np.nan)
        if rows.size:
            k = np.argmax(post, axis=1)
            group[rows] = names[k]
            best[rows] = post[np.arange(rows.size), k]
        data: dict = {"group": group, "posterior": best}
        if Y is not None:
            far = np.full(n, None, dtype=object)
            dist = np.full(n, np.nan)
            nearest = np.full(n, None, dtype=object)
            if rows.size:
                d = self.distances.distances(Y)
                usable = np.isfinite(d).any(axis=1)
                with np.errstate(invalid="ignore"):
                    dmin = np.where(
                        usable, np.nanmin(np.where(np.isfinite(d), d, np.inf), 1), np.nan
                    )
                far[rows] = self.distances.far(Y, distances=d)
                dist[rows] = dmin
                idx = np.argmin(np.where(np.isfinite(d), d, np.inf), axis=1)
                nearest[rows] = np.where(usable, names[idx], None)
            data.update(far=far, distance=dist, nearest=nearest)
        data["note"] = np.where(complete, "", "incomplete")
        for j, name in enumerate(self.classes):
            column = np.full(n, np.nan)
            column[rows] = post[:, j] if rows.size else []
            data[f"posterior: {name}"] = column
        return pd.DataFrame(data, index=index)

    # ----------------------------------------------------------------- export
    def pipeline(self, sbp=None, names=None):
        """The rule as a fitted scikit-learn ``Pipeline`` (balances, then the discriminant).

        Step ``"balances"``: a :class:`~compwidgets.transformer.BalanceTransformer`
        with ``sbp`` (and balance ``names``) when given, else the model's SBP when it
        was complete at fit time, else the pivot SBP, over :attr:`parts`; step
        ``"discriminant"``: the same kind of
        estimator with the same priors, fitted on the same rows, with the group
        names as labels. Its input is a DataFrame with one column per part,
        named as :attr:`parts` (amalgamations summed: :meth:`part_frame`).
        The discriminant rules are affine invariant, so its posteriors equal
        the rule's own (up to rounding) whatever the SBP.
        """
        from sklearn.base import clone
        from sklearn.pipeline import Pipeline

        from .transformer import BalanceTransformer, pivot_sbp

        D = len(self.parts)
        if sbp is None:
            complete = self._sbp is not None and self._sbp.shape == (D - 1, D)
            sbp = self._sbp if complete else pivot_sbp(D)
            names = self._balance_names if complete else None
        order = np.argsort(np.asarray(self.classes, dtype=object))  # scikit-learn sorts labels
        estimator = clone(self.fit.estimator).set_params(priors=self.fit.priors[order])
        pipe = Pipeline(
            [
                ("balances", BalanceTransformer(sbp=sbp, parts=list(self.parts), names=names)),
                ("discriminant", estimator),
            ]
        )
        rows = self.fit.fit_rows
        train = pd.DataFrame(self.values[rows], columns=self.parts)
        labels = np.asarray(self.classes, dtype=object)[self._fit_codes(rows)]
        return pipe.fit(train, labels)

    def _fit_codes(self, rows: np.ndarray) -> np.ndarray:
        """Codes of the rows the rule was fitted on (positions among ``self.rows``)."""
        return self.codes[rows]

    def __repr__(self) -> str:
        return (
            f"<GroupDiscriminant {self.kind}: {len(self.classes)} groups of "
            f"{self.group_column!r} on {len(self.parts)} parts, {self.rows.size} rows>"
        )


def _axis_names(n: int) -> list[str]:
    return [f"axis {j + 1}" for j in range(n)]
