"""Time the exhaustive principal-balance search against a naive baseline of the same run.

The baseline scores candidate bipartitions one at a time, computing each
balance over all rows and taking ``np.var`` (what a straightforward loop over
``itertools.combinations`` does); its per-candidate cost is measured on a
sample and scaled to the full count. The search scores whole chunks of
candidates with ``v' C v`` matrix products.

Run: ``.venv/bin/python benchmarks/principal_balances.py``
"""

from __future__ import annotations

import time

import numpy as np

from compwidgets.core.principal import principal_balances


def invented_data(n: int, D: int, seed: int = 0) -> np.ndarray:
    rng = np.random.default_rng(seed)
    logx = rng.normal(size=(n, 3)) @ rng.normal(size=(3, D)) + 0.3 * rng.normal(size=(n, D))
    return np.exp(logx)


def naive_seconds_per_candidate(X: np.ndarray, samples: int = 300) -> float:
    logx = np.log(X)
    D = X.shape[1]
    rng = np.random.default_rng(1)
    start = time.perf_counter()
    for _ in range(samples):
        plus = rng.random(D) < 0.5
        plus[0], plus[-1] = True, False
        r, s = plus.sum(), (~plus).sum()
        b = np.sqrt(r * s / (r + s)) * (logx[:, plus].mean(axis=1) - logx[:, ~plus].mean(axis=1))
        np.var(b, ddof=1)
    return (time.perf_counter() - start) / samples


def main() -> None:
    n = 2000
    print(f"rows: {n}")
    print(
        f"{'parts':>5} {'candidates(root)':>17} {'search s':>9} {'naive est. s':>13} {'ratio':>7}"
    )
    for D in (12, 16, 20):
        X = invented_data(n, D)
        t0 = time.perf_counter()
        principal_balances(X, max_exhaustive=max(16, D))
        search = time.perf_counter() - t0
        # every group of m >= 2 parts is searched exhaustively: sum of 2**(m-1) - 1
        # over the groups; the root dominates. Use the root count for the baseline.
        root = 2 ** (D - 1) - 1
        naive = naive_seconds_per_candidate(X) * root
        print(f"{D:>5} {root:>17,} {search:>9.3f} {naive:>13.2f} {naive / search:>7.0f}x")
    X = invented_data(n, 40)
    t0 = time.perf_counter()
    principal_balances(X)  # 40 parts: heuristic above 16 parts per group
    print(f"40 parts, heuristic above 16 per group: {time.perf_counter() - t0:.3f} s")


if __name__ == "__main__":
    main()
