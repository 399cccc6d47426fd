"""Discriminant analysis of groups of compositions on their ilr coordinates.

Groups (lithologies, catchments, source areas) are told apart by a linear
(LDA) or quadratic (QDA) discriminant analysis of the ilr coordinates of the
parts (``sklearn.discriminant_analysis``): each group is a normal law in ilr
space (LDA: one covariance shared by the groups, QDA: one per group) with a
prior probability, and a composition is assigned to the group of largest
posterior probability.

Both rules are affine invariant: fitted on ``y R + c`` for any invertible
``R`` they give the same posteriors. Orthonormal ilr bases differ by a
rotation, and clr coordinates are ilr coordinates padded with a constant
direction, so the assignments and posteriors do not depend on the basis or on
the SBP chosen (the tests check this against scikit-learn fitted on clr
coordinates and on another basis).

The discriminant axes are those of the LDA (the canonical variates: unit
within-group variance, the first separating the group means most); with
``kind="quadratic"`` the plane is still the LDA's, the assignments QDA's. A
direction ``a`` in ilr coordinates is the log-contrast ``sum_j l_j ln x_j``
with clr loadings ``l = V' a`` (``V`` the contrast basis), which sum to zero.

Assignments are exploratory: they depend on the groups the rule was trained
on, and a composition unlike every training group is still assigned to one of
them (hence the distance check of :class:`GroupDistances`). Decisions such as
provenance calls in reports rest on validated methods and local practice.

References
----------
Aitchison, J. (1986) The Statistical Analysis of Compositional Data, ch. 12
(discrimination on log-ratios; from memory). Hastie, T., Tibshirani, R.,
Friedman, J. (2009) The Elements of Statistical Learning, 2nd ed., section 4.3
(linear and quadratic discriminant functions; from memory).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ._arrays import MAX_LISTED, CompositionError, Table, _listing, as_table, require_positive
from .outliers import robust_distances
from .transforms import check_basis, clr_values, default_basis

__all__ = [
    "DEFAULT_FAR_QUANTILE",
    "KINDS",
    "PRIORS",
    "Boundary",
    "CrossValidation",
    "DiscriminantFit",
    "GroupDistances",
    "cross_validate",
    "decision_boundaries",
    "default_min_group_rows",
    "fit_discriminant",
    "group_shares",
    "fit_group_distances",
    "mcd_prediction_cutoff",
    "stratified_rows",
]

#: Discriminant rules: one shared covariance (linear) or one per group (quadratic).
KINDS = ("linear", "quadratic")
#: Prior probabilities: the groups' shares of the training rows, or equal.
PRIORS = ("proportional", "equal")
#: Quantile of the distance beyond which a sample is far from a group (see
#: :func:`mcd_prediction_cutoff`).
DEFAULT_FAR_QUANTILE = 0.999


def default_min_group_rows(kind: str, n_coordinates: int, n_splits: int = 5) -> int:
    """Fewest rows a group needs to take part in a fit and its cross-validation.

    Linear: ``n_splits`` (each fold of a stratified k-fold split holds one);
    quadratic: also enough for a non-singular covariance in each training fold,
    ``ceil((p + 2) n_splits / (n_splits - 1))`` for p coordinates.
    """
    _check_kind(kind)
    k = max(2, int(n_splits))
    if kind == "linear":
        return k
    return max(k, int(np.ceil((int(n_coordinates) + 2) * k / (k - 1))))


def _check_kind(kind: str) -> str:
    if kind not in KINDS:
        raise CompositionError(f"unknown discriminant {kind!r}; use 'linear' or 'quadratic'")
    return kind


# ----------------------------------------------------------------------------- the fit


@dataclass(frozen=True, eq=False)
class DiscriminantFit:
    """A discriminant rule fitted on the ilr coordinates of compositions.

    Attributes
    ----------
    kind : {"linear", "quadratic"}
    classes : list of str
        Group names; code k (the estimator's class k) is ``classes[k]``.
    parts : list of str
    basis : ndarray of shape (D-1, D)
        Orthonormal contrasts: coordinates are ``clr(x) @ basis.T``.
    estimator : LinearDiscriminantAnalysis or QuadraticDiscriminantAnalysis
        Fitted on the coordinates, with classes ``0 .. K-1`` and fixed priors.
    axes : LinearDiscriminantAnalysis
        The LDA of the same rows (``estimator`` itself when linear): the plane.
    priors : ndarray of shape (K,)
    n_train : ndarray of int, shape (K,)
        Rows of each group the rule was fitted on.
    n_available : ndarray of int, shape (K,)
        Rows of each group given (more than ``n_train`` when a sample was fitted).
    fit_rows : ndarray of int
        Positions, among the rows given, of the rows fitted (sorted).
    left_out : dict of str -> int
        Groups too small to take part, with their row counts.
    min_group_rows : int
        The size below which a group was left out.
    second_direction : ndarray of shape (D-1,) or None
        With two groups (one discriminant axis): the direction, in ilr
        coordinates, of largest spread of the fitted rows across that axis
        (first principal component of what the axis leaves), the y of
        :meth:`plane_coordinates`. None with more groups.
    """

    kind: str
    classes: list[str]
    parts: list[str]
    basis: np.ndarray
    estimator: object
    axes: object
    priors: np.ndarray
    n_train: np.ndarray
    n_available: np.ndarray
    fit_rows: np.ndarray
    left_out: dict = field(default_factory=dict)
    min_group_rows: int = 2
    second_direction: np.ndarray | None = None

    # ---------------------------------------------------------- coordinates
    @property
    def n_coordinates(self) -> int:
        return int(self.basis.shape[0])

    @property
    def n_axes(self) -> int:
        """Discriminant axes: ``min(K - 1, p)``."""
        return int(min(len(self.classes) - 1, self.n_coordinates))

    def coordinates(self, X) -> np.ndarray:
        """ilr coordinates (n, D-1) of compositions (n, D) of :attr:`parts`, in this basis."""
        t = as_table(X, min_parts=2, copy=False)  # read only: clr_values makes its own
        require_positive(t)
        if t.values.shape[1] != len(self.parts):
            raise CompositionError(
                f"the rule was fitted on {len(self.parts)} parts ({', '.join(self.parts)}); "
                f"got {t.values.shape[1]} columns"
            )
        return clr_values(t) @ self.basis.T

    def _checked(self, Y) -> np.ndarray:
        Y = np.asarray(Y, dtype=float)
        if Y.ndim != 2 or Y.shape[1] != self.n_coordinates:
            raise CompositionError(
                f"expected coordinates of shape (n, {self.n_coordinates}), got {Y.shape}"
            )
        if not np.all(np.isfinite(Y)):
            raise CompositionError("coordinates hold NaN or inf; pass complete rows only")
        return Y

    # ---------------------------------------------------------- assignments
    def posteriors(self, Y) -> np.ndarray:
        """Posterior probabilities (n, K) of the groups, from coordinates (n, p)."""
        return np.asarray(self.estimator.predict_proba(self._checked(Y)), dtype=float)

    def predict(self, Y) -> np.ndarray:
        """Group code (0 .. K-1) of largest posterior for each row of coordinates."""
        return np.asarray(self.estimator.predict(self._checked(Y)), dtype=np.int64)

    def scores(self, Y) -> np.ndarray:
        """Discriminant functions (n, K): the group of the largest score is assigned.

        ``log(prior_k) + log density_k`` up to a constant common to the groups:
        linear, ``(m_k - c)' S^-1 (y - c) - (m_k - c)' S^-1 (m_k - c) / 2 + log p_k``
        with ``S`` the pooled within-group covariance (divisor n - K) and ``c``
        the prior-weighted mean (scikit-learn's ``decision_function``; with two
        groups it gives the difference only, so the first score is 0 there);
        quadratic, ``-log|S_k| / 2 - (y - m_k)' S_k^-1 (y - m_k) / 2 + log p_k``
        with each group's covariance (divisor n_k - 1). Equal scores, equal
        posteriors.
        """
        Y = self._checked(Y)
        est = self.estimator
        logp = np.log(self.priors)
        if self.kind == "linear":
            d = Y @ np.asarray(est.coef_, dtype=float).T + np.asarray(est.intercept_, dtype=float)
            return np.column_stack([np.zeros(len(d)), d[:, 0]]) if len(self.classes) == 2 else d
        out = np.empty((Y.shape[0], len(self.classes)))
        for k, (R, s) in enumerate(zip(est.rotations_, est.scalings_, strict=True)):
            z = (Y - est.means_[k]) @ R / np.sqrt(s)
            out[:, k] = -0.5 * np.log(s).sum() - 0.5 * np.sum(z * z, axis=1) + logp[k]
        return out

    # ------------------------------------------------------------- the plane
    def axis_coordinates(self, Y) -> np.ndarray:
        """Coordinates (n, n_axes) of rows on the discriminant axes (canonical variates)."""
        Y = self._checked(Y)
        return np.asarray(self.axes.transform(Y), dtype=float)[:, : self.n_axes] * self._signs

    def plane_coordinates(self, Y) -> np.ndarray:
        """(n, 2): the first two discriminant axes, or with two groups the single axis
        and the spread across it (:attr:`second_direction`)."""
        Z = self.axis_coordinates(Y)
        if self.second_direction is None:
            return Z[:, :2]
        centre = np.asarray(self.axes.xbar_, dtype=float)
        return np.column_stack([Z[:, 0], (self._checked(Y) - centre) @ self.second_direction])

    @property
    def _signs(self) -> np.ndarray:
        """Orientation of each axis: its largest clr loading is positive."""
        raw = self.basis.T @ np.asarray(self.axes.scalings_, dtype=float)[:, : self.n_axes]
        big = raw[np.argmax(np.abs(raw), axis=0), np.arange(raw.shape[1])]
        return np.where(big < 0, -1.0, 1.0)

    @property
    def clr_loadings(self) -> np.ndarray:
        """Discriminant directions as clr loadings (D, n_axes), unit length, each summing to 0.

        Column j gives the log-contrast ``sum_i l_i ln x_i`` that the j-th
        axis measures (up to a shift and scale); its largest entry is positive.
        """
        raw = self.basis.T @ np.asarray(self.axes.scalings_, dtype=float)[:, : self.n_axes]
        raw = raw / np.linalg.norm(raw, axis=0)
        return raw * self._signs

    @property
    def explained_ratio(self) -> np.ndarray:
        """Share of the between-group variation along each axis (LDA eigenvalues)."""
        return np.asarray(self.axes.explained_variance_ratio_, dtype=float)[: self.n_axes]

    def top_parts(self, axis: int = 0, count: int = 3) -> tuple[list[str], list[str]]:
        """The parts with the largest positive and negative clr loadings on an axis."""
        if not 0 <= axis < self.n_axes:
            raise CompositionError(f"axis {axis} does not exist; this fit has {self.n_axes}")
        load = self.clr_loadings[:, axis]
        order = np.argsort(load)
        positive = [self.parts[i] for i in order[::-1][:count] if load[i] > 0]
        negative = [self.parts[i] for i in order[:count] if load[i] < 0]
        return positive, negative


def stratified_rows(codes, max_rows: int | None, seed: int = 0, minimum: int = 1) -> np.ndarray:
    """Positions of at most ``max_rows`` rows, each group keeping its share (seeded).

    Rows with code ``-1`` are never chosen. Group k keeps
    ``max(minimum, floor(max_rows * n_k / N))`` of its ``n_k`` rows (all of them
    when that is more), drawn with ``numpy.random.default_rng(seed)``; with
    ``max_rows`` None or at least N, every coded row. Sorted positions.
    """
    codes = np.asarray(codes)
    usable = np.flatnonzero(codes >= 0)
    if max_rows is None or usable.size <= max_rows:
        return usable
    rng = np.random.default_rng(seed)
    chosen = []
    groups, counts = np.unique(codes[usable], return_counts=True)
    for g, n_g in zip(groups, counts, strict=True):
        rows = usable[codes[usable] == g]
        keep = min(n_g, max(int(minimum), int(max_rows * n_g // usable.size)))
        chosen.append(rows if keep >= n_g else rng.choice(rows, keep, replace=False))
    return np.sort(np.concatenate(chosen))


def _group_codes(groups, n: int, classes: Sequence[str] | None) -> tuple[np.ndarray, list[str]]:
    """A code per row (-1: no label, or a label not among ``classes``) and the group names."""
    if isinstance(groups, (pd.Categorical, pd.Series)) and isinstance(
        getattr(groups, "dtype", None), pd.CategoricalDtype
    ):
        return _categorical_codes(pd.Categorical(groups), n, classes)
    labels = pd.Series(np.asarray(groups, dtype=object))
    if labels.size != n:
        raise CompositionError(f"{labels.size} group labels for {n} rows")
    text = labels.astype(str).where(labels.notna(), None)
    names = None if classes is None else [str(c) for c in classes]
    if names is not None:
        text = text.where(text.isin(names), None)
    cat = pd.Categorical(text.to_numpy(dtype=object), categories=names)
    return cat.codes.astype(np.int64), [str(c) for c in cat.categories]


def _categorical_codes(
    cat: pd.Categorical, n: int, classes: Sequence[str] | None
) -> tuple[np.ndarray, list[str]]:
    """:func:`_group_codes` of categorical labels, by category instead of row by row.

    The same codes and names as the general route: each category is read as text,
    rows of a category not in ``classes`` (or without one) get -1, and without
    ``classes`` the names are the categories in use, sorted.
    """
    if len(cat) != n:
        raise CompositionError(f"{len(cat)} group labels for {n} rows")
    text = [str(c) for c in cat.categories]
    codes = np.asarray(cat.codes, dtype=np.int64)
    if classes is None:
        used = np.unique(codes[codes >= 0])
        names = sorted({text[k] for k in used})
    else:
        names = [str(c) for c in classes]
    position = {name: k for k, name in enumerate(names)}
    remap = np.array([position.get(c, -1) for c in text] + [-1], dtype=np.int64)
    return remap[codes], names  # code -1 (no label) reads the last entry: -1


def group_shares(groups, classes: Sequence[str] | None = None) -> dict[str, float]:
    """Each group's share of the rows that have a group (weights for ``priors``).

    Parameters
    ----------
    groups : array-like of shape (n,)
        A group label per row (None / NaN: no group); a pandas Categorical is read
        by its codes.
    classes : sequence of str, optional
        The groups to count (default: the labels, sorted); rows of other labels
        are not counted.

    Returns
    -------
    dict
        Group name -> share (the shares sum to 1; groups without rows are left out).

    >>> group_shares(["a", "b", "a", None])
    {'a': 0.666..., 'b': 0.333...}
    """
    codes, names = _group_codes(groups, len(groups), classes)
    counts = np.bincount(codes[codes >= 0], minlength=len(names))
    total = counts.sum()
    if total == 0:
        raise CompositionError("group_shares: no row has a group")
    return {name: float(c / total) for name, c in zip(names, counts, strict=True) if c > 0}


def fit_discriminant(
    X,
    groups,
    *,
    kind: str = "linear",
    priors: str | Mapping[str, float] = "proportional",
    basis=None,
    classes: Sequence[str] | None = None,
    min_group_rows: int | None = None,
    max_rows: int | None = None,
    seed: int = 0,
) -> DiscriminantFit:
    """Fit a linear or quadratic discriminant rule on the ilr coordinates of compositions.

    Parameters
    ----------
    X : array-like or DataFrame of shape (n, D)
        Strictly positive compositions (closure not needed).
    groups : array-like of shape (n,)
        A group label per row; rows without one (None, NaN) take no part.
    kind : {"linear", "quadratic"}, default "linear"
    priors : {"proportional", "equal"} or mapping, default "proportional"
        Prior probabilities: each group's share of the rows given (of the
        groups fitted), ``1 / K`` each, or a weight per group name (positive
        for every group fitted; scaled to sum to 1 over them), e.g. the
        shares of another set of rows (:func:`group_shares`).
    basis : array-like of shape (D-1, D), optional
        Orthonormal contrasts of the ilr coordinates (default: the pivot
        basis); the assignments do not depend on it.
    classes : sequence of str, optional
        The groups, in the order of their codes (default: the labels, sorted).
        Rows whose label is not listed take no part.
    min_group_rows : int, optional
        Groups with fewer rows are left out (named in ``left_out``); default
        :func:`default_min_group_rows` with 5 folds.
    max_rows : int, optional
        Fit on at most this many rows, a stratified sample
        (:func:`stratified_rows`, ``seed``); priors still use every row.
    seed : int, default 0

    Returns
    -------
    DiscriminantFit

    Raises
    ------
    CompositionError
        Non-positive parts, fewer than two groups large enough, or a singular
        within-group covariance (e.g. two parts in constant proportion).
    """
    from sklearn.discriminant_analysis import (  # only here: core stays light to import
        LinearDiscriminantAnalysis,
        QuadraticDiscriminantAnalysis,
    )

    _check_kind(kind)
    if not isinstance(priors, Mapping) and priors not in PRIORS:
        raise CompositionError(
            f"unknown priors {priors!r}; use 'proportional', 'equal' or a weight per group"
        )
    t = as_table(X, min_parts=2, copy=False)  # only read here
    require_positive(t)
    n, D = t.values.shape
    V = default_basis(D) if basis is None else check_basis(basis, D)
    codes, names = _group_codes(groups, n, classes)
    p = D - 1
    minimum = default_min_group_rows(kind, p) if min_group_rows is None else int(min_group_rows)
    counts = np.bincount(codes[codes >= 0], minlength=len(names))
    small = {names[k]: int(c) for k, c in enumerate(counts) if 0 < c < minimum}
    kept = [k for k, c in enumerate(counts) if c >= minimum]
    if len(kept) < 2:
        raise CompositionError(
            f"a discriminant needs at least two groups of {minimum} rows or more; "
            + (f"groups: {_counts_text(names, counts)}" if names else "no group labels given")
        )
    remap = np.full(len(names), -1, dtype=np.int64)
    remap[kept] = np.arange(len(kept))
    fitted_codes = np.where(codes >= 0, remap[np.maximum(codes, 0)], -1)
    fitted_names = [names[k] for k in kept]
    available = counts[kept]
    if isinstance(priors, Mapping):
        weights = np.array([float(priors.get(name, 0.0)) for name in fitted_names])
        bad = [n for n, w in zip(fitted_names, weights, strict=True) if not w > 0]
        if bad or not np.all(np.isfinite(weights)):
            raise CompositionError(
                f"priors: no positive finite weight for group(s) {_listing(bad)}; every group "
                f"fitted needs one (groups: {_listing(fitted_names)})"
            )
        prior = weights / weights.sum()
    elif priors == "proportional":
        prior = available / available.sum()
    else:
        prior = np.full(len(kept), 1 / len(kept))
    rows = stratified_rows(fitted_codes, max_rows, seed, minimum)
    # clr of the fitted rows only (not of every row), laid out as a copy of the input
    # would be (a frame's values column-major, an array's as they are): each row's mean is
    # then summed in the same order, so the coordinates equal those of the clr of all
    # rows selected afterwards (a row selection is in C order)
    fortran = isinstance(X, pd.DataFrame) or (
        t.values.flags.f_contiguous and not t.values.flags.c_contiguous
    )
    fitted = np.asarray(t.values[rows], order="F" if fortran else "C")
    Y = np.ascontiguousarray(clr_values(Table(fitted, None, None, False, t.name))) @ V.T
    y = fitted_codes[rows]
    # the SVD solver: pooled within-group covariance with divisor n - K, rank-safe
    lda = LinearDiscriminantAnalysis(solver="svd", priors=prior)
    try:
        lda.fit(Y, y)
        if kind == "quadratic":
            # tol=0: scikit-learn's default refuses a group whose covariance has an
            # eigenvalue below 1e-4 in absolute terms (a tight but regular group of
            # compositions); _fit_quadratic checks singularity relative to the largest
            estimator = QuadraticDiscriminantAnalysis(priors=prior, store_covariance=True, tol=0.0)
            _fit_quadratic(estimator, Y, y, fitted_names)
        else:
            estimator = lda
    except (np.linalg.LinAlgError, ValueError) as err:
        raise CompositionError(
            f"the within-group covariance of the ilr coordinates is singular ({err}); "
            "two active parts may be in constant proportion, or a part constant, within "
            "the groups: leave one of them out"
        ) from None
    return DiscriminantFit(
        second_direction=_second_direction(lda, Y, V) if len(kept) == 2 and p > 1 else None,
        kind=kind,
        classes=fitted_names,
        parts=t.part_names(),
        basis=V,
        estimator=estimator,
        axes=lda,
        priors=np.asarray(prior, dtype=float),
        n_train=np.bincount(y, minlength=len(kept)),
        n_available=np.asarray(available),
        fit_rows=rows,
        left_out=small,
        min_group_rows=minimum,
    )


def _second_direction(lda, Y: np.ndarray, V: np.ndarray) -> np.ndarray:
    """Unit direction of largest spread of ``Y`` orthogonal to the single LDA axis."""
    u = np.asarray(lda.scalings_, dtype=float)[:, 0]
    u = u / np.linalg.norm(u)
    R = Y - Y.mean(axis=0)
    R = R - np.outer(R @ u, u)
    _, vecs = np.linalg.eigh(R.T @ R)
    v = vecs[:, -1]
    load = V.T @ v  # orientation: the largest clr loading positive
    return -v if load[np.argmax(np.abs(load))] < 0 else v


def _fit_quadratic(estimator, Y: np.ndarray, y: np.ndarray, names: list[str]) -> None:
    """Fit QDA; a group whose covariance is singular raises, naming the group."""
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # collinearity is checked below, by group
        estimator.fit(Y, y)
    for k, s in enumerate(estimator.scalings_):
        s = np.asarray(s, dtype=float)
        if s.size < Y.shape[1] or not np.all(s > 1e-12 * max(float(s.max()), 1e-300)):
            raise ValueError(f"group {names[k]!r} has a singular covariance")


def _counts_text(names, counts) -> str:
    items = [f"{name!r} ({int(c)})" for name, c in zip(names, counts, strict=True)]
    more = f" and {len(items) - MAX_LISTED} more" if len(items) > MAX_LISTED else ""
    return ", ".join(items[:MAX_LISTED]) + more


# ------------------------------------------------------------------ cross-validation


@dataclass(frozen=True, eq=False)
class CrossValidation:
    """Assignments of rows by rules fitted without them (stratified k-fold).

    Attributes
    ----------
    rows : ndarray of int
        Positions (among the rows given) of the rows cross-validated, sorted.
    true : ndarray of int
        Their group codes (0 .. K-1 of the fit's classes).
    predicted : ndarray of int
        The code each was assigned to by the rule fitted on the other folds.
    confusion : ndarray of int, shape (K, K)
        ``confusion[i, j]``: rows of group i assigned to group j.
    n_splits, seed : int
        The folds: ``StratifiedKFold(n_splits, shuffle=True, random_state=seed)``.
    """

    rows: np.ndarray
    true: np.ndarray
    predicted: np.ndarray
    confusion: np.ndarray
    n_splits: int
    seed: int

    @property
    def accuracy(self) -> float:
        """Share of the rows assigned to their own group."""
        return float(np.trace(self.confusion) / max(1, self.confusion.sum()))

    def cell_rows(self, true: int, predicted: int) -> np.ndarray:
        """Positions of the rows of group ``true`` assigned to group ``predicted``."""
        return self.rows[(self.true == true) & (self.predicted == predicted)]


def cross_validate(
    fit: DiscriminantFit,
    Y,
    codes,
    n_splits: int = 5,
    seed: int = 0,
    max_rows: int | None = None,
) -> CrossValidation:
    """Cross-validated assignments with the settings of ``fit`` (``cross_val_predict``).

    Parameters
    ----------
    fit : DiscriminantFit
        Its estimator's settings (kind, priors) are cloned for each fold.
    Y : array-like of shape (n, p)
        Coordinates in the fit's basis (:meth:`DiscriminantFit.coordinates`).
    codes : int array of shape (n,)
        Codes of ``fit.classes`` (0 .. K-1); ``-1`` rows take no part.
    n_splits : int, default 5
    seed : int, default 0
        Seed of the shuffled folds, and of the sample when ``max_rows`` applies.
    max_rows : int, optional
        Cross-validate a stratified sample of at most this many rows.
    """
    from sklearn.base import clone
    from sklearn.metrics import confusion_matrix
    from sklearn.model_selection import StratifiedKFold, cross_val_predict

    Y = fit._checked(Y)
    codes = np.asarray(codes, dtype=np.int64)
    if codes.shape != (Y.shape[0],):
        raise CompositionError(f"{codes.size} codes for {Y.shape[0]} rows")
    K = len(fit.classes)
    if codes.max(initial=-1) >= K or codes.min(initial=-1) < -1:
        raise CompositionError(f"codes must lie in -1 .. {K - 1}")
    n_splits = int(n_splits)
    if n_splits < 2:
        raise CompositionError(f"cross-validation needs at least 2 folds, got {n_splits}")
    rows = stratified_rows(codes, max_rows, seed, n_splits)
    y = codes[rows]
    smallest = np.bincount(y, minlength=K).min()
    if smallest < n_splits:
        raise CompositionError(
            f"{n_splits}-fold cross-validation needs {n_splits} rows in every group; the "
            f"smallest has {int(smallest)}"
        )
    folds = StratifiedKFold(n_splits=n_splits, shuffle=True, random_state=seed)
    estimator = clone(fit.estimator)
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # a fold's collinearity: same rule as the fit
        predicted = cross_val_predict(estimator, Y[rows], y, cv=folds)
    confusion = confusion_matrix(y, predicted, labels=np.arange(K))
    return CrossValidation(
        rows=rows,
        true=y,
        predicted=np.asarray(predicted, dtype=np.int64),
        confusion=np.asarray(confusion, dtype=np.int64),
        n_splits=n_splits,
        seed=int(seed),
    )


# ------------------------------------------------------------- far from every group


def mcd_prediction_cutoff(n_fitted: int, n_coordinates: int, quantile: float) -> float:
    """Robust distance beyond which a *new* sample is far from a group's MCD fit.

    For a new observation from a p-variate normal population whose mean and
    covariance are estimated from ``n`` rows, the squared Mahalanobis distance
    follows ``(n - 1) p (n + 1) / (n (n - p)) F(p, n - p)`` (the prediction
    region; Johnson & Wichern, Applied Multivariate Statistical Analysis, 6th
    ed., ch. 5). The chi-square quantile treats the estimates as known and,
    for a robust (MCD) fit with few rows per coordinate, flags far more
    members of a group than ``1 - quantile``: about 8 % instead of 0.1 % at 500
    rows of 50 coordinates (seeded simulation, ``tests/test_discriminant.py``).
    The MCD's estimate rests on its subset of ``h = (n + p + 1) // 2`` rows
    (the default of :class:`sklearn.covariance.MinCovDet`); here ``n`` in the
    prediction formula is taken as that ``h``. This is an approximation in the
    spirit of Hardin & Rocke (2005, The distribution of robust distances,
    Journal of Computational and Graphical Statistics 14), who showed that
    MCD distances follow a scaled F law better than a chi-square one. Its
    false-far rate on new members of normal groups was measured by a seeded
    simulation (3 groups x 4,000 new samples each, quantile 0.999): 0.0005 to
    0.0014 at 500 rows of 5, 20 or 49 coordinates, 0.003 to 0.004 at 100 rows
    of 5 or 10 coordinates; ``tests/test_discriminant.py`` bounds it by five
    times ``1 - quantile``.

    Parameters
    ----------
    n_fitted : int
        Rows the MCD was fitted on (more than ``n_coordinates``).
    n_coordinates : int
        p, the number of ilr coordinates (parts - 1).
    quantile : float
        In (0, 1).

    Returns
    -------
    float
        The cut-off on the (not squared) robust distance.

    Examples
    --------
    >>> round(mcd_prediction_cutoff(500, 4, 0.999), 2)  # chi-square: 4.30
    4.4
    """
    from scipy import stats

    n, p = int(n_fitted), int(n_coordinates)
    if not 0 < quantile < 1:
        raise CompositionError(f"the quantile must lie in (0, 1), got {quantile!r}")
    if p < 1 or n <= p:
        raise CompositionError(
            f"a robust cut-off needs more fitted rows than coordinates, got {n} rows "
            f"for {p} coordinates"
        )
    h = (n + p + 1) // 2  # > p since n > p
    scale = (h - 1) * p * (h + 1) / (h * (h - p))
    return float(np.sqrt(scale * stats.f.ppf(quantile, p, h - p)))


@dataclass(frozen=True, eq=False)
class GroupDistances:
    """Robust (MCD) centre and scatter of each training group, for new samples.

    A sample is *far from every group* when its robust Mahalanobis distance to
    each group exceeds that group's cut-off (:func:`mcd_prediction_cutoff` of
    the rows its MCD was fitted on): a new member of a normal group is beyond
    it with probability close to ``1 - quantile``. Groups whose MCD could not
    be fitted are in ``skipped`` and take no part.

    Attributes
    ----------
    classes : list of str
    locations : dict of int -> ndarray (p,)
    precisions : dict of int -> ndarray (p, p)
        Inverse robust covariances, by group code.
    cutoffs : dict of int -> float
        Distance cut-off of each fitted group, by group code.
    quantile : float
    skipped : dict of str -> str
        Group name -> why it has no robust fit.
    fitted_rows : dict of int -> int
        Rows each group's MCD was fitted on.
    """

    classes: list[str]
    locations: dict
    precisions: dict
    cutoffs: dict
    quantile: float
    skipped: dict
    fitted_rows: dict

    def distances(self, Y) -> np.ndarray:
        """Robust distances (n, K) to each group (NaN for skipped groups)."""
        Y = np.asarray(Y, dtype=float)
        out = np.full((Y.shape[0], len(self.classes)), np.nan)
        for k, m in self.locations.items():
            d = Y - m
            out[:, k] = np.sqrt(np.maximum(np.einsum("ij,jk,ik->i", d, self.precisions[k], d), 0))
        return out

    def cutoff_row(self) -> np.ndarray:
        """Cut-offs (K,) in the order of ``classes`` (NaN for skipped groups)."""
        out = np.full(len(self.classes), np.nan)
        for k, c in self.cutoffs.items():
            out[k] = c
        return out

    def far(self, Y, distances: np.ndarray | None = None) -> np.ndarray:
        """True where the distance to every group with a robust fit exceeds its cut-off.

        ``distances``: :meth:`distances` of ``Y`` when already computed.
        """
        d = self.distances(Y) if distances is None else np.asarray(distances, dtype=float)
        if not self.locations:
            return np.zeros(len(d), bool)
        fitted = sorted(self.locations)
        return (d[:, fitted] > self.cutoff_row()[fitted]).all(axis=1)


def fit_group_distances(
    fit: DiscriminantFit,
    Y,
    codes,
    quantile: float = DEFAULT_FAR_QUANTILE,
    max_rows_per_group: int | None = 500,
    seed: int = 0,
) -> GroupDistances:
    """Robust centre and scatter of each group of ``fit`` from its rows (coordinates ``Y``).

    Uses :func:`compwidgets.core.outliers.robust_distances` (FAST-MCD) on each
    group's rows; ``max_rows_per_group`` bounds the rows each MCD is fitted on
    (a seeded random subset) since its cost grows quickly with rows and
    coordinates (about 1 s per group of 500 rows at 50 coordinates here;
    ``benchmarks/bench_discriminant.py``). Each group's cut-off is
    :func:`mcd_prediction_cutoff` of its fitted rows.
    """
    Y = fit._checked(Y)
    codes = np.asarray(codes, dtype=np.int64)
    p = Y.shape[1]
    locations, precisions, cutoffs, skipped, fitted = {}, {}, {}, {}, {}
    for k, name in enumerate(fit.classes):
        rows = np.flatnonzero(codes == k)
        try:
            result = robust_distances(
                Y[rows],
                quantile=quantile,
                random_state=seed,
                max_fit_rows=max_rows_per_group
                if max_rows_per_group is not None and rows.size > max_rows_per_group
                else None,
            )
        except CompositionError as err:
            skipped[name] = str(err).replace("robust_distances: ", "")
            continue
        locations[k] = result.location
        precisions[k] = np.linalg.inv(result.covariance)
        fitted[k] = int(result.fitted.sum())
        cutoffs[k] = mcd_prediction_cutoff(fitted[k], p, quantile)
    return GroupDistances(
        classes=list(fit.classes),
        locations=locations,
        precisions=precisions,
        cutoffs=cutoffs,
        quantile=float(quantile),
        skipped=skipped,
        fitted_rows=fitted,
    )


# ------------------------------------------------------------------- boundaries


@dataclass(frozen=True, eq=False)
class Boundary:
    """A piece of the decision boundary between two groups of a 3-part rule.

    Attributes
    ----------
    groups : (str, str)
        The two groups with equal (and largest) discriminant scores along it.
    codes : (int, int)
    ilr : ndarray of shape (m, 2)
        The points in the fit's ilr coordinates.
    curve : ndarray of shape (m, 3)
        The same points as closed compositions.
    """

    groups: tuple[str, str]
    codes: tuple[int, int]
    ilr: np.ndarray
    curve: np.ndarray


def _pair_quadratic(fit: DiscriminantFit, k: int, l: int):
    """(A, b, c) with ``score_k - score_l = y'Ay + b'y + c`` (see :meth:`scores`)."""
    est = fit.estimator
    logp = np.log(fit.priors)
    if fit.kind == "linear":
        coef = np.asarray(est.coef_, dtype=float)
        intercept = np.asarray(est.intercept_, dtype=float)
        if len(fit.classes) == 2:  # scikit-learn keeps score_1 - score_0 only
            coef = np.vstack([np.zeros_like(coef[0]), coef[0]])
            intercept = np.array([0.0, intercept[0]])
        return np.zeros((2, 2)), coef[k] - coef[l], float(intercept[k] - intercept[l])
    parts = []
    for g in (k, l):
        R, s = np.asarray(est.rotations_[g]), np.asarray(est.scalings_[g])
        P = (R / s) @ R.T
        m = np.asarray(est.means_[g])
        parts.append((P, m, np.log(s).sum()))
    (Pk, mk, ldk), (Pl, ml, ldl) = parts
    A = -0.5 * (Pk - Pl)
    b = Pk @ mk - Pl @ ml
    c = -0.5 * (mk @ Pk @ mk - ml @ Pl @ ml) - 0.5 * (ldk - ldl) + logp[k] - logp[l]
    return 0.5 * (A + A.T), b, float(c)


def _conic_pieces(A, b, c, radius: float, n: int) -> list[np.ndarray]:
    """Approximate points (m, 2) of ``y'Ay + b'y + c = 0`` within ``|y| <= radius``, by piece.

    The conic is put in its principal axes and sampled from its parametric
    form (line, parabola, parallel lines, ellipse, hyperbola or crossing
    lines); the points are then made exact by :func:`_project`.
    """
    lam, Q = np.linalg.eigh(A)
    beta = Q.T @ b
    size = max(float(np.abs(lam).max()) * radius**2, float(np.linalg.norm(b)) * radius, abs(c))
    if size == 0:
        return []
    zero = np.abs(lam) * radius**2 <= 1e-9 * size
    t = np.linspace(-1.0, 1.0, n)
    pieces: list[np.ndarray] = []
    if zero.all():  # a line
        nb = float(np.linalg.norm(b))
        if nb * radius <= 1e-12 * size:
            return []
        y0 = -c * b / nb**2
        d = np.array([-b[1], b[0]]) / nb
        half = np.sqrt(max(radius**2 - y0 @ y0, 0.0))
        if half == 0:
            return []
        return [y0 + np.outer(t * half, d)]
    if zero.any():  # one principal curvature vanishes
        i, j = (0, 1) if not zero[0] else (1, 0)
        h = beta[i] / (2 * lam[i])
        c2 = c - beta[i] ** 2 / (4 * lam[i])
        if abs(beta[j]) * radius > 1e-9 * size:  # parabola: z_j from z_i
            zi = t * radius * 2
            zj = -(lam[i] * (zi + h) ** 2 + c2) / beta[j]
            z = np.zeros((n, 2))
            z[:, i], z[:, j] = zi, zj
            pieces.append(z)
        elif -c2 / lam[i] > 0:  # two parallel lines
            for sign in (-1.0, 1.0):
                z = np.zeros((n, 2))
                z[:, i] = -h + sign * np.sqrt(-c2 / lam[i])
                z[:, j] = t * radius * 2
                pieces.append(z)
        return [z @ Q.T for z in pieces]
    centre = -beta / (2 * lam)
    r = float(np.sum(beta**2 / (4 * lam)) - c)
    reach = radius + float(np.linalg.norm(centre))
    if lam[0] * lam[1] > 0:  # ellipse (or nothing)
        if r / lam[0] <= 0:
            return []
        theta = np.linspace(0.0, 2.0 * np.pi, 2 * n)
        u = np.column_stack(
            [np.sqrt(r / lam[0]) * np.cos(theta), np.sqrt(r / lam[1]) * np.sin(theta)]
        )
        return [(u + centre) @ Q.T]
    if abs(r) <= 1e-12 * size:  # two crossing lines through the centre
        slope = np.sqrt(-lam[0] / lam[1])
        for sign in (-1.0, 1.0):
            u1 = t * reach
            pieces.append(np.column_stack([u1, sign * slope * u1]))
    else:  # hyperbola: two branches, along the axis where r / lambda > 0
        a = 0 if r / lam[0] > 0 else 1
        o = 1 - a
        for sign in (-1.0, 1.0):
            uo = t * reach
            ua = sign * np.sqrt((r - lam[o] * uo**2) / lam[a])
            u = np.zeros((n, 2))
            u[:, a], u[:, o] = ua, uo
            pieces.append(u)
    return [(u + centre) @ Q.T for u in pieces]


def _project(Yp: np.ndarray, A, b, c) -> np.ndarray:
    """Move points onto ``y'Ay + b'y + c = 0`` along the gradient (exact root of a quadratic)."""
    f = np.einsum("ij,jk,ik->i", Yp, A, Yp) + Yp @ b + c
    g = 2 * Yp @ A + b
    # f(y + s g) = f + s g.g + s^2 g'Ag: the root of smallest |s|
    qa = np.einsum("ij,jk,ik->i", g, A, g)
    qb = np.einsum("ij,ij->i", g, g)
    with np.errstate(divide="ignore", invalid="ignore"):
        disc = np.sqrt(np.maximum(qb * qb - 4 * qa * f, 0.0))
        # numerically stable root: 2f / (-qb - sign(qb) disc) -> the one nearer 0
        s = np.where(np.abs(qa) * np.abs(f) <= 1e-14 * qb * qb, -f / qb, -2 * f / (qb + disc))
    s = np.where(np.isfinite(s), s, 0.0)
    return Yp + s[:, None] * g


def decision_boundaries(
    fit: DiscriminantFit, min_share: float = 1e-3, n_points: int = 200
) -> list[Boundary]:
    """The decision boundaries of a rule on 3 parts, as compositional curves.

    Each piece is where two groups have equal discriminant scores
    (:meth:`DiscriminantFit.scores`) that no third group exceeds: straight
    lines in ilr coordinates for the linear rule, conics for the quadratic
    one. Pieces end where a third group takes over (found by bisection) or
    where a part falls below ``min_share`` of the composition (near the
    triangle's edges).

    Parameters
    ----------
    fit : DiscriminantFit
        A rule fitted on 3 parts (2 coordinates).
    min_share : float, default 1e-3
        The curves stop where a part's share falls below it.
    n_points : int, default 200
        Points per piece.

    Returns
    -------
    list of Boundary
    """
    from .transforms import ilr_inv

    if fit.n_coordinates != 2:
        raise CompositionError(
            f"decision boundaries are drawn for rules on 3 parts; this one has {len(fit.parts)}"
        )
    if not 0.0 < float(min_share) < 1.0 / 3.0:
        raise CompositionError(f"min_share must be in (0, 1/3), got {min_share!r}")
    radius = 1.05 * float(np.log(1.0 / min_share)) + 1.0  # every part >= min_share lies within
    K = len(fit.classes)
    out: list[Boundary] = []

    def closed(Yp):
        return np.asarray(ilr_inv(Yp, fit.basis), dtype=float)

    for k in range(K):
        for l in range(k + 1, K):
            A, b, c = _pair_quadratic(fit, k, l)

            def valid(Yp, k=k, l=l):
                S = fit.scores(Yp)
                others = np.delete(S, [k, l], axis=1)
                top = np.minimum(S[:, k], S[:, l])
                beaten = (others > top[:, None]).any(axis=1) if others.size else False
                return ~beaten & (closed(Yp).min(axis=1) >= min_share)

            for piece in _conic_pieces(A, b, c, radius, 4 * n_points):
                Yp = _project(piece, A, b, c)
                ok = valid(Yp)
                for lo, hi in _runs(ok):
                    out.append(
                        _refined_piece(piece, lo, hi, A, b, c, valid, n_points, closed, fit, k, l)
                    )
    return out


def _runs(ok: np.ndarray) -> list[tuple[int, int]]:
    """(first, last) indices of the runs of True."""
    edges = np.diff(np.concatenate([[0], ok.astype(np.int8), [0]]))
    return list(zip(np.flatnonzero(edges == 1), np.flatnonzero(edges == -1) - 1, strict=True))


def _refined_piece(piece, lo, hi, A, b, c, valid, n_points, closed, fit, k, l) -> Boundary:
    """Resample a run of a piece with ``n_points`` and find its ends by bisection."""

    def at(s):
        """Points of the piece at fractional sample positions ``s`` (linear in between)."""
        s = np.clip(np.asarray(s, dtype=float), 0, len(piece) - 1)
        i = np.minimum(np.floor(s).astype(int), len(piece) - 2)
        w = (s - i)[:, None]
        return _project(piece[i] * (1 - w) + piece[i + 1] * w, A, b, c)

    ends = []
    for inside, outside in ((lo, lo - 1), (hi, hi + 1)):
        if outside < 0 or outside >= len(piece):
            ends.append(float(inside))
            continue
        a, z = float(inside), float(outside)
        for _ in range(40):
            mid = 0.5 * (a + z)
            if valid(at([mid]))[0]:
                a = mid
            else:
                z = mid
        ends.append(a)
    Yp = at(np.linspace(ends[0], ends[1], n_points))
    return Boundary(
        groups=(fit.classes[k], fit.classes[l]), codes=(k, l), ilr=Yp, curve=closed(Yp)
    )
