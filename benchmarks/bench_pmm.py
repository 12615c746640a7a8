"""Chained-equation imputation by predictive mean matching, 100,000 x 20, m = 5 (measures only).

Figure: ``chained_impute`` with m = 5 and 10 iterations, the chains in ``--workers`` processes
(default: one per core, as ``bench_impute.py``).  Floor, in the same run: a bare numpy chained
PMM with m = 1 over the same data (least-squares fit per variable on the observed cases, nearest
observed prediction as donor; no parameter draws).  Target: at most 60 s.

Both run with one BLAS thread (the chains always do; the floor is put on the same footing), so
BLAS threads spinning against other processes inflate neither.  Besides wall-clock seconds the
script prints CPU seconds (this process and its worker processes) and the CPU seconds per
imputation against the floor's: on a shared machine the CPU figures are the ones to compare.

    python benchmarks/bench_pmm.py [--cases N] [--m 5] [--workers W]
"""

from __future__ import annotations

import argparse
import os
import resource
import time

import numpy as np
import pandas as pd

from _common import result, scaled
from skipwise.impute.chained import chained_impute
from skipwise.impute.threads import one_blas_thread


def frame(n: int, p: int = 20, share: float = 0.15, seed: int = 2026) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    cov = 0.5 * np.ones((p, p)) + 0.5 * np.eye(p)
    x = rng.multivariate_normal(np.zeros(p), cov, size=n)
    x[rng.random((n, p)) < share] = np.nan
    return pd.DataFrame(x, columns=[f"v{i:02d}" for i in range(p)])


def numpy_pmm(df: pd.DataFrame, iterations: int = 10, seed: int = 1) -> np.ndarray:
    rng = np.random.default_rng(seed)
    x = df.to_numpy(copy=True)
    miss = np.isnan(x)
    for j in range(x.shape[1]):  # start from random observed values
        obs = x[~miss[:, j], j]
        x[miss[:, j], j] = rng.choice(obs, miss[:, j].sum())
    design = np.ones((x.shape[0], x.shape[1]))
    for _ in range(iterations):
        for j in range(x.shape[1]):
            o, m = ~miss[:, j], miss[:, j]
            design[:, 1:] = np.delete(x, j, axis=1)
            beta = np.linalg.lstsq(design[o], x[o, j], rcond=None)[0]
            pred = design @ beta
            order = np.argsort(pred[o])
            donors_pred, donors = pred[o][order], x[o, j][order]
            pos = np.clip(np.searchsorted(donors_pred, pred[m]), 0, len(donors) - 1)
            x[m, j] = donors[pos]
    return x


def _children_cpu() -> float:
    use = resource.getrusage(resource.RUSAGE_CHILDREN)
    return use.ru_utime + use.ru_stime


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--cases", type=int, default=scaled(100_000))
    ap.add_argument("--m", type=int, default=5)
    ap.add_argument("--workers", type=int, default=os.cpu_count() or 1)
    args = ap.parse_args()
    df = frame(args.cases)
    t0, c0 = time.perf_counter(), time.process_time()
    with one_blas_thread():
        numpy_pmm(df)
    floor, floor_cpu = time.perf_counter() - t0, time.process_time() - c0
    t0, c0, k0 = time.perf_counter(), time.process_time(), _children_cpu()
    chained_impute(df, list(df.columns), m=args.m, iterations=10, seed=1, workers=args.workers)
    secs = time.perf_counter() - t0
    cpu = time.process_time() - c0 + _children_cpu() - k0
    per_imp = cpu / args.m
    print(f"chained PMM {args.cases:,} x 20, m = {args.m}, {args.workers} process(es): {secs:.1f} s "
          f"({cpu:.1f} CPU s, {per_imp:.1f} CPU s per imputation); numpy PMM m = 1: {floor:.1f} s "
          f"({floor_cpu:.1f} CPU s)")
    print(f"CPU seconds per imputation / floor CPU seconds: {per_imp / floor_cpu:.2f}x")
    result(f"chained PMM {args.cases:,} x 20, m = {args.m}", f"{secs:.1f} s", f"{floor:.1f} s (m = 1)",
           secs / floor, "<= 60 s", secs <= 60)


if __name__ == "__main__":
    main()
