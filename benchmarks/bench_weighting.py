"""Print timings of raking and of jackknife replicates of the whole weighting chain.

Targets: raking 1,000,000 cases on 4 margins (60 categories) to a margin error
<= 1e-6 of the total in <= 2 s; 200 jackknife replicates of the whole chain on
20,000 cases in <= 60 s.  Data are invented.
"""

from __future__ import annotations

import time

import numpy as np
import pandas as pd

from skipwise.weighting.calibrate import rake, rake_weights
from skipwise.weighting.margins import encode_margins, max_margin_error
from skipwise.weighting.plan import load_plan
from skipwise.weighting.pipeline import prepare, run_chain
from skipwise.weighting.replicates import jackknife_design, run_replicates


def bench_rake(n: int = 1_000_000, sizes: tuple[int, ...] = (10, 15, 15, 20), seed: int = 1) -> None:
    rng = np.random.default_rng(seed)
    # correlated margins (each driven by a common latent score) make raking need real cycles
    latent = rng.normal(size=n)
    data = pd.DataFrame({f"m{j}": np.clip(((latent + rng.normal(scale=0.8, size=n)) * k / 5 + k / 2).astype(int),
                                          0, k - 1) for j, k in enumerate(sizes)})
    data["d"] = rng.uniform(0.5, 3.0, n)
    total = 5_000_000.0
    margins = {}
    for j, k in enumerate(sizes):
        share = rng.dirichlet(np.full(k, 5.0))
        margins[f"m{j}"] = {c: float(total * share[c]) for c in range(k)}
    t0 = time.perf_counter()
    w = rake(data, margins, weight="d", tol=1e-6)
    elapsed = time.perf_counter() - t0
    enc = encode_margins(data, margins)
    err = max_margin_error(w.to_numpy(), enc)
    t1 = time.perf_counter()
    _, it = rake_weights(data["d"].to_numpy(), enc, tol=1e-6)
    core = time.perf_counter() - t1
    print(f"rake: {n:,} cases, {len(sizes)} margins, {sum(sizes)} categories: {elapsed:.2f} s "
          f"(solver alone {core:.2f} s, {it} cycles), max margin error {err:.2e} of the total "
          f"[target <= 2 s, <= 1e-6]")


PLAN = """\
format: 1
dispositions:
  column: dispo
  categories: {I: [1], P: [2], R: [3], NC: [4], UH: [5], NE: [6], O: [7], UO: [8]}
base: {probability: p}
eligibility: {classes: [region]}
nonresponse: {method: classes, classes: [region, age], min_respondents: 20, max_factor: 3.0}
calibration:
  method: rake
  margins:
    region: {0: 40000, 1: 30000, 2: 20000, 3: 10000}
    age: {0: 25000, 1: 25000, 2: 25000, 3: 25000}
    sex: {0: 52000, 1: 48000}
trimming: {median_multiple: 3.5}
replicates: {method: jackknife, psu: psu, strata: stratum}
"""


def bench_replicates(n: int = 20_000, n_psu: int = 200, seed: int = 2) -> None:
    rng = np.random.default_rng(seed)
    psu = rng.integers(0, n_psu, n)
    frame = pd.DataFrame({
        "dispo": rng.choice([1, 2, 3, 4, 5, 6, 7, 8], n, p=[0.5, 0.05, 0.15, 0.1, 0.05, 0.1, 0.03, 0.02]),
        "p": rng.uniform(0.05, 0.2, n), "region": rng.integers(0, 4, n), "age": rng.integers(0, 4, n),
        "sex": rng.integers(0, 2, n), "psu": psu % (n_psu // 2), "stratum": psu // (n_psu // 2),
    })
    plan = load_plan(text=PLAN)
    prep = prepare(frame, plan)
    full = run_chain(prep, prep.base)
    design = jackknife_design(frame, "psu", "stratum")
    t0 = time.perf_counter()
    reps = run_replicates(prep, design, structure=full.structure)
    elapsed = time.perf_counter() - t0
    print(f"jackknife: {design.count} replicates ({design.method}) of the whole chain on {n:,} cases: "
          f"{elapsed:.2f} s, {elapsed / design.count * 1000:.1f} ms each [target <= 60 s]; "
          f"replicate weight sums {reps.sum(axis=0).min():,.1f}..{reps.sum(axis=0).max():,.1f}")


if __name__ == "__main__":
    bench_rake()
    bench_replicates()
