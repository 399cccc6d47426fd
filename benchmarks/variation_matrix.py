"""Time and precision of ``core.variation_matrix`` on a wide, long table.

Baseline, measured in the same run: the one-line formula
``d_i + d_j - 2 C_ij`` from ``numpy.cov`` of the logs (fast, but it loses the
small entries of parts in nearly constant proportion). The table is invented:
200 parts whose logs share a few factors, with three pairs of parts in nearly
constant ratio (log-ratio standard deviations 1e-7, 1e-4 and 1e-2).

Precision is measured against the direct variance of each log-ratio
(``numpy.var(log(x_i / x_j), ddof=1)``) on the three near-constant pairs and
on 200 random pairs.

Run: ``.venv/bin/python benchmarks/variation_matrix.py [rows] [parts]``
(default 1,000,000 rows and 200 parts; about 1.6 GB per copy of the table).
"""

from __future__ import annotations

import sys
import time

import numpy as np

from compwidgets import core

NEAR_CONSTANT_SD = (1e-7, 1e-4, 1e-2)


def invented_table(n: int, D: int, seed: int = 0) -> np.ndarray:
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 4)) @ rng.normal(size=(4, D))
    X += 0.3 * rng.normal(size=(n, D))
    for k, sd in enumerate(NEAR_CONSTANT_SD):  # part 2k+1 follows part 2k closely
        X[:, 2 * k + 1] = X[:, 2 * k] + 0.5 + sd * rng.normal(size=n)
    return np.exp(X, out=X)


def direct(X: np.ndarray, i: int, j: int) -> float:
    return float(np.var(np.log(X[:, i] / X[:, j]), ddof=1))


def main(n: int = 1_000_000, D: int = 200) -> None:
    X = invented_table(n, D)
    print(f"table: {n:,} rows x {D} parts (invented)")

    start = time.perf_counter()
    C = np.cov(np.log(X), rowvar=False)
    d = np.diag(C)
    baseline = d[:, None] + d[None, :] - 2 * C
    t_base = time.perf_counter() - start

    start = time.perf_counter()
    T = core.variation_matrix(X)
    t_new = time.perf_counter() - start
    print(f"baseline (numpy.cov formula): {t_base:.2f} s")
    print(f"core.variation_matrix:        {t_new:.2f} s  (ratio {t_new / t_base:.2f})")

    rng = np.random.default_rng(1)
    pairs = [(2 * k, 2 * k + 1) for k in range(len(NEAR_CONSTANT_SD))]
    pairs += [tuple(rng.choice(D, 2, replace=False)) for _ in range(200)]
    worst_new = worst_base = 0.0
    for i, j in pairs:
        ref = direct(X, i, j)
        worst_new = max(worst_new, abs(T[i, j] - ref) / ref)
        worst_base = max(worst_base, abs(baseline[i, j] - ref) / ref)
    for k, sd in enumerate(NEAR_CONSTANT_SD):
        i, j = pairs[k]
        ref = direct(X, i, j)
        print(
            f"pair sd {sd:g}: direct {ref:.6e}  variation_matrix {T[i, j]:.6e}  "
            f"baseline {baseline[i, j]:.6e}"
        )
    print(
        f"largest relative error vs direct: variation_matrix {worst_new:.1e}, "
        f"baseline {worst_base:.1e}"
    )


if __name__ == "__main__":
    args = [int(a) for a in sys.argv[1:3]]
    main(*args)
