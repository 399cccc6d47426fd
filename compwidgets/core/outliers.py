"""Robust outlier screening of compositions in ilr coordinates.

A row is an outlier candidate when its robust Mahalanobis distance in ilr
coordinates exceeds a chi-square cut-off (Filzmoser, P. & Hron, K. (2008)
Outlier detection for compositional data using robust methods, Mathematical
Geosciences 40). Location and scatter come from the minimum covariance
determinant estimator (Rousseeuw & Van Driessen 1999, the FAST-MCD algorithm
of :class:`sklearn.covariance.MinCovDet`). The MCD is affine equivariant, so
the distances do not depend on the choice of orthonormal ilr basis.

Bounded cost. The FAST-MCD fit costs about a second on 5,000 rows of 20
coordinates on one core, and grows with both. Two limits keep it bounded on
wide and long tables (both off by default here, on in the workbench's panel,
and always reported in the result):

* ``max_fit_rows``: the MCD is fitted on a seeded random sample of at most
  that many rows; distances are computed for every row.
* ``max_coordinates``: with more coordinates than that (e.g. 199 ilr
  coordinates of 200 parts), the coordinates are first reduced to their
  leading ``max_coordinates`` spherical principal components (the
  eigenvectors of the covariance of the rows projected on the unit sphere
  around their spatial median; Locantore et al. 1999, Robust principal
  component analysis for functional data, Test 8), and the MCD is fitted on
  those scores. Each row then has two distances, as in the outlier map of
  Hubert, Rousseeuw & Vanden Branden (2005, ROBPCA: a new approach to robust
  principal component analysis, Technometrics 47): its robust distance within
  the retained components (chi-square cut-off with ``max_coordinates``
  degrees of freedom) and its orthogonal distance to them (cut-off
  ``(m + s z_q) ** 1.5`` with ``m``, ``s`` the median and scaled MAD of the
  fitted rows' orthogonal distances to the power 2/3, after Hubert et al.).
  A row is a candidate when either distance is beyond its cut-off. Both
  distances are orthogonally equivariant, so they do not depend on the ilr
  basis either. The reduction is a screening device: the retained
  components carry the share of the robust spread said in ``explained``.

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
#: Rows the workbench fits the MCD on at most (a seeded random sample beyond).
DEFAULT_MAX_FIT_ROWS = 5000
#: Coordinates the workbench fits the MCD on at most (spherical principal components beyond).
DEFAULT_MAX_COORDINATES = 20
#: A group screened on its own is never sampled below this many rows.
MIN_GROUP_FIT_ROWS = 500

__all__ = [
    "DEFAULT_MAX_COORDINATES",
    "DEFAULT_MAX_FIT_ROWS",
    "DEFAULT_QUANTILE",
    "MIN_GROUP_FIT_ROWS",
    "RobustDistances",
    "chi2_cutoff",
    "compositional_outliers",
    "group_fit_rows",
    "robust_distances",
    "robust_distances_by_group",
    "spatial_median",
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
    n_input_coordinates : int or None
        Coordinates of the input (p); ``location.size`` when they were not reduced.
    directions : ndarray of shape (p, k) or None
        Orthonormal spherical principal directions the MCD was fitted in (None:
        the input coordinates themselves).
    centre : ndarray of shape (p,) or None
        Spatial median of the fitted rows (the origin of ``directions``).
    explained : float or None
        Share of the robust spread (sum of squared MADs of the scores on all p
        spherical principal directions) carried by the ``k`` retained ones.
    orthogonal : ndarray of shape (n,) or None
        Distance of each row to the retained directions (None when not reduced).
    orthogonal_cutoff : float or None
        Orthogonal distance beyond which a row is a candidate too.
    orthogonal_scale : (float, float) or None
        Median and scaled MAD of the fitted rows' ``orthogonal ** (2/3)``.
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
    n_input_coordinates: int | None = None
    directions: np.ndarray | None = None
    centre: np.ndarray | None = None
    explained: float | None = None
    orthogonal: np.ndarray | None = None
    orthogonal_cutoff: float | None = None
    orthogonal_scale: tuple[float, float] | None = None

    @property
    def n_outliers(self) -> int:
        return int(self.outliers.sum())

    @property
    def reduced(self) -> bool:
        """True when the MCD was fitted on spherical principal components."""
        return self.directions is not None

    @property
    def method(self) -> str:
        """A short account of how the distances were computed."""
        rows = int(self.fitted.sum())
        sample = "" if self.fitted.all() else f", fitted on a random {rows:,} of "
        sample += f"{self.fitted.size:,} rows" if sample else ""
        if not self.reduced:
            return f"MCD of {self.location.size} coordinates{sample}"
        return (
            f"MCD of the {self.location.size} leading spherical principal components of "
            f"{self.n_input_coordinates} coordinates ({100 * self.explained:.0f} % of the "
            f"robust spread), plus the orthogonal distance{sample}"
        )

    def cutoffs(self, quantile: float) -> tuple[float, float | None]:
        """(distance cut-off, orthogonal cut-off or None) at another quantile."""
        q = _check_quantile(quantile)
        cut = chi2_cutoff(self.location.size, q)
        if self.orthogonal_scale is None:
            return cut, None
        return cut, _orthogonal_cutoff(*self.orthogonal_scale, q)

    def outliers_at(self, quantile: float) -> np.ndarray:
        """Candidates (bool per row) at another quantile, without refitting."""
        cut, od_cut = self.cutoffs(quantile)
        flags = self.distances > cut
        if od_cut is not None:
            flags |= self.orthogonal > od_cut
        return flags

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
    max_coordinates: int | None = None,
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
    max_coordinates : int, optional
        With more than this many coordinates, fit the MCD on the leading
        ``max_coordinates`` spherical principal components instead and add the
        orthogonal distance (see the module docstring; the fit time grows
        with p). Default: never reduce.

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

    t = as_table(Y, "Y", copy=False)  # only read here
    values = t.values
    bad = ~np.isfinite(values).all(axis=1)
    if bad.any():
        rows = np.flatnonzero(bad)
        shown = ", ".join(repr(r) for r in t.row_labels(rows[:MAX_LISTED]))
        more = f" and {len(rows) - MAX_LISTED} more" if len(rows) > MAX_LISTED else ""
        raise CompositionError(
            f"robust_distances: rows {shown}{more} hold NaN or inf; pass complete rows only"
        )
    n, p_in = values.shape
    if max_coordinates is not None and (
        int(max_coordinates) != max_coordinates or max_coordinates < 1
    ):
        raise CompositionError(
            f"max_coordinates must be a positive integer, got {max_coordinates!r}"
        )
    reduce = max_coordinates is not None and p_in > int(max_coordinates)
    p = int(max_coordinates) if reduce else p_in
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
    reduction: dict = {}
    coords = values
    if reduce:
        centre, directions, explained = _spherical_components(values[fitted], p)
        coords = (values - centre) @ directions
        reduction = dict(
            n_input_coordinates=p_in, directions=directions, centre=centre, explained=explained
        )
    try:
        mcd = MinCovDet(support_fraction=support_fraction, random_state=random_state)
        mcd.fit(coords[fitted])
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
    d2 = np.asarray(mcd.mahalanobis(coords), dtype=float)
    d = np.sqrt(np.maximum(d2, 0.0))
    outliers = d > cut
    if reduce:
        resid = values - reduction["centre"]
        od = np.sqrt(np.maximum((resid * resid).sum(axis=1) - (coords * coords).sum(axis=1), 0))
        scale = _orthogonal_scale(od[fitted])
        od_quantile = DEFAULT_QUANTILE if q is None else q
        od_cut = _orthogonal_cutoff(*scale, od_quantile)
        outliers = outliers | (od > od_cut)
        reduction.update(orthogonal=od, orthogonal_cutoff=od_cut, orthogonal_scale=scale)
    else:
        reduction["n_input_coordinates"] = p_in
    return RobustDistances(
        distances=d,
        cutoff=cut,
        quantile=q,
        outliers=outliers,
        location=np.asarray(mcd.location_, dtype=float).copy(),
        covariance=cov.copy(),
        support=_spread(fitted, np.asarray(mcd.support_, dtype=bool)),
        fitted=fitted,
        index=t.index.copy() if t.index is not None else None,
        **reduction,
    )


def spatial_median(Y, max_iter: int = 500, tol: float = 1e-10) -> np.ndarray:
    """The spatial (L1) median of the rows of ``Y``: the point minimising the sum of distances.

    Weiszfeld's iteration started at the mean (both are orthogonally
    equivariant, so the result moves with a rotation of the coordinates);
    a row met exactly keeps a small distance floor.

    Parameters
    ----------
    Y : ndarray of shape (n, p)
    max_iter : int, default 500
    tol : float, default 1e-10
        Stop when a step is shorter than ``tol`` times the spread of the rows.
    """
    Y = np.asarray(Y, dtype=float)
    m = Y.mean(axis=0)
    spread = float(np.sqrt(((Y - m) ** 2).sum(axis=1).mean())) or 1.0
    floor = 1e-12 * spread
    for _ in range(int(max_iter)):
        dist = np.maximum(np.sqrt(((Y - m) ** 2).sum(axis=1)), floor)
        w = 1.0 / dist
        new = (w[:, None] * Y).sum(axis=0) / w.sum()
        step = float(np.sqrt(((new - m) ** 2).sum()))
        m = new
        if step <= tol * spread:
            break
    return m


def _spherical_components(Y: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray, float]:
    """(spatial median, leading k spherical principal directions (p, k), share of spread)."""
    centre = spatial_median(Y)
    U = Y - centre
    norms = np.sqrt((U * U).sum(axis=1))
    keep = norms > 0
    S = U[keep] / norms[keep, None]
    evals, evecs = np.linalg.eigh(S.T @ S / max(1, int(keep.sum())))
    order = np.argsort(evals)[::-1]
    evecs = evecs[:, order]
    # a sign per direction (largest loading positive), so that results repeat exactly
    signs = np.sign(evecs[np.argmax(np.abs(evecs), axis=0), np.arange(evecs.shape[1])])
    evecs = evecs * np.where(signs == 0, 1.0, signs)
    scores = U @ evecs
    spread = _mad(scores) ** 2
    total = float(spread.sum())
    explained = float(spread[:k].sum() / total) if total > 0 else 1.0
    return centre, evecs[:, :k].copy(), explained


def _mad(values: np.ndarray) -> np.ndarray:
    """Median absolute deviation, scaled (x 1.4826) to the normal standard deviation."""
    med = np.median(values, axis=0)
    return 1.4826 * np.median(np.abs(values - med), axis=0)


def _orthogonal_scale(od: np.ndarray) -> tuple[float, float]:
    """Median and scaled MAD of ``od ** (2/3)`` (Hubert, Rousseeuw & Vanden Branden 2005)."""
    z = np.asarray(od, dtype=float) ** (2.0 / 3.0)
    return float(np.median(z)), float(_mad(z))


def _orthogonal_cutoff(median: float, mad: float, quantile: float) -> float:
    """``(median + mad * z_quantile) ** 1.5``: the orthogonal-distance cut-off."""
    return float(max(median + mad * stats.norm.ppf(quantile), 0.0) ** 1.5)


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
    max_coordinates: int | None = None,
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
    quantile, cutoff, support_fraction, random_state, max_fit_rows, max_coordinates
        See :func:`robust_distances`; the default cut-off is
        ``sqrt(chi2.ppf(0.975, D - 1))`` (Filzmoser & Hron 2008).

    Returns
    -------
    RobustDistances
        Distances in ilr space; ``location`` and ``covariance`` are in the
        coordinates of ``basis`` (or of the retained spherical components).
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
        max_coordinates=max_coordinates,
    )


def group_fit_rows(sizes, max_fit_rows: int | None) -> list[int | None]:
    """Rows each group is fitted on when all groups share ``max_fit_rows``.

    Each of the k groups may use ``max(MIN_GROUP_FIT_ROWS, max_fit_rows // k)``
    rows (None: all its rows), so that screening by group costs about as much
    as one fit, and a table of at most ``max_fit_rows`` rows is never sampled.
    """
    sizes = [int(s) for s in sizes]
    if max_fit_rows is None or not sizes:
        return [None] * len(sizes)
    share = max(MIN_GROUP_FIT_ROWS, int(max_fit_rows) // len(sizes))
    return [share if size > share else None for size in sizes]


def robust_distances_by_group(
    Y,
    groups,
    quantile: float = DEFAULT_QUANTILE,
    cutoff: float | None = None,
    support_fraction: float | None = None,
    random_state: int | None = 0,
    max_fit_rows: int | None = None,
    max_coordinates: int | None = None,
    shared_fit_rows: bool = False,
    progress=None,
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
    quantile, cutoff, support_fraction, random_state, max_fit_rows, max_coordinates
        As for :func:`robust_distances`, applied to each group.
    shared_fit_rows : bool, default False
        Let the groups share ``max_fit_rows`` (see :func:`group_fit_rows`)
        instead of each group using that many.
    progress : callable, optional
        Called as ``progress(done, total, label)`` before each group's fit.

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
    codes, uniques = pd.factorize(labels[usable], sort=False)
    members = np.flatnonzero(usable)
    positions = [members[codes == k] for k in range(len(uniques))]
    if shared_fit_rows:
        limits = group_fit_rows([pos.size for pos in positions], max_fit_rows)
    else:
        limits = [max_fit_rows] * len(positions)
    results: dict = {}
    skipped: dict = {}
    for k, (label, pos, limit) in enumerate(zip(uniques, positions, limits, strict=True)):
        if progress is not None:
            progress(k, len(uniques), label)
        try:
            results[label] = (
                pos,
                robust_distances(
                    t.values[pos],
                    quantile=quantile,
                    cutoff=cutoff,
                    support_fraction=support_fraction,
                    random_state=random_state,
                    max_fit_rows=limit,
                    max_coordinates=max_coordinates,
                ),
            )
        except CompositionError as err:
            skipped[label] = str(err).replace("robust_distances: ", "")
    return results, skipped
