"""Speed of the routing-fault listing (``Classification.faults``), long and wide.

Long: the faults of 1,000,000 x 200 files in faults per second, target >= 2 million/s, on two
files: bench_classify's routed survey (stored values that follow the routing, about 3.7 M faults:
the speed issue's file) and its worst case (values that ignore the routing: 60 M faults, 30% of
the cells).  Wide: 5,000 items x 40 cases, classify and list the faults; the
listing reads only the columns a rule needs, so it must take seconds (target <= 10 s).
There is no floor for the listing; the ratio column shows figure / target.

    python benchmarks/bench_faults.py [--cases N]
"""

from __future__ import annotations

import argparse
import time

import numpy as np
import pandas as pd

from _common import cpu_of, result, scaled
from bench_classify import make_data, questionnaire_text, routed_survey
from skipwise.classify import classify
from skipwise.questionnaire import loads_questionnaire


def wide(n_items: int = 5000, n: int = 40) -> tuple[float, int]:
    lines = ["format: 1", "survey: {name: wide, case_id: id}", "sections:", "  - name: s", "    items:"]
    for j in range(n_items):
        rule = f", asked_if: 'w{j - 1} == 1'" if j % 2 else ""
        lines.append(f"      - {{name: w{j}, type: integer, range: [0, 3]{rule}}}")
    q = loads_questionnaire("\n".join(lines) + "\n")
    values = np.random.default_rng(5).integers(0, 3, size=(n, n_items)).astype(float)
    frame = pd.concat([pd.DataFrame({"id": np.arange(n)}),
                       pd.DataFrame(values, columns=[f"w{j}" for j in range(n_items)])], axis=1)
    t0 = time.perf_counter()
    faults = classify(frame, q).faults
    return time.perf_counter() - t0, len(faults)


def long(name: str, cl) -> None:
    secs, cpu, faults = cpu_of(lambda: cl.faults)
    rate = len(faults) / secs / 1e6
    print(f"long: {len(faults):,} faults of {name} listed in {secs:.2f} s = {rate:.2f} M faults/s "
          f"({len(faults) / cpu / 1e6:.2f} M per CPU second)")
    result(f"faults listing {name} ({len(faults):,} faults)", f"{secs:.1f} s = {rate:.2f} M/s", "-",
           2.0 / rate, ">= 2 M faults/s", rate >= 2.0)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--cases", type=int, default=scaled(1_000_000))
    args = ap.parse_args()
    text, routed = routed_survey(args.cases, 200, 100, np.random.default_rng(1))
    long(f"{args.cases:,} x 200, routed", classify(routed, loads_questionnaire(text)))
    del routed
    rng = np.random.default_rng(1)
    q = loads_questionnaire(questionnaire_text(200, 100, rng))
    long(f"{args.cases:,} x 200, worst case", classify(make_data(args.cases, 200, rng), q))
    w_secs, w_faults = wide()
    print(f"wide: 5,000 items x 40 cases classified and {w_faults:,} faults listed in {w_secs:.2f} s")
    result("classify + faults, 5,000 items x 40 cases", f"{w_secs:.2f} s", "-", w_secs / 10, "<= 10 s",
           w_secs <= 10)


if __name__ == "__main__":
    main()
