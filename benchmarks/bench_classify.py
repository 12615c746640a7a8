"""Classification speed on a large generated file, beside a numpy floor measured in the same run.

Figure: the ``classify`` API on 1,000,000 cases x 200 items with 100 rules (depth up to 3), in
cells per second (best of SKIPWISE_BENCH_REPEAT; ``jobs`` default: every core).  Floor: one numpy
pass of three comparisons over the same columns (the least any per-cell classification can read).
Target: >= 100 million cells/s, or at most 10x the floor.  Also prints the memory classification
allocates (tracemalloc) beside the input frame.

    python benchmarks/bench_classify.py [--cases N] [--items 200] [--rules 100] [--jobs J]
"""

from __future__ import annotations

import argparse
import tracemalloc
from typing import Callable

import numpy as np
import pandas as pd

from _common import REPEAT, best_of, cpu_of, result, scaled
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


def numpy_floor(data: pd.DataFrame, columns: list[str]) -> float:
    """Seconds of one pass of three comparisons per cell, into a preallocated result (best wall)."""
    return _floor_run(data, columns)[0]


def numpy_floor_cpu(data: pd.DataFrame, columns: list[str]) -> tuple[float, float]:
    """Best wall seconds and the CPU seconds of one more run of the floor."""
    best, run = _floor_run(data, columns)
    return best, cpu_of(run)[1]


def _floor_run(data: pd.DataFrame, columns: list[str]) -> tuple[float, Callable[[], None]]:
    arrays = [data[c].to_numpy() for c in columns]
    out = np.empty((len(data), len(columns)), dtype=bool, order="F")

    def run() -> None:
        for j, x in enumerate(arrays):
            o = out[:, j]
            np.greater(x, 3, out=o)
            o &= x != 5
            o |= x == 0

    return best_of(run)[0], run


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--cases", type=int, default=scaled(1_000_000))
    ap.add_argument("--items", type=int, default=200)
    ap.add_argument("--rules", type=int, default=100)
    ap.add_argument("--jobs", type=int, default=None)
    args = ap.parse_args()
    rng = np.random.default_rng(1)
    q = loads_questionnaire(questionnaire_text(args.items, args.rules, rng))
    data = make_data(args.cases, args.items, rng)
    input_mb = data.memory_usage(deep=True).sum() / 2**20
    cells = args.cases * args.items
    floor, floor_cpu = numpy_floor_cpu(data, q.item_names)
    secs, cl = best_of(lambda: classify(data, q, jobs=args.jobs))
    del cl
    wall1, cpu1, _ = cpu_of(lambda: classify(data, q, jobs=1))
    tracemalloc.start()
    classify(data, q, jobs=args.jobs)
    extra_mb = tracemalloc.get_traced_memory()[1] / 2**20
    tracemalloc.stop()
    rate = cells / secs / 1e6
    print(f"cases x items        : {args.cases:,} x {args.items} ({args.rules} rules, depth <= 3)")
    print(f"classify             : {secs:.2f} s (best of {REPEAT}) = {rate:.0f} M cells/s")
    print(f"one thread           : {wall1:.2f} s wall, {cpu1:.2f} s CPU = {cells / cpu1 / 1e6:.0f} M cells per CPU second")
    print(f"floor (numpy 3 cmp)  : {floor:.2f} s wall, {floor_cpu:.2f} s CPU")
    print(f"ratio to the floor   : {secs / floor:.1f}x wall; one thread {cpu1 / floor_cpu:.1f}x in CPU seconds "
          f"(on a busy machine the CPU ratio is the one to compare)")
    print(f"memory added         : {extra_mb:,.0f} MB beside the {input_mb:,.0f} MB frame "
          f"({(input_mb + extra_mb) / input_mb:.2f}x)")
    result(f"classify API {args.cases:,} x {args.items}, {args.rules} rules", f"{secs:.2f} s = {rate:.0f} M cells/s",
           f"{floor:.2f} s", secs / floor, ">= 100 M cells/s or <= 10x floor",
           rate >= 100 or secs <= 10 * floor)


if __name__ == "__main__":
    main()
