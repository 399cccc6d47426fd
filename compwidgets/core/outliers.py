"""Robust outlier screening of compositions in ilr coordinates.

A row is an outlier candidate when its robust Mahalanobis distance in ilr
coordinates exceeds a chi-square cut-off (Filzmoser, P. & Hron, K. (2008)
Outlier detection for compositional data using robust methods, Mathematical
Geosciences 40). Location and scatter come from the minimum covariance
determinant estimator (Rousseeuw & Van Driessen 1999, the FAST-MCD algorithm
of :class:`sklearn.covariance.MinCovDet`). The MCD is affine equivariant, so
the distances do not depend on the choice of orthonormal ilr basis.

The cut-off is a statistical screening rule, not a verdict: a distant row may
be a valid, rare sample. Decisions (e.g. a contamination call) follow
accredited laboratory practice and local regulations.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy import stats

from ._arrays import MAX_LISTED, CompositionError, as_table, require_positive
from .transforms import check_basis, clr_values, default_basis

#: Default chi-square quantile of the cut-off (Filzmoser & Hron 2008).
DEFAULT_QUANTILE = 0.975

__all__ = [
    "DEFAULT_QUANTILE",
    "RobustDistances",
    "chi2_cutoff",
    "compositional_outliers",
    "robust_distances",
    "robust_distances_by_group",
]


@dataclass(frozen=True, eq=False)
class RobustDistances:
    """Robust Mahalanobis distances of the rows of one data set.

    Attributes
    ----------
    distances : ndarray of shape (n,)
        Robust Mahalanobis distance of each row (not squared).
    cutoff : float
        Distance above which a row is an outlier candidate.
    quantile : float or None
        Chi-square quantile that gave ``cutoff`` (None when set directly).
    outliers : ndarray of bool, shape (n,)
        ``distances > cutoff``.
    location : ndarray of shape (p,)
        Robust (reweighted MCD) centre in the coordinates used.
    covariance : ndarray of shape (p, p)
        Robust (reweighted MCD) covariance in the coordinates used.
    support : ndarray of bool, shape (n,)
        Rows used for the final (reweighted) estimate.
    fitted : ndarray of bool, shape (n,)
        Rows the MCD was fitted on (all, unless ``max_fit_rows`` was smaller than n).
    index : pandas.Index or None
        Row labels when the input was a DataFrame.
    """

    distances: np.ndarray
    cutoff: float
    quantile: float | None
    outliers: np.ndarray
    location: np.ndarray
    covariance: np.ndarray
    support: np.ndarray
    fitted: np.ndarray
    index: pd.Index | None = None

    @property
    def n_outliers(self) -> int:
        return int(self.outliers.sum())

    def to_frame(self) -> pd.DataFrame:
        """``distance`` and ``outlier`` per row (original index when known)."""
        return pd.DataFrame(
            {"distance": self.distances, "outlier": self.outliers},
            index=self.index.copy() if self.index is not None else None,
        )


def chi2_cutoff(n_coordinates: int, quantile: float = DEFAULT_QUANTILE) -> float:
    """Distance cut-off ``sqrt(chi2.ppf(quantile, n_coordinates))``.

    Squared Mahalanobis distances of p-variate normal data follow a
    chi-square law with p degrees of freedom; for D parts p = D - 1.
    """
    q = _check_quantile(quantile)
    if int(n_coordinates) != n_coordinates or n_coordinates < 1:
        raise CompositionError(
            f"chi2_cutoff: the number of coordinates must be a positive integer, "
            f"got {n_coordinates!r}"
        )
    return float(np.sqrt(stats.chi2.ppf(q, int(n_coordinates))))


def _check_quantile(quantile) -> float:
    try:
        q = float(quantile)
    except (TypeError, ValueError):
        raise CompositionError(f"quantile must be a number in (0, 1), got {quantile!r}") from None
    if not 0.0 < q < 1.0:
        raise CompositionError(f"quantile must be in (0, 1), got {quantile!r}")
    return q


def _check_cutoff(cutoff) -> float:
    try:
        c = float(cutoff)
    except (TypeError, ValueError):
        raise CompositionError(f"cutoff must be a positive number, got {cutoff!r}") from None
    if not (np.isfinite(c) and c > 0):
        raise CompositionError(f"cutoff must be a positive finite distance, got {cutoff!r}")
    return c


def robust_distances(
    Y,
    quantile: float = DEFAULT_QUANTILE,
    cutoff: float | None = None,
    support_fraction: float | None = None,
    random_state: int | None = 0,
    max_fit_rows: int | None = None,
) -> RobustDistances:
    """Robust (MCD) Mahalanobis distances of real coordinates, e.g. ilr coordinates.

    Parameters
    ----------
    Y : array-like or DataFrame of shape (n, p)
        Coordinates in real space (no NaN). ilr coordinates of D parts have p = D - 1.
    quantile : float, default 0.975
        Chi-square quantile of the cut-off, ``sqrt(chi2.ppf(quantile, p))``.
    cutoff : float, optional
        A distance cut-off to use instead of the quantile.
    support_fraction : float, optional
        Share of rows in the MCD support, passed to
        :class:`sklearn.covariance.MinCovDet` (default ``(n + p + 1) / (2 n)``).
    random_state : int or None, default 0
        Seed of the FAST-MCD random subsets (fixed by default, so results repeat).
    max_fit_rows : int, optional
        Fit the MCD on at most this many rows (for large tables; the fit time
        grows with n): the rows
        ``numpy.random.default_rng(random_state).choice(n, max_fit_rows, replace=False)``,
        sorted. Distances are then computed for every row. Default: all rows.

    Returns
    -------
    RobustDistances

    Raises
    ------
    CompositionError
        Non-finite coordinates (rows named), too few rows, or a robust
        covariance that is singular.
    """
    from sklearn.covariance import MinCovDet  # only here: core stays light to import

    t = as_table(Y, "Y")
    values = t.values
    bad = ~np.isfinite(values).all(axis=1)
    if bad.any():
        rows = np.flatnonzero(bad)
        shown = ", ".join(repr(r) for r in t.row_labels(rows[:MAX_LISTED]))
        more = f" and {len(rows) - MAX_LISTED} more" if len(rows) > MAX_LISTED else ""
        raise CompositionError(
            f"robust_distances: rows {shown}{more} hold NaN or inf; pass complete rows only"
        )
    n, p = values.shape
    if n < p + 2:
        raise CompositionError(
            f"robust_distances: {n} rows for {p} coordinates; the minimum covariance "
            f"determinant needs at least {p + 2} rows (many more for a stable estimate)"
        )
    if support_fraction is not None and not 0.0 < float(support_fraction) <= 1.0:
        raise CompositionError(f"support_fraction must be in (0, 1], got {support_fraction!r}")
    fitted = np.ones(n, dtype=bool)
    if max_fit_rows is not None:
        if int(max_fit_rows) != max_fit_rows or max_fit_rows < p + 2:
            raise CompositionError(
                f"max_fit_rows must be an integer of at least {p + 2}, got {max_fit_rows!r}"
            )
        if n > max_fit_rows:
            chosen = np.random.default_rng(random_state).choice(
                n, int(max_fit_rows), replace=False
            )
            fitted = np.zeros(n, dtype=bool)
            fitted[chosen] = True
    if cutoff is None:
        q: float | None = _check_quantile(quantile)
        cut = chi2_cutoff(p, q)
    else:
        q, cut = None, _check_cutoff(cutoff)
    try:
        mcd = MinCovDet(support_fraction=support_fraction, random_state=random_state)
        mcd.fit(values[fitted])
    except ValueError as err:
        raise CompositionError(
            f"robust_distances: the MCD fit failed ({err}); the robust covariance is singular "
            "when more than half of the rows lie on a lower-dimensional set (e.g. repeated "
            "rows or a constant log-ratio)"
        ) from None
    cov = np.asarray(mcd.covariance_, dtype=float)
    eig = np.linalg.eigvalsh(cov)
    if not np.all(np.isfinite(eig)) or eig.min() <= 1e-12 * max(eig.max(), 1e-300):
        raise CompositionError(
            "robust_distances: the robust covariance is singular (more than half of the rows "
            "lie on a lower-dimensional set, e.g. repeated rows or a constant log-ratio)"
        )
    d2 = np.asarray(mcd.mahalanobis(values), dtype=float)
    d = np.sqrt(np.maximum(d2, 0.0))
    return RobustDistances(
        distances=d,
        cutoff=cut,
        quantile=q,
        outliers=d > cut,
        location=np.asarray(mcd.location_, dtype=float).copy(),
        covariance=cov.copy(),
        support=_spread(fitted, np.asarray(mcd.support_, dtype=bool)),
        fitted=fitted,
        index=t.index.copy() if t.index is not None else None,
    )


def _spread(fitted: np.ndarray, support: np.ndarray) -> np.ndarray:
    out = np.zeros(fitted.size, dtype=bool)
    out[np.flatnonzero(fitted)[support]] = True
    return out


def compositional_outliers(
    X,
    basis=None,
    quantile: float = DEFAULT_QUANTILE,
    cutoff: float | None = None,
    support_fraction: float | None = None,
    random_state: int | None = 0,
    max_fit_rows: int | None = None,
) -> RobustDistances:
    """Outlier candidates of compositions: robust distances of their ilr coordinates.

    Parameters
    ----------
    X : array-like or DataFrame of shape (n, D)
        Strictly positive compositions (closure is not needed: ilr is scale invariant).
    basis : array-like or DataFrame of shape (D-1, D), optional
        Orthonormal contrast basis of the ilr (default: the pivot basis); the
        distances do not depend on it. A DataFrame is matched to ``X``'s columns
        by label.
    quantile, cutoff, support_fraction, random_state, max_fit_rows
        See :func:`robust_distances`; the default cut-off is
        ``sqrt(chi2.ppf(0.975, D - 1))`` (Filzmoser & Hron 2008).

    Returns
    -------
    RobustDistances
        Distances in ilr space; ``location`` and ``covariance`` are in the
        coordinates of ``basis``.
    """
    t = as_table(X, min_parts=2)
    require_positive(t)
    D = t.values.shape[1]
    parts = t.part_names() if t.labelled else None
    V = default_basis(D) if basis is None else check_basis(basis, D, parts)
    coords = clr_values(t) @ V.T
    if t.index is not None:
        coords = pd.DataFrame(coords, index=t.index)
    return robust_distances(
        coords,
        quantile=quantile,
        cutoff=cutoff,
        support_fraction=support_fraction,
        random_state=random_state,
        max_fit_rows=max_fit_rows,
    )


def robust_distances_by_group(
    Y,
    groups,
    quantile: float = DEFAULT_QUANTILE,
    cutoff: float | None = None,
    support_fraction: float | None = None,
    random_state: int | None = 0,
    max_fit_rows: int | None = None,
) -> tuple[dict, dict]:
    """:func:`robust_distances` within each group of rows separately.

    Data mixing several populations (e.g. catchments on different bedrock)
    put whole groups far from one robust centre; screening each group on
    its own asks instead which rows are unusual *for their group*.

    Parameters
    ----------
    Y : array-like of shape (n, p)
        Coordinates (no NaN).
    groups : array-like of shape (n,)
        A group label per row; rows whose label is None or NaN are not screened.
    quantile, cutoff, support_fraction, random_state, max_fit_rows
        As for :func:`robust_distances`, applied to each group.

    Returns
    -------
    results : dict of label -> (row positions, RobustDistances)
        Groups that could be screened, in order of first appearance.
    skipped : dict of label -> str
        Groups that could not be screened, with the reason (e.g. too few rows).
    """
    t = as_table(Y, "Y")
    labels = pd.Series(np.asarray(groups, dtype=object))
    if labels.size != t.values.shape[0]:
        raise CompositionError(
            f"robust_distances_by_group: {labels.size} group labels for {t.values.shape[0]} rows"
        )
    usable = labels.notna().to_numpy()
    results: dict = {}
    skipped: dict = {}
    for label in pd.unique(labels[usable]):
        pos = np.flatnonzero(usable & (labels == label).to_numpy())
        try:
            results[label] = (
                pos,
                robust_distances(
                    t.values[pos],
                    quantile=quantile,
                    cutoff=cutoff,
                    support_fraction=support_fraction,
                    random_state=random_state,
                    max_fit_rows=max_fit_rows,
                ),
            )
        except CompositionError as err:
            skipped[label] = str(err).replace("robust_distances: ", "")
    return results, skipped
