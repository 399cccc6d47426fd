"""The thin SVD of a tall column-centred matrix, computed in blocks of rows.

For an ``(n, D)`` matrix ``A = Z - mean`` with ``n >> D`` the thin SVD
``A = U S V^T`` is found by a tall-skinny QR (TSQR; Demmel, Grigori,
Hoemmen and Langou 2012, SIAM J. Sci. Comput. 34, A206-A239):

1. each block of rows ``A_b`` (centred on the fly) is factored ``A_b = Q_b R_b``
   by Householder QR (LAPACK ``dgeqrf``);
2. the stacked ``R_b`` are factored once more, ``[R_1; R_2; ...] = Q' R``;
3. the small ``R = U_R S V^T`` (LAPACK SVD) gives ``S`` and ``V``;
4. ``U = diag(Q_b) Q' U_R``: each block's ``Q_b`` (the same QR, done again, so
   that no ``(n, D)`` factor is kept) is applied to its slice of ``Q' U_R``
   (LAPACK ``dormqr``), for the leading ``k`` columns only.

Every step is an orthogonal (backward-stable) transformation, so the result
has the accuracy of a direct SVD of ``A`` (``numpy.linalg.svd``), also for
ill-conditioned matrices, unlike an eigen-decomposition of ``A^T A``, which
squares the condition number. Memory beyond the input is one block of rows,
the ``R_b`` (``D`` rows per block) and ``U`` itself; the centred matrix is never
formed. On a tall matrix this is several times faster than a LAPACK SVD of
the whole matrix, whose QR of one tall panel runs at level-2 BLAS speed.
Signs of the singular vectors are as LAPACK returns them; callers orient them.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from scipy.linalg import lapack

__all__ = ["BLOCK_ROWS", "centred_thin_svd"]

#: Rows per block: a block of 50 columns stays in the processor's cache.
BLOCK_ROWS = 4096


def centred_thin_svd(
    Z: np.ndarray,
    mean: np.ndarray,
    k: int,
    *,
    block_rows: int = BLOCK_ROWS,
    transform: Callable[[np.ndarray], np.ndarray] | None = None,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, float]:
    """Thin SVD of ``Z - mean`` (or ``transform(Z) - mean``) without forming it.

    Parameters
    ----------
    Z : ndarray of shape (n, D), float64
        The rows (not changed).
    mean : ndarray of shape (D,)
        Subtracted from every (transformed) row.
    k : int
        Columns of ``U`` wanted, ``0 <= k <= min(n, D)``.
    block_rows : int
        Rows per block (at least ``D``; smaller values are raised to ``D``).
    transform : callable, optional
        Applied to each block of rows first (row by row, e.g. their clr), so that
        the transformed matrix is never formed either.

    Returns
    -------
    U : ndarray of shape (n, k)
        Leading left singular vectors.
    s : ndarray of shape (min(n, D),)
        Singular values, decreasing.
    V : ndarray of shape (D, min(n, D))
        Right singular vectors (columns).
    sum_of_squares : float
        Sum of the squared entries of ``Z - mean`` (summed directly, block by block).
    """
    Z = np.asarray(Z, dtype=float)
    n, D = Z.shape
    K = min(n, D)
    if not 0 <= k <= K:
        raise ValueError(f"centred_thin_svd: k must be in 0..{K}, got {k}")
    mean = np.asarray(mean, dtype=float).reshape(D)
    step = max(int(block_rows), D)
    starts = range(0, n, step)
    buffer = np.empty((min(step, n), D), order="F")

    def centred(start: int) -> np.ndarray:
        """One block of rows minus the mean, in the buffer (Fortran order, for LAPACK)."""
        block = buffer[: min(step, n - start)]
        rows = Z[start : start + step]
        block[...] = rows if transform is None else transform(rows)  # then in place: faster
        block -= mean
        return block

    def factor(block: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Householder QR of a block, in place: (reflectors below R, tau)."""
        qr, tau, _, info = lapack.dgeqrf(block, overwrite_a=True)
        if info != 0:  # pragma: no cover - LAPACK refuses only malformed input
            raise ValueError(f"centred_thin_svd: dgeqrf failed (info={info})")
        return qr, tau

    stacked, sizes, sum_of_squares = [], [], 0.0
    for start in starts:
        block = centred(start)
        sum_of_squares += float(np.einsum("ij,ij->", block, block))
        qr, _ = factor(block)
        rows = min(qr.shape[0], D)
        stacked.append(np.triu(qr[:rows]))
        sizes.append(rows)
    Q2, R = np.linalg.qr(np.vstack(stacked))
    UR, s, Vt = np.linalg.svd(R, full_matrices=False)
    U = np.empty((n, k))
    if k:
        M = Q2 @ UR[:, :k]  # (sum of sizes, k): each block's share of U in its Q_b basis
        offsets = np.concatenate([[0], np.cumsum(sizes)])
        for b, start in enumerate(starts):
            qr, tau = factor(centred(start))
            m, rows = qr.shape[0], sizes[b]
            C = np.zeros((m, k), order="F")
            C[:rows] = M[offsets[b] : offsets[b + 1]]
            out, _, info = lapack.dormqr(
                "L", "N", qr[:, :rows], tau[:rows], C, lwork=max(1, 64 * k), overwrite_c=True
            )
            if info != 0:  # pragma: no cover
                raise ValueError(f"centred_thin_svd: dormqr failed (info={info})")
            U[start : start + m] = out
    return U, s[:K], Vt[:K].T, sum_of_squares
