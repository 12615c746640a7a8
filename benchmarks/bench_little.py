"""Little's MCAR test on 100,000 cases x 20 variables with 500 patterns, beside a one-pass floor.

Figure: ``little_mcar_test`` (best of SKIPWISE_BENCH_REPEAT).  Floor: one pass over the data that
finds the patterns and their means (what any implementation must read).  Target: at most 1 s, and
the statistic within 1e-6 (relative) of the reference recorded before the EM was accelerated:
d2 = 8139.038591180677 at scale 1 (plain EM, 585 iterations, tolerance 1e-9; EM's fixed point, at
tolerance 1e-13, is 8139.03870706).  Data are invented (simulated).

    python benchmarks/bench_little.py
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from _common import SCALE, best_of, cpu_of, result, scaled
from skipwise.diagnostics import little_mcar_test

REFERENCE_D2 = 8139.038591180677  # recorded at scale 1 before the acceleration


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


def one_pass(frame: pd.DataFrame) -> None:
    y = frame.to_numpy()
    obs = ~np.isnan(y)
    code = obs @ (1 << np.arange(y.shape[1]))
    _, inverse = np.unique(code, return_inverse=True)
    np.add.at(np.zeros((inverse.max() + 1, y.shape[1])), inverse, np.where(obs, y, 0.0))


def main() -> None:
    frame = make(n=scaled(100_000))
    floor, _ = best_of(lambda: one_pass(frame))
    secs, res = best_of(lambda: little_mcar_test(frame))
    _, cpu, _ = cpu_of(lambda: little_mcar_test(frame))
    print(f"cases={res.n_cases:,} variables={res.n_variables} patterns={res.n_patterns} "
          f"EM steps={res.iterations} converged={res.converged}")
    print(f"d2={res.statistic:.6f} df={res.df} p={res.p_value:.4f}")
    print(f"seconds={secs:.2f} floor (one data pass)={floor:.3f} ratio={secs / floor:.1f}x (target <= 1 s); CPU {cpu:.2f} s")
    close = True
    if SCALE == 1:
        rel = abs(res.statistic - REFERENCE_D2) / REFERENCE_D2
        close = rel <= 1e-6
        print(f"d2 against the recorded reference: relative difference {rel:.1e} (target <= 1e-6)")
    result(f"Little's test {res.n_cases:,} x {res.n_variables}, {res.n_patterns} patterns", f"{secs:.2f} s",
           f"{floor:.3f} s", secs / floor, "<= 1 s, d2 within 1e-6", secs <= 1.0 and close)


if __name__ == "__main__":
    main()
