"""The compositional (clr) biplot: column-centred clr coordinates and their SVD.

References
----------
Aitchison, J. and Greenacre, M. (2002) Biplots of compositional data.
Journal of the Royal Statistical Society, Series C (Applied Statistics) 51, 375-392.

Definitions
-----------
Let ``Z`` be the (n, D) clr matrix of the rows used, ``Zc = Z - mean(Z)`` its
column-centred form and ``Zc = U S V^T`` the thin SVD, truncated to the
``r = min(n - 1, D - 1)`` components that can be non-zero (the clr rows sum to
zero and the centred columns do too). With ``n`` the number of rows used and
the package-wide ``ddof = 1`` (:data:`compwidgets.core.stats.DDOF`):

===========  ===========================  ==============================
scaling      row (sample) coordinates     column (part) coordinates
===========  ===========================  ==============================
form         ``U S``                      ``V``
covariance   ``sqrt(n - 1) U``            ``V S / sqrt(n - 1)``
===========  ===========================  ==============================

The SVD is computed block by block of rows, without forming ``Zc``
(:func:`compwidgets.core.tall_svd.centred_thin_svd`, a tall-skinny QR: as
accurate as a direct SVD of ``Zc``, ill-conditioned cases included).

Both give ``rows @ columns.T == Zc`` with every component. In the covariance
biplot the length of a ray is the standard deviation of that clr coordinate,
the distance between two ray tips ("link") is the standard deviation of the
log-ratio of the two parts, and the cosine of the angle between two rays is the
correlation of their clr coordinates (exactly with every component,
approximately in a plane). In the form biplot the distance between two row
points is their Aitchison distance.

Sign convention
---------------
An SVD fixes each component only up to its sign. Here each component is
oriented so that its part loading (column of ``V``) with the largest absolute
value is positive; among loadings equal in absolute value up to a relative
1e-9, the first part in column order decides. The result is deterministic for
a given input and does not depend on the order of the rows.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ._arrays import CompositionError, _listing, as_table
from .stats import DDOF
from .tall_svd import BLOCK_ROWS, centred_thin_svd

#: The scalings :func:`clr_biplot` accepts.
SCALINGS = ("covariance", "form")

#: How the rows with a missing (NaN) clr value are treated.
MISSING = ("raise", "omit")

#: Relative tolerance on a row sum of the clr input (it must be zero).
_ROW_SUM_RTOL = 1e-8

#: Root-mean-square centred clr below this (relative to max |clr|, at least 1) counts as 0.
_ZERO_RTOL = 1e-12

#: Loadings within this relative distance of the largest |loading| count as tied.
_TIE_RTOL = 1e-9


@dataclass(frozen=True, eq=False)
class Biplot:
    """A fitted compositional biplot (see the module docstring for definitions).

    Attributes
    ----------
    row_coords : ndarray of shape (n, k)
        Coordinates of the rows (samples), one row per input row; rows that were
        left out (``missing="omit"``) hold NaN. ``k`` is ``n_components`` of
        :func:`clr_biplot` (default ``r``).
    column_coords : ndarray of shape (D, r)
        Coordinates of the ray tips of the parts, always for all ``r`` components.
    singular_values : ndarray of shape (r,)
        Singular values ``S`` of the centred clr matrix, decreasing.
    explained_variance : ndarray of shape (r,)
        Variance of each component, ``S**2 / (n - 1)``.
    explained_ratio : ndarray of shape (r,)
        Share of the total variance of each component (sums to 1).
    parts : list of str
        Part names, in column order.
    scaling : str
        ``"covariance"`` or ``"form"``.
    total_variance : float
        Total variance (trace of the clr covariance, ddof = 1) of the rows used.
    clr_mean : ndarray of shape (D,)
        Column means of the clr coordinates of the rows used (clr of the centre).
    rows_used : ndarray of bool, shape (n,)
        Which input rows entered the SVD.
    left_vectors : ndarray of shape (n, k)
        ``U`` (orthonormal columns over the rows used; NaN for rows left out).
    right_vectors : ndarray of shape (D, r)
        ``V`` (orthonormal columns, each summing to zero).
    """

    column_coords: np.ndarray
    singular_values: np.ndarray
    explained_variance: np.ndarray
    explained_ratio: np.ndarray
    parts: list[str]
    scaling: str
    total_variance: float
    clr_mean: np.ndarray = field(repr=False)
    rows_used: np.ndarray = field(repr=False)
    left_vectors: np.ndarray = field(repr=False)
    right_vectors: np.ndarray = field(repr=False)

    @property
    def row_coords(self) -> np.ndarray:
        """Row coordinates (n, k): the left vectors scaled (computed when asked, read-only)."""
        return _frozen(self.left_vectors * self._row_factor())

    def row_column(self, c: int) -> np.ndarray:
        """Row coordinates of component ``c`` (one column of :attr:`row_coords`, alone)."""
        return _frozen(self.left_vectors[:, c] * self._row_factor()[c])

    def _row_factor(self) -> np.ndarray:
        k = self.left_vectors.shape[1]
        if self.scaling == "form":
            return self.singular_values[:k]
        return np.full(k, np.sqrt(self.n_rows_used - DDOF))

    @property
    def n_rows_used(self) -> int:
        """Number of rows that entered the SVD."""
        return int(self.rows_used.sum())

    @property
    def n_rows_left_out(self) -> int:
        """Number of input rows left out because of a missing clr value."""
        return int(self.rows_used.size - self.rows_used.sum())

    @property
    def n_components(self) -> int:
        """Number of components ``r`` (columns of :attr:`column_coords`)."""
        return int(self.singular_values.size)

    def with_scaling(self, scaling: str) -> Biplot:
        """The same biplot in another scaling, without a new SVD.

        Parameters
        ----------
        scaling : {"covariance", "form"}

        Returns
        -------
        Biplot
            ``self`` when the scaling is unchanged, else a new object sharing
            the singular vectors.
        """
        scaling = _check_scaling(scaling)
        if scaling == self.scaling:
            return self
        cols = _scaled(self.right_vectors, self.singular_values, self.n_rows_used, scaling)
        return Biplot(
            column_coords=cols,
            singular_values=self.singular_values,
            explained_variance=self.explained_variance,
            explained_ratio=self.explained_ratio,
            parts=list(self.parts),
            scaling=scaling,
            total_variance=self.total_variance,
            clr_mean=self.clr_mean,
            rows_used=self.rows_used,
            left_vectors=self.left_vectors,
            right_vectors=self.right_vectors,
        )

    def part_position(self, part: str | int) -> int:
        """Position of ``part`` (a name or an integer position) in :attr:`parts`."""
        if isinstance(part, (int, np.integer)) and not isinstance(part, bool):
            D = len(self.parts)
            if not -D <= part < D:
                raise CompositionError(f"biplot: part position {part} out of range for {D} parts")
            return int(part) % D
        if part in self.parts:
            return self.parts.index(part)
        raise CompositionError(
            f"biplot: unknown part {part!r}; parts are {_listing(list(self.parts))}"
        )


def clr_biplot(
    clr_matrix,
    scaling: str = "covariance",
    *,
    parts: Sequence[str] | None = None,
    n_components: int | None = None,
    missing: str = "raise",
) -> Biplot:
    """Compositional biplot of a clr matrix (Aitchison & Greenacre 2002).

    Parameters
    ----------
    clr_matrix : array-like or DataFrame of shape (n, D)
        clr coordinates, one row per sample (each row sums to zero). Columns
        named ``clr(part)`` give the part names ``part``.
    scaling : {"covariance", "form"}, default "covariance"
        Covariance biplot (rays show standard deviations) or form biplot
        (row points keep Aitchison distances).
    parts : sequence of str, optional
        Part names (default: from the DataFrame columns, else ``x1 .. xD``).
    n_components : int, optional
        How many columns of row coordinates (and left vectors) to keep, 1..r
        (default all ``r``). Column coordinates and variances always cover
        every component; this only saves memory for tall tables.
    missing : {"raise", "omit"}, default "raise"
        Rows holding NaN: ``"raise"`` raises naming them; ``"omit"`` leaves them
        out of the SVD and gives them NaN coordinates (see ``rows_used``).

    Returns
    -------
    Biplot

    Raises
    ------
    CompositionError
        Fewer than 2 parts or 2 rows used, infinite values, NaN rows with
        ``missing="raise"``, rows that do not sum to zero, zero total variance,
        an unknown scaling, or a bad ``parts`` / ``n_components``.
    """
    scaling = _check_scaling(scaling)
    if missing not in MISSING:
        raise CompositionError(f"clr_biplot: missing must be 'raise' or 'omit', got {missing!r}")
    t = as_table(clr_matrix, "clr_matrix", min_parts=2, copy=False)  # only read here
    Z = t.values
    n_all, D = Z.shape
    names = _part_names(t, parts, D)

    inf = np.isinf(Z)
    if inf.any():
        rows = np.flatnonzero(inf.any(axis=1))
        raise CompositionError(
            f"clr_matrix: infinite values in rows {_listing(t.row_labels(rows), len(rows))}; "
            "clr coordinates of a composition are finite (zeros must be replaced first)"
        )
    nan_rows = np.isnan(Z).any(axis=1)
    if nan_rows.any() and missing == "raise":
        rows = np.flatnonzero(nan_rows)
        raise CompositionError(
            f"clr_matrix: missing values (NaN) in rows {_listing(t.row_labels(rows), len(rows))} "
            f"({len(rows)} of {n_all}); pass missing='omit' to leave them out"
        )
    used = ~nan_rows
    Zu = Z if used.all() else Z[used]  # no copy of a million rows when every row is used
    n = Zu.shape[0]
    if n <= DDOF:
        raise CompositionError(
            f"clr_biplot: needs at least {DDOF + 1} complete rows, got {n} "
            f"({n_all - n} left out for missing values)"
        )
    sums = np.abs(Zu.sum(axis=1))
    biggest = np.maximum(Zu.max(axis=1), -Zu.min(axis=1))  # max |z| per row, no |Z| copy
    limit = _ROW_SUM_RTOL * D * np.maximum(1.0, biggest)
    bad = sums > limit
    if bad.any():
        rows = np.flatnonzero(used)[bad]
        first = rows[0]
        raise CompositionError(
            f"clr_matrix: rows {_listing(t.row_labels(rows), len(rows))} do not sum to zero "
            f"(first: row {t.row_labels([first])[0]!r} sums to {float(Z[first].sum())!r}); "
            "give clr coordinates, e.g. compwidgets.core.clr(X)"
        )

    k = _n_components(n_components, n, D)
    scale = max(1.0, float(biggest.max()))
    return _fitted(Zu, Zu.mean(axis=0), used, names, scaling, k, scale)


def composition_biplot(
    X,
    scaling: str = "covariance",
    *,
    parts: Sequence[str] | None = None,
    n_components: int | None = None,
    missing: str = "raise",
) -> Biplot:
    """The clr biplot of compositions, their clr computed block by block of rows.

    The same biplot as ``clr_biplot(clr(X))`` (to rounding), without the
    ``(n, D)`` clr matrix: each block of rows is taken to clr coordinates,
    centred and factored in turn (:func:`compwidgets.core.tall_svd.centred_thin_svd`).

    Parameters
    ----------
    X : array-like or DataFrame of shape (n, D)
        Compositions (closure not needed), one row per sample.
    scaling, parts, n_components
        As for :func:`clr_biplot` (part names default to the DataFrame columns).
    missing : {"raise", "omit"}, default "raise"
        Rows with a part that is missing, zero or negative: ``"raise"`` raises
        naming them; ``"omit"`` leaves them out (NaN coordinates, see ``rows_used``).

    Returns
    -------
    Biplot
    """
    scaling = _check_scaling(scaling)
    if missing not in MISSING:
        raise CompositionError(
            f"composition_biplot: missing must be 'raise' or 'omit', got {missing!r}"
        )
    t = as_table(X, "X", min_parts=2, copy=False)  # only read here
    values = t.values
    n_all, D = values.shape
    names = _part_names(t, parts, D)
    with np.errstate(invalid="ignore"):
        bad = ~(np.isfinite(values) & (values > 0)).all(axis=1)
    if bad.any() and missing == "raise":
        rows = np.flatnonzero(bad)
        raise CompositionError(
            f"X: rows {_listing(t.row_labels(rows), len(rows))} ({len(rows)} of {n_all}) have "
            "a part that is missing, zero or negative; replace those values first or pass "
            "missing='omit' to leave the rows out"
        )
    used = ~bad
    Xu = values if used.all() else values[used]
    n = Xu.shape[0]
    if n <= DDOF:
        raise CompositionError(
            f"composition_biplot: needs at least {DDOF + 1} complete rows, got {n} "
            f"({n_all - n} left out)"
        )
    k = _n_components(n_components, n, D)
    total, scale = np.zeros(D), 1.0
    for start in range(0, n, BLOCK_ROWS):
        block = _clr_rows(Xu[start : start + BLOCK_ROWS])
        total += block.sum(axis=0)
        scale = max(scale, float(np.abs(block).max()))
    return _fitted(Xu, total / n, used, names, scaling, k, scale, transform=_clr_rows)


def _clr_rows(values: np.ndarray) -> np.ndarray:
    """clr of a block of positive rows (a new array)."""
    logs = np.log(values)
    logs -= logs.mean(axis=1, keepdims=True)
    return logs


def _n_components(n_components, n: int, D: int) -> int:
    """Columns of row coordinates to keep: all ``r = min(n - 1, D - 1)`` by default."""
    r = min(n - 1, D - 1)
    if n_components is None:
        return r
    if isinstance(n_components, bool) or not isinstance(n_components, (int, np.integer)):
        raise CompositionError(
            f"clr_biplot: n_components must be an integer, got {n_components!r}"
        )
    if not 1 <= n_components <= r:
        raise CompositionError(
            f"clr_biplot: n_components must be in 1..{r} for {n} rows and {D} parts, "
            f"got {n_components}"
        )
    return int(n_components)


def _fitted(Zu, mean, used, names, scaling, k: int, scale: float, transform=None) -> Biplot:
    """The biplot of the rows used (``Zu``, or their clr by ``transform``), centred on ``mean``."""
    n, D = Zu.shape
    n_all = used.size
    r = min(n - 1, D - 1)
    # exact thin SVD of the centred rows in blocks (TSQR): no centred copy, no (n, D) factor
    U, s, V, total_ss = centred_thin_svd(Zu, mean, k, transform=transform)
    s, V = s[:r], V[:, :r]
    if not np.sqrt(total_ss / Zu.size) > _ZERO_RTOL * scale:
        raise CompositionError(
            f"clr_biplot: the {n} rows used all have the same composition (total variance 0); "
            "a biplot needs variation"
        )
    signs = _orientation(V)
    U *= signs[:k]  # U is this function's own: in place
    V = V * signs

    if used.all():
        U_all = U
    else:
        U_all = np.full((n_all, k), np.nan)
        U_all[used] = U
    U_all.flags.writeable = False
    V.flags.writeable = False
    explained_variance = s**2 / (n - DDOF)
    return Biplot(
        column_coords=_scaled(V, s, n, scaling),
        singular_values=_frozen(s),
        explained_variance=_frozen(explained_variance),
        explained_ratio=_frozen(s**2 / total_ss),
        parts=names,
        scaling=scaling,
        total_variance=total_ss / (n - DDOF),
        clr_mean=_frozen(mean),
        rows_used=_frozen(used),
        left_vectors=U_all,
        right_vectors=V,
    )


def link_length(
    biplot: Biplot, i: str | int, j: str | int, components: Sequence[int] | None = None
) -> float:
    """Distance between the ray tips of parts ``i`` and ``j``.

    In a covariance biplot this "link" is the standard deviation (ddof = 1) of
    ``ln(x_i / x_j)`` when every component is used (``components=None``), and
    its approximation in the plane of the chosen components otherwise.

    Parameters
    ----------
    biplot : Biplot
    i, j : str or int
        Part names or positions.
    components : sequence of int, optional
        0-based component numbers (default: all).

    Returns
    -------
    float
    """
    cols = _components(biplot, components)
    a, b = biplot.part_position(i), biplot.part_position(j)
    diff = biplot.column_coords[a, cols] - biplot.column_coords[b, cols]
    return float(np.sqrt(np.sum(diff * diff)))


def ray_associations(
    biplot: Biplot, i: str | int, components: Sequence[int] | None = (0, 1)
) -> pd.Series:
    """Cosines between the ray of part ``i`` and every other ray, most associated first.

    In a covariance biplot the cosine of the angle between two rays is the
    correlation of their clr coordinates with every component, and its
    approximation in a plane. Rays of (numerically) zero length in the chosen
    components have no direction: their cosine is NaN and they come last.

    Parameters
    ----------
    biplot : Biplot
    i : str or int
        Part name or position.
    components : sequence of int, default (0, 1)
        0-based component numbers of the plane (``None``: all components).

    Returns
    -------
    pandas.Series
        Index: the other parts; values: cosines in [-1, 1], sorted from the most
        positively associated to the least (most negative), NaN last.

    Raises
    ------
    CompositionError
        The ray of part ``i`` has zero length in the chosen components.
    """
    cols = _components(biplot, components)
    a = biplot.part_position(i)
    C = biplot.column_coords[:, cols]
    lengths = np.sqrt(np.sum(C * C, axis=1))
    tiny = _TIE_RTOL * max(float(lengths.max()), np.finfo(float).tiny)
    if lengths[a] <= tiny:
        raise CompositionError(
            f"biplot: the ray of part {biplot.parts[a]!r} has zero length in components "
            f"{[c + 1 for c in cols]}; it has no direction to compare"
        )
    others = [p for p in range(len(biplot.parts)) if p != a]
    with np.errstate(invalid="ignore", divide="ignore"):
        cos = (C[others] @ C[a]) / (lengths[others] * lengths[a])
    cos = np.where(lengths[others] > tiny, np.clip(cos, -1.0, 1.0), np.nan)
    series = pd.Series(cos, index=[biplot.parts[p] for p in others], name=biplot.parts[a])
    return series.sort_values(ascending=False, na_position="last", kind="stable")


def logratio_sd(biplot: Biplot, i: str | int, j: str | int) -> float:
    """Standard deviation (ddof = 1) of ``ln(x_i / x_j)`` over the rows used.

    Computed from the full decomposition, ``V S / sqrt(n - 1)`` (the covariance
    ray tips with every component), whatever the biplot's own scaling: it is
    the length of the covariance link of ``i`` and ``j`` with all components.

    Parameters
    ----------
    biplot : Biplot
    i, j : str or int
        Part names or positions.

    Returns
    -------
    float
    """
    a, b = biplot.part_position(i), biplot.part_position(j)
    tips = biplot.right_vectors * (biplot.singular_values / np.sqrt(biplot.n_rows_used - DDOF))
    diff = tips[a] - tips[b]
    return float(np.sqrt(np.sum(diff * diff)))


#: Share of the largest row-point distance the longest drawn ray reaches (display scale).
RAY_SHARE = 0.8

#: Longest true ray / largest row-point distance kept as drawn in a covariance biplot.
TRUE_LENGTH_RANGE = (0.2, 2.0)

#: Readable display factors: these mantissas times a power of ten.
_NICE_MANTISSAS = (1.0, 2.0, 2.5, 5.0)


def ray_display_factor(
    biplot: Biplot,
    components: Sequence[int] | None = (0, 1),
    *,
    share: float = RAY_SHARE,
    keep_true_length: bool | None = None,
    true_length_range: tuple[float, float] = TRUE_LENGTH_RANGE,
    rounded: bool = True,
) -> float:
    """Factor by which to draw the rays so they compare in size with the row points.

    In a form biplot the ray tips (columns of ``V``, at most 1 long) are tiny
    next to the row points (``U S``). Drawing every ray multiplied by one
    factor keeps their relative lengths and their angles, so what the rays say
    about each other is unchanged; only a comparison of ray lengths with point
    distances is lost. The factor makes the longest ray in the plane reach
    ``share`` of the largest distance of a row point from the origin in that
    plane.

    Parameters
    ----------
    biplot : Biplot
    components : sequence of int, default (0, 1)
        0-based components of the plane (``None``: all components). They must
        be among the row coordinates kept (``biplot.row_coords.shape[1]``).
    share : float, default 0.8
        Longest drawn ray / largest row-point distance, before rounding (> 0).
    keep_true_length : bool, optional
        Return 1 (rays at their true length) while the longest true ray is
        between ``true_length_range[0]`` and ``true_length_range[1]`` times the
        largest row-point distance; outside that range (rays invisibly short,
        or so long they crowd the points into a corner) the factor applies.
        Default: ``True`` for a covariance biplot, whose true ray lengths are
        standard deviations worth showing, ``False`` for a form biplot.
    true_length_range : (float, float), default (0.2, 2.0)
        See ``keep_true_length``.
    rounded : bool, default True
        Round the factor down to a readable number ``m * 10**k`` with ``m`` in
        1, 2, 2.5, 5: the longest drawn ray then reaches between ``share / 2``
        and ``share`` of the largest row-point distance. ``False``: exactly
        ``share``.

    Returns
    -------
    float
        The factor, > 0; 1.0 when there is nothing to compare (no finite row
        point away from the origin, or every ray of zero length in the plane).

    Raises
    ------
    CompositionError
        Bad components or options.
    """
    cols = _components(biplot, components)
    kept = biplot.row_coords.shape[1]
    if max(cols) >= kept:
        raise CompositionError(
            f"ray_display_factor: component {max(cols)} is beyond the {kept} row-coordinate "
            "components kept; fit with a larger n_components"
        )
    share = float(share)
    if not (np.isfinite(share) and share > 0):
        raise CompositionError(f"ray_display_factor: share must be positive, got {share!r}")
    lo, hi = (float(v) for v in true_length_range)
    if not 0 <= lo <= hi:
        raise CompositionError(
            f"ray_display_factor: true_length_range must be 0 <= low <= high, got {(lo, hi)}"
        )
    R = biplot.row_coords[:, cols]
    R = R[np.all(np.isfinite(R), axis=1)]
    C = biplot.column_coords[:, cols]
    row_max = float(np.sqrt(np.max(np.sum(R * R, axis=1)))) if R.size else 0.0
    ray_max = float(np.sqrt(np.max(np.sum(C * C, axis=1))))
    if not (row_max > 0 and ray_max > 0):
        return 1.0
    ratio = ray_max / row_max
    if keep_true_length is None:
        keep_true_length = biplot.scaling == "covariance"
    if keep_true_length and lo <= ratio <= hi:
        return 1.0
    factor = share / ratio
    return nice_factor(factor) if rounded else factor


def nice_factor(value: float) -> float:
    """The largest readable number ``m * 10**k`` (``m`` in 1, 2, 2.5, 5) not above ``value``.

    Parameters
    ----------
    value : float
        Positive and finite.

    Returns
    -------
    float
        Between ``value / 2`` and ``value``; ``value`` itself when it is readable.
    """
    value = float(value)
    if not (np.isfinite(value) and value > 0):
        raise CompositionError(f"nice_factor: needs a positive finite value, got {value!r}")
    k = int(np.floor(np.log10(value)))
    best = 0.0
    for exp in (k - 1, k, k + 1):  # log10 may round either way at a power of ten
        for m in _NICE_MANTISSAS:
            candidate = float(f"{m}e{exp}")  # exact decimal, e.g. 2.5e-3
            if candidate <= value * (1 + 1e-12) and candidate > best:
                best = candidate
    return best


# ----------------------------------------------------------------------------- helpers


def _check_scaling(scaling: str) -> str:
    if scaling not in SCALINGS:
        raise CompositionError(f"biplot: unknown scaling {scaling!r}; use 'covariance' or 'form'")
    return scaling


def _part_names(t, parts: Sequence[str] | None, D: int) -> list[str]:
    if parts is not None:
        if isinstance(parts, str):
            raise CompositionError("clr_biplot: parts must be a sequence of names, not one string")
        names = [str(p) for p in parts]
        if len(names) != D:
            raise CompositionError(f"clr_biplot: {len(names)} part names given for {D} columns")
    else:
        names = []
        for c in t.part_names():
            names.append(c[4:-1] if c.startswith("clr(") and c.endswith(")") else c)
    dup = sorted({p for p in names if names.count(p) > 1})
    if dup:
        raise CompositionError(f"clr_biplot: duplicate part names {_listing(dup)}")
    return names


def _orientation(V: np.ndarray) -> np.ndarray:
    """Sign (+1/-1) per column of V making its largest-|loading| entry positive."""
    absV = np.abs(V)
    signs = np.ones(V.shape[1])
    for c in range(V.shape[1]):
        top = absV[:, c].max()
        first = int(np.flatnonzero(absV[:, c] >= top * (1 - _TIE_RTOL))[0])
        if V[first, c] < 0:
            signs[c] = -1.0
    return signs


def _scaled(V, s, n: int, scaling: str) -> np.ndarray:
    """Column (part) coordinates in a scaling (the rows are scaled when asked for)."""
    cols = V.copy() if scaling == "form" else V * (s / np.sqrt(n - DDOF))
    return _frozen(cols)


def _components(biplot: Biplot, components: Sequence[int] | None) -> list[int]:
    r = biplot.n_components
    if components is None:
        return list(range(r))
    if isinstance(components, (int, np.integer, str)):
        raise CompositionError(
            f"biplot: components must be a sequence of component numbers, got {components!r}"
        )
    cols = []
    for c in components:
        if isinstance(c, bool) or not isinstance(c, (int, np.integer)) or not 0 <= c < r:
            raise CompositionError(
                f"biplot: component {c!r} is not one of 0..{r - 1} (0-based; {r} components)"
            )
        cols.append(int(c))
    if not cols or len(set(cols)) != len(cols):
        raise CompositionError(f"biplot: components must be distinct and non-empty, got {cols}")
    return cols


def _frozen(a: np.ndarray) -> np.ndarray:
    a = np.asarray(a)
    a.flags.writeable = False
    return a
