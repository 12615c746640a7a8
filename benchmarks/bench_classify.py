"""Classification speed and memory on a large generated file (prints figures; not a test).

Targets: 1,000,000 cases x 200 items with 100 rules (depth up to 3) classified at
20 million cells per second or more on one core, peak memory at most 2x the input
frame's in-memory size.  Also prints the time pyreadstat takes to read the same data
from .sav, and the ratio of classification time to that read time.

    python benchmarks/bench_classify.py [--cases 1000000] [--items 200] [--no-sav]
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time
import tracemalloc

import numpy as np
import pandas as pd

from skipwise.classify import classify
from skipwise.questionnaire import loads_questionnaire


def questionnaire_text(n_items: int, n_rules: int, rng: np.random.Generator) -> str:
    lines = ["format: 1", "survey: {name: bench, case_id: id}",
             "codes: [{value: -1, reason: na, kind: structural}, {value: -8, reason: dont_know, kind: nonresponse},"
             " {value: -9, reason: refused, kind: nonresponse}]",
             "sections:", "  - name: s", "    items:"]
    ruled = set(rng.choice(np.arange(3, n_items), size=n_rules, replace=False).tolist())
    for j in range(n_items):
        rule = ""
        if j in ruled:
            a, b, c = rng.choice(j, size=3, replace=False)
            depth = rng.integers(1, 4)
            parts = [f"q{a} > 3", f"(q{b} in [1, 2, 7] or q{c} != 5)", f"not q{c} == 0"][:depth]
            rule = f", asked_if: '{' and '.join(parts)}'"
        lines.append(f"      - {{name: q{j}, type: integer, range: [0, 9]{rule}}}")
    return "\n".join(lines) + "\n"


def make_data(n: int, n_items: int, rng: np.random.Generator) -> pd.DataFrame:
    cols = {"id": np.arange(n)}
    for j in range(n_items):
        x = rng.integers(0, 10, n).astype(np.float64)
        u = rng.random(n)
        x[u < 0.05] = np.nan
        x[(u >= 0.05) & (u < 0.07)] = -9
        x[(u >= 0.07) & (u < 0.08)] = -1
        cols[f"q{j}"] = x
    return pd.DataFrame(cols)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--cases", type=int, default=1_000_000)
    ap.add_argument("--items", type=int, default=200)
    ap.add_argument("--rules", type=int, default=100)
    ap.add_argument("--no-sav", action="store_true", help="skip the .sav read comparison")
    args = ap.parse_args()
    rng = np.random.default_rng(1)
    q = loads_questionnaire(questionnaire_text(args.items, args.rules, rng))
    data = make_data(args.cases, args.items, rng)
    input_mb = data.memory_usage(deep=True).sum() / 2**20
    t0 = time.perf_counter()
    cl = classify(data, q)
    t_classify = time.perf_counter() - t0
    del cl
    # A second run under tracemalloc (numpy reports its buffers to it) gives the peak of the
    # memory classification allocates beyond the input frame.
    tracemalloc.start()
    cl = classify(data, q)
    _ = cl.counts()
    extra_mb = tracemalloc.get_traced_memory()[1] / 2**20
    tracemalloc.stop()
    cells = args.cases * args.items
    print(f"cases x items            : {args.cases:,} x {args.items} ({args.rules} rules, depth <= 3)")
    print(f"classification time      : {t_classify:.2f} s")
    print(f"cells per second         : {cells / t_classify / 1e6:.1f} million (target >= 20)")
    print(f"input frame in memory    : {input_mb:,.0f} MB")
    print(f"peak extra memory        : {extra_mb:,.0f} MB while classifying")
    print(f"peak total / input       : {(input_mb + extra_mb) / input_mb:.2f}x (target <= 2x)")
    if not args.no_sav:
        import pyreadstat

        with tempfile.TemporaryDirectory() as tmp:
            path = os.path.join(tmp, "bench.sav")
            t0 = time.perf_counter()
            pyreadstat.write_sav(data, path)
            t_write = time.perf_counter() - t0
            t0 = time.perf_counter()
            pyreadstat.read_sav(path, user_missing=True)
            t_read = time.perf_counter() - t0
        print(f".sav write (pyreadstat)  : {t_write:.2f} s")
        print(f".sav read (pyreadstat)   : {t_read:.2f} s")
        print(f"classify / read ratio    : {t_classify / t_read:.2f}")


if __name__ == "__main__":
    main()
