"""The recoded form written as .dta: skipwise's column preparation + write, beside pyreadstat's plain write.

Figure: ``recoded_copy`` (every non-answer cell replaced by its status's extended missing letter)
plus ``write_survey`` to .dta, on bench_classify's 1,000,000 x 200 file after classification.
Floor, in the same run: ``pyreadstat.write_dta`` of the same recoded frame.  Target: at most 1.3x.
CPU seconds of both are printed too (the figures to compare on a shared machine).  That floor is
handed object columns of floats and ``".a"`` texts, which pyreadstat writes as text columns: a
slower write than the numeric one with extended missing values that ``write_survey`` makes.

    python benchmarks/bench_recoded_dta.py [--cases N]
"""

from __future__ import annotations

import argparse
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np
import pyreadstat

from _common import cpu_of, result, scaled
from bench_classify import make_data, questionnaire_text
from skipwise.classify import classify
from skipwise.classify.export import recoded_copy
from skipwise.io import write_survey
from skipwise.questionnaire import loads_questionnaire


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--cases", type=int, default=scaled(1_000_000))
    args = ap.parse_args()
    rng = np.random.default_rng(1)
    q = loads_questionnaire(questionnaire_text(200, 100, rng))
    data = make_data(args.cases, 200, rng)
    cl = classify(data, q)
    with tempfile.TemporaryDirectory() as tmp, warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t0, c0 = time.perf_counter(), time.process_time()
        out, meta = recoded_copy(data, cl, "dta")
        prep, prep_cpu = time.perf_counter() - t0, time.process_time() - c0
        write_survey(out, Path(tmp) / "out.dta", meta, overwrite=True)
        secs, cpu = time.perf_counter() - t0, time.process_time() - c0
        floor, floor_cpu, _ = cpu_of(lambda: pyreadstat.write_dta(out, str(Path(tmp) / "floor.dta")))
    print(f"recoded .dta: {secs:.1f} s (recoding {prep:.1f} s); plain pyreadstat write_dta {floor:.1f} s")
    print(f"CPU seconds : {cpu:.1f} s (recoding {prep_cpu:.1f} s); write_dta {floor_cpu:.1f} s "
          f"({cpu / max(floor_cpu, 1e-9):.2f}x; on a busy machine compare these)")
    result(f"recoded form -> .dta {args.cases:,} x 200", f"{secs:.1f} s", f"{floor:.1f} s", secs / floor,
           "<= 1.3x", secs <= 1.3 * floor)


if __name__ == "__main__":
    main()
