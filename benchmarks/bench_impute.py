"""Print timings of the imputation methods against their targets (not a test).

Targets: 5 imputations by chained equations (PMM, 10 iterations) of 100,000 cases x 20 items in
<= 60 s on a 2-core machine (the chains run in parallel processes, one per core); 20 imputations
of 20,000 cases x 15 items in <= 120 s; hot-deck within classes of 1,000,000 cases x 20 items in
<= 30 s.  The chained runs also print CPU seconds (this process and its workers): on a shared
machine those are the figures to compare.
Run: .venv/bin/python benchmarks/bench_impute.py [--chained-only]
"""

from __future__ import annotations

import os
import resource
import sys
import time

import numpy as np
import pandas as pd

from skipwise.impute.hotdeck import hotdeck
from skipwise.impute.chained import chained_impute


def _normal_frame(rng: np.random.Generator, n: int, p: int, share: float) -> pd.DataFrame:
    cov = 0.5 * np.ones((p, p)) + 0.5 * np.eye(p)
    x = rng.multivariate_normal(np.zeros(p), cov, size=n)
    x[rng.random((n, p)) < share] = np.nan
    return pd.DataFrame(x, columns=[f"v{i:02d}" for i in range(p)])


def _cpu() -> float:
    use = resource.getrusage(resource.RUSAGE_CHILDREN)
    return time.process_time() + use.ru_utime + use.ru_stime


def _chained(rng: np.random.Generator, n: int, p: int, m: int, target: float, workers: int) -> None:
    df = _normal_frame(rng, n, p, 0.15)
    t, c = time.perf_counter(), _cpu()
    chained_impute(df, list(df.columns), m=m, iterations=10, seed=1, workers=workers)
    wall, cpu = time.perf_counter() - t, _cpu() - c
    print(f"chained equations (pmm), {m} imputations x 10 iterations, {n:,} x {p}, {workers} process(es): "
          f"{wall:6.1f} s, {cpu:.1f} CPU s (target {target:.0f} s)")


def main() -> None:
    rng = np.random.default_rng(2026)
    workers = os.cpu_count() or 1
    _chained(rng, 100_000, 20, 5, 60, workers)
    _chained(np.random.default_rng(2027), 20_000, 15, 20, 120, workers)   # own data: rng stays as before
    if "--chained-only" in sys.argv:
        return

    big = _normal_frame(rng, 1_000_000, 20, 0.10)
    big["region"] = rng.integers(0, 12, len(big))
    big["agegrp"] = rng.integers(0, 6, len(big))
    big["wt"] = rng.uniform(0.5, 3.0, len(big))
    items = [c for c in big.columns if c.startswith("v")]
    for label, kw in [("random donor", {}), ("weighted donor", {"weights": "wt"}),
                      ("random donor, limit 3", {"max_donor_use": 3})]:
        t = time.perf_counter()
        hotdeck(big, items, classes=["region", "agegrp"], seed=1, **kw)
        print(f"hot-deck ({label}) within 72 classes, 1,000,000 x 20: "
              f"{time.perf_counter() - t:6.1f} s (target 30 s)")
    t = time.perf_counter()
    hotdeck(big, items[:5], classes=["region"], covariates=["wt"], k=5, seed=1)
    print(f"nearest-neighbour hot-deck, 1,000,000 x 5 items: {time.perf_counter() - t:6.1f} s")


if __name__ == "__main__":
    main()
