"""Probability and confidence regions of 3-part compositions under a normal model in ilr.

The three parts are mapped to their 2 ilr coordinates ``y`` (default pivot
basis; the regions do not depend on the orthonormal basis chosen), where a
normal model with the sample mean ``ybar`` and sample covariance ``S``
(ddof = 1) is fitted. A region is an ellipse in ilr, sampled as a closed
curve and mapped back to the simplex with ``ilr_inv``, where it becomes a
closed curve strictly inside the triangle.

* Probability region at level ``a`` (where a new observation falls with
  probability ``a`` under the fitted model, parameters taken as known):
  ``{y : (y - ybar)' S^-1 (y - ybar) <= chi2_p(a)}`` with ``p = 2``.
* Confidence region of the centre at level ``a`` (Hotelling's T^2; e.g.
  Johnson & Wichern, Applied Multivariate Statistical Analysis, result 5.3):
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
    "centre_confidence_region",
    "centre_radius2",
    "ellipse_ilr",
    "fit_ilr_normal",
    "probability_radius2",
    "probability_region",
    "probability_regions",
]

#: Number of coordinates of 3 parts in ilr.
P = 2


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


def probability_radius2(level: float) -> float:
    """Squared Mahalanobis radius ``chi2_2(level)`` of the probability region."""
    return float(sps.chi2.ppf(_level(level), P))


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


def probability_region(X, level: float = 0.95, n_points: int = 181) -> np.ndarray:
    """Closed curve (n_points, 3) of the probability region at ``level`` (closed compositions).

    Parameters
    ----------
    X : array-like of shape (n, 3)
        Strictly positive 3-part compositions, n >= 3.
    level : float in (0, 1)
    n_points : int
        Samples on the curve (the last repeats the first).
    """
    mean, cov, _ = fit_ilr_normal(X)
    return _to_simplex(ellipse_ilr(mean, cov, probability_radius2(level), n_points))


def probability_regions(
    X, levels: Sequence[float] = (0.9, 0.95, 0.99), n_points: int = 181
) -> list[np.ndarray]:
    """:func:`probability_region` at each of ``levels`` (one fit)."""
    mean, cov, _ = fit_ilr_normal(X)
    return [_to_simplex(ellipse_ilr(mean, cov, probability_radius2(a), n_points)) for a in levels]


def centre_confidence_region(X, level: float = 0.95, n_points: int = 181) -> np.ndarray:
    """Closed curve (n_points, 3) of the confidence region of the centre (Hotelling T^2)."""
    mean, cov, n = fit_ilr_normal(X)
    return _to_simplex(ellipse_ilr(mean, cov, centre_radius2(level, n), n_points))
