"""Time Little's MCAR test on 100,000 cases x 20 variables with up to 500 patterns.

Prints figures; not a test.  Target: at most 10 s.  Data are invented (simulated).
Run: .venv/bin/python benchmarks/bench_little.py
"""

from __future__ import annotations

import time

import numpy as np
import pandas as pd

from skipwise.diagnostics import little_mcar_test


def make(n: int = 100_000, p: int = 20, n_patterns: int = 500, seed: int = 2) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    a = rng.normal(size=(p, p)) * 0.3 + np.eye(p)
    y = rng.normal(size=(n, p)) @ a
    cand = np.vstack([np.zeros((1, p), bool), rng.random((20 * n_patterns, p)) < 0.15])
    cand = cand[cand.sum(axis=1) < p]
    _, first = np.unique(cand, axis=0, return_index=True)
    pats = cand[np.sort(first)[:n_patterns]]  # distinct patterns, the complete one first
    y[pats[rng.integers(0, n_patterns, n)]] = np.nan
    return pd.DataFrame(y, columns=[f"v{k:02d}" for k in range(p)])


def main() -> None:
    frame = make()
    t0 = time.perf_counter()
    res = little_mcar_test(frame)
    secs = time.perf_counter() - t0
    print(f"cases={res.n_cases:,} variables={res.n_variables} patterns={res.n_patterns} "
          f"EM iterations={res.iterations} converged={res.converged}")
    print(f"d2={res.statistic:.2f} df={res.df} p={res.p_value:.4f}")
    print(f"seconds={secs:.2f} (target <= 10)")


if __name__ == "__main__":
    main()
