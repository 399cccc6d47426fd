"""Probability and confidence regions of 3-part compositions under a normal model in ilr.

The three parts are mapped to their 2 ilr coordinates ``y`` (default pivot
basis; the regions do not depend on the orthonormal basis chosen), where a
normal model with the sample mean ``ybar`` and sample covariance ``S``
(ddof = 1) is fitted from ``n`` rows. A region is an ellipse
``{y : (y - ybar)' S^-1 (y - ybar) <= r2}`` in ilr, sampled as a closed curve
and mapped back to the simplex with ``ilr_inv``, where it becomes a closed
curve strictly inside the triangle. With ``p = 2`` coordinates:

* Probability region at level ``a``, two kinds (:data:`PROBABILITY_KINDS`):

  - ``"prediction"`` (the default): where a *new* observation from the same
    population falls with probability ``a``, allowing for the estimation of
    ``ybar`` and ``S`` from the ``n`` rows:
    ``r2 = (n - 1) p (n + 1) / (n (n - p)) F_{p, n-p}(a)``, since
    ``n / (n + 1) (y - ybar)' S^-1 (y - ybar)`` follows Hotelling's ``T^2``
    with ``n - 1`` degrees of freedom (Johnson & Wichern, Applied
    Multivariate Statistical Analysis, ch. 5: the prediction (control) ellipse
    for a future individual observation, section 5.6; from memory). The
    probability is over both the new observation and the sample, so the
    region holds a share ``a`` of new samples on average.
  - ``"known_parameters"``: the region the model would have if ``ybar`` and
    ``S`` were the true mean and covariance:
    ``r2 = chi2_p(a)`` (the squared Mahalanobis distance of a normal vector
    with known parameters is chi-square with p degrees of freedom, Johnson &
    Wichern, result 4.7, the large-sample regions of ch. 5, section 5.5; from
    memory). With estimated parameters it holds fewer new samples than
    ``a``: :func:`expected_coverage` gives how many (e.g. 90.6 % for a
    95 % region from 20 rows).

* Confidence region of the centre at level ``a`` (Hotelling's T^2; Johnson &
  Wichern, result 5.3):
  ``{m : n (m - ybar)' S^-1 (m - ybar) <= p (n - 1) / (n - p) F_{p, n-p}(a)}``.
  Its ilr mean maps to the compositional centre (closed geometric mean).

Quantiles come from :mod:`scipy.stats` (``chi2.ppf``, ``f.ppf``).
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from scipy import stats as sps

from ._arrays import CompositionError
from .stats import DDOF
from .transforms import ilr, ilr_inv

__all__ = [
    "MISS_RATE_TOLERANCE",
    "PROBABILITY_KINDS",
    "centre_confidence_region",
    "centre_radius2",
    "ellipse_ilr",
    "expected_coverage",
    "fit_ilr_normal",
    "known_parameter_radius2",
    "prediction_radius2",
    "probability_radius2",
    "probability_region",
    "probability_regions",
    "under_covers",
]

#: Number of coordinates of 3 parts in ilr.
P = 2

#: The kinds of probability region: for a new observation with estimated parameters
#: (F quantile, the default), or with the parameters taken as known (chi-square).
PROBABILITY_KINDS = ("prediction", "known_parameters")

#: A region *under-covers* when its expected share of new samples outside exceeds the
#: nominal ``1 - level`` by more than this fraction (10 %: e.g. 5.5 % instead of 5 %).
MISS_RATE_TOLERANCE = 0.1


def _level(level) -> float:
    try:
        a = float(level)
    except (TypeError, ValueError):
        raise CompositionError(
            f"a region level must be a number in (0, 1), got {level!r}"
        ) from None
    if not (0.0 < a < 1.0):
        raise CompositionError(f"a region level must be in (0, 1), got {level!r}")
    return a


def _kind(kind) -> str:
    if kind not in PROBABILITY_KINDS:
        raise CompositionError(
            f"unknown probability region {kind!r}; use one of {', '.join(PROBABILITY_KINDS)}"
        )
    return kind


def _rows(n, what: str) -> int:
    if n is None or int(n) != n:
        raise CompositionError(f"{what} needs the number of rows n, got {n!r}")
    n = int(n)
    if n <= P:
        raise CompositionError(f"{what} needs more than {P} rows, got {n}")
    return n


def known_parameter_radius2(level: float) -> float:
    """Squared Mahalanobis radius ``chi2_2(level)`` of the known-parameter region."""
    return float(sps.chi2.ppf(_level(level), P))


def prediction_radius2(level: float, n: int) -> float:
    """Squared radius ``(n-1) p (n+1) / (n (n-p)) F_{p,n-p}(level)`` of the prediction region.

    A new observation from the population the ``n`` rows were drawn from lies
    inside with probability ``level`` (normal model; see the module notes).
    """
    n = _rows(n, "a prediction region")
    return float((n - 1) * P * (n + 1) / (n * (n - P)) * sps.f.ppf(_level(level), P, n - P))


def probability_radius2(level: float, n: int | None = None, kind: str = "prediction") -> float:
    """Squared Mahalanobis radius of the probability region of ``kind`` from ``n`` rows.

    ``n`` is needed for ``kind="prediction"`` and ignored for
    ``kind="known_parameters"``.
    """
    if _kind(kind) == "prediction":
        return prediction_radius2(level, n)
    return known_parameter_radius2(level)


def expected_coverage(level: float, n: int, kind: str = "prediction") -> float:
    """Share of new samples a region of ``kind`` fitted on ``n`` rows holds, on average.

    ``level`` itself for the prediction region. For the known-parameter region
    ``P(T <= chi2_p(level))`` with ``n / (n + 1) T ~ p (n - 1) / (n - p) F_{p, n-p}``
    (see the module notes), which is below ``level`` and tends to it as ``n`` grows.
    """
    a = _level(level)
    n = _rows(n, "the coverage of a region")
    if _kind(kind) == "prediction":
        return a
    scale = n * (n - P) / (P * (n + 1) * (n - 1))
    return float(sps.f.cdf(known_parameter_radius2(a) * scale, P, n - P))


def under_covers(level: float, n: int, kind: str = "prediction") -> bool:
    """True when the region holds clearly fewer new samples than its level.

    That is, when its expected miss rate ``1 - expected_coverage`` exceeds the
    nominal ``1 - level`` by more than :data:`MISS_RATE_TOLERANCE` of it. Never
    for the prediction region; for the known-parameter region up to 101 rows
    at 90 %, 153 rows at 95 % and 313 rows at 99 %.
    """
    a = _level(level)
    missed = 1.0 - expected_coverage(a, n, kind)
    return missed > (1.0 + MISS_RATE_TOLERANCE) * (1.0 - a)


def centre_radius2(level: float, n: int) -> float:
    """Squared Mahalanobis radius ``p (n-1) / (n (n-p)) F_{p,n-p}(level)`` of the centre's region.

    This is the Hotelling T^2 bound divided by ``n`` (the region is written
    in terms of ``(m - ybar)' S^-1 (m - ybar)``).
    """
    n = int(n)
    if n <= P:
        raise CompositionError(
            f"a confidence region of the centre needs more than {P} rows, got {n}"
        )
    return float(P * (n - 1) / (n * (n - P)) * sps.f.ppf(_level(level), P, n - P))


def fit_ilr_normal(X) -> tuple[np.ndarray, np.ndarray, int]:
    """ilr mean (2,), covariance (2, 2) with ddof = 1, and row count of 3-part data.

    Raises
    ------
    CompositionError
        Fewer than 3 rows, non-positive parts (from ``ilr``), or a degenerate
        spread (all points on one compositional line).
    """
    try:
        v = np.asarray(X, dtype=float)
    except (TypeError, ValueError) as err:
        raise CompositionError(f"regions: data must be numbers ({err})") from None
    if v.ndim != 2 or v.shape[1] != 3:
        raise CompositionError(f"regions: need 3-part data of shape (n, 3), got {v.shape}")
    n = v.shape[0]
    if n <= P:
        raise CompositionError(f"regions: a region needs at least {P + 1} rows, got {n}")
    Y = np.asarray(ilr(v), dtype=float)
    mean = Y.mean(axis=0)
    cov = np.cov(Y, rowvar=False, ddof=DDOF)
    eig = np.linalg.eigvalsh(cov)
    if not eig[0] > 1e-12 * max(eig[-1], np.finfo(float).tiny):
        raise CompositionError(
            f"regions: the {n} rows lie on one compositional line (no 2-D spread); "
            "no elliptical region can be drawn"
        )
    return mean, cov, n


def ellipse_ilr(mean, cov, radius2: float, n_points: int = 181) -> np.ndarray:
    """Closed curve ``{y : (y - mean)' cov^-1 (y - mean) = radius2}``, shape (n_points, 2).

    The last point repeats the first.
    """
    m = int(n_points)
    if m < 4:
        raise CompositionError(f"n_points must be at least 4, got {n_points!r}")
    w, V = np.linalg.eigh(np.asarray(cov, dtype=float))
    L = V * np.sqrt(np.maximum(w, 0.0))[None, :]
    theta = np.linspace(0.0, 2.0 * np.pi, m)
    circle = np.column_stack([np.cos(theta), np.sin(theta)])
    pts = np.asarray(mean, dtype=float)[None, :] + np.sqrt(radius2) * circle @ L.T
    pts[-1] = pts[0]
    return pts


def _to_simplex(pts: np.ndarray) -> np.ndarray:
    return np.asarray(ilr_inv(pts), dtype=float)


def probability_region(
    X, level: float = 0.95, n_points: int = 181, kind: str = "prediction"
) -> np.ndarray:
    """Closed curve (n_points, 3) of the probability region at ``level`` (closed compositions).

    Parameters
    ----------
    X : array-like of shape (n, 3)
        Strictly positive 3-part compositions, n >= 3.
    level : float in (0, 1)
    n_points : int
        Samples on the curve (the last repeats the first).
    kind : {"prediction", "known_parameters"}, default "prediction"
        The region for a new observation with estimated parameters (F quantile),
        or with the parameters taken as known (chi-square); see the module notes.
    """
    return probability_regions(X, [level], n_points, kind)[0]


def probability_regions(
    X,
    levels: Sequence[float] = (0.9, 0.95, 0.99),
    n_points: int = 181,
    kind: str = "prediction",
) -> list[np.ndarray]:
    """:func:`probability_region` at each of ``levels`` (one fit)."""
    _kind(kind)
    mean, cov, n = fit_ilr_normal(X)
    return [
        _to_simplex(ellipse_ilr(mean, cov, probability_radius2(a, n, kind), n_points))
        for a in levels
    ]


def centre_confidence_region(X, level: float = 0.95, n_points: int = 181) -> np.ndarray:
    """Closed curve (n_points, 3) of the confidence region of the centre (Hotelling T^2)."""
    mean, cov, n = fit_ilr_normal(X)
    return _to_simplex(ellipse_ilr(mean, cov, centre_radius2(level, n), n_points))
