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


def rule_parts(n_items: int, n_rules: int, rng: np.random.Generator) -> dict[int, tuple[int, int, int, int]]:
    """The routed items: item -> (a, b, c, depth) of its rule over three earlier items."""
    ruled = set(rng.choice(np.arange(3, n_items), size=n_rules, replace=False).tolist())
    out = {}
    for j in range(n_items):
        if j in ruled:
            a, b, c = rng.choice(j, size=3, replace=False)
            out[j] = (int(a), int(b), int(c), int(rng.integers(1, 4)))
    return out


def rules_text(n_items: int, rules: dict[int, tuple[int, int, int, int]]) -> str:
    lines = ["format: 1", "survey: {name: bench, case_id: id}",
             "codes: [{value: -1, reason: na, kind: structural}, {value: -8, reason: dont_know, kind: nonresponse},"
             " {value: -9, reason: refused, kind: nonresponse}]",
             "sections:", "  - name: s", "    items:"]
    for j in range(n_items):
        rule = ""
        if j in rules:
            a, b, c, depth = rules[j]
            parts = [f"q{a} > 3", f"(q{b} in [1, 2, 7] or q{c} != 5)", f"not q{c} == 0"][:depth]
            rule = f", asked_if: '{' and '.join(parts)}'"
        lines.append(f"      - {{name: q{j}, type: integer, range: [0, 9]{rule}}}")
    return "\n".join(lines) + "\n"


def questionnaire_text(n_items: int, n_rules: int, rng: np.random.Generator) -> str:
    return rules_text(n_items, rule_parts(n_items, n_rules, rng))


def make_data(n: int, n_items: int, rng: np.random.Generator) -> pd.DataFrame:
    """Stored values that ignore the routing: about 30% of the cells are routing faults (a worst case)."""
    cols = {"id": np.arange(n)}
    for j in range(n_items):
        x = rng.integers(0, 10, n).astype(np.float64)
        u = rng.random(n)
        x[u < 0.05] = np.nan
        x[(u >= 0.05) & (u < 0.07)] = -9
        x[(u >= 0.07) & (u < 0.08)] = -1
        cols[f"q{j}"] = x
    return pd.DataFrame(cols)


def routed_survey(n: int, n_items: int, n_rules: int, rng: np.random.Generator,
                  flip: float = 0.012) -> tuple[str, pd.DataFrame]:
    """A questionnaire and stored values that follow its routing, with a share of routing faults.

    Each item's universe is walked from the values stored so far (item by item, vectorised over
    the cases): an asked case answers 0-9 (5% don't know or refused, 5% blank); a case routed
    around it is blank (20% of them carry the structural code -1).  Then a share ``flip`` of the
    asked answers become -1 (wrong_code) and the same share of the routed-around cells get an
    answer (off_route); a faulty gate moves later universes too.  The default gives about 3.75 M
    faults (1.9% of the cells) in 1,000,000 x 200, the speed issue's file.  Comparisons with a
    blank are false, as the rule language makes them for a skip.
    """
    rules = rule_parts(n_items, n_rules, rng)
    cols: dict[str, np.ndarray] = {"id": np.arange(n)}
    for j in range(n_items):
        asked = np.ones(n, dtype=bool)
        if j in rules:
            a, b, c, depth = rules[j]
            xa, xb, xc = cols[f"q{a}"], cols[f"q{b}"], cols[f"q{c}"]
            asked = xa > 3
            if depth >= 2:
                asked &= np.isin(xb, [1, 2, 7]) | ((xc != 5) & ~np.isnan(xc))
            if depth >= 3:
                asked &= ~(xc == 0)
        x = rng.integers(0, 10, n).astype(np.float64)
        u = rng.random(n)
        x[u < 0.025] = -8
        x[(u >= 0.025) & (u < 0.05)] = -9
        x[(u >= 0.05) & (u < 0.10)] = np.nan
        off = ~asked
        x[off] = np.where(rng.random(int(off.sum())) < 0.2, -1.0, np.nan)
        flips = rng.random(n) < flip
        x[flips & asked & (x >= 0)] = -1.0                                  # wrong_code
        wrong_route = flips & off
        x[wrong_route] = rng.integers(0, 10, int(wrong_route.sum()))       # off_route
        cols[f"q{j}"] = x
    return rules_text(n_items, rules), pd.DataFrame(cols)


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
