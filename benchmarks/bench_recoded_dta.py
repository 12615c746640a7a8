"""The recoded form written as .dta: skipwise's column preparation + write, beside pyreadstat's plain write.

Figure: ``recoded_copy`` (every non-answer cell replaced by its status's extended missing letter)
plus ``write_survey`` to .dta, on bench_classify's 1,000,000 x 200 file after classification.
Floor, in the same run: ``pyreadstat.write_dta`` of the same recoded frame.  Target: at most 1.3x.

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

from _common import result, scaled
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
        t0 = time.perf_counter()
        out, meta = recoded_copy(data, cl, "dta")
        prep = time.perf_counter() - t0
        write_survey(out, Path(tmp) / "out.dta", meta, overwrite=True)
        secs = time.perf_counter() - t0
        t0 = time.perf_counter()
        pyreadstat.write_dta(out, str(Path(tmp) / "floor.dta"))
        floor = time.perf_counter() - t0
    print(f"recoded .dta: {secs:.1f} s (recoding {prep:.1f} s); plain pyreadstat write_dta {floor:.1f} s")
    result(f"recoded form -> .dta {args.cases:,} x 200", f"{secs:.1f} s", f"{floor:.1f} s", secs / floor,
           "<= 1.3x", secs <= 1.3 * floor)


if __name__ == "__main__":
    main()
