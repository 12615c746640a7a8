"""The recoded form written as .dta: skipwise's column preparation + write, beside pyreadstat's plain write.

Figure: ``recoded_copy`` (every non-answer cell replaced by its status's extended missing letter)
plus ``write_survey`` to .dta, on bench_classify's 1,000,000 x 200 file after classification.
Target: at most 1.3x the floor.  CPU seconds of both are printed too (the figures to compare on a
shared machine).

Floor, in the same run: ``pyreadstat.write_dta`` of the same recoded frame written as the same
file: numeric columns whose gaps are extended missing values, each column declaring to pyreadstat
(``missing_user_values``) the letters it holds, with the bare letters pyreadstat takes (``"a"``
for ``".a"``).  That frame is made before the clock starts, and the floor writes no labels (they
cost nothing per cell).  Until 2026-12-03 the floor was ``write_dta(out)`` of the recoded frame
without any declaration: pyreadstat then wrote every item as a *text* column ("3.0", ".a"), a
different file with a different cost per cell (slower than the numeric write at 1M rows, faster
at small sizes), so the ratio did not say what skipwise adds to pyreadstat.  Since then skipwise
hands pyreadstat each recoded float column as a categorical (the distinct numbers, then the
letters), which pyreadstat writes faster than the object column of the floor: the same bytes
(tests/test_writer_columns.py), so a ratio below 1 is possible.

    python benchmarks/bench_recoded_dta.py [--cases N]
"""

from __future__ import annotations

import argparse
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pyreadstat

from _common import cpu_of, result, scaled
from bench_classify import make_data, questionnaire_text
from skipwise.classify import classify
from skipwise.classify.export import recoded_copy
from skipwise.io import write_survey
from skipwise.questionnaire import loads_questionnaire


def pyreadstat_form(out: pd.DataFrame) -> tuple[pd.DataFrame, dict[str, list[str]]]:
    """The recoded frame as pyreadstat writes it: bare letters, and the letters each column holds.

    The cells are object arrays (numbers and bare letters); a categorical column of the recoded
    frame is stripped in its categories and then expanded, so no Python code runs per cell.
    """
    columns, letters = {}, {}
    for col in out.columns:
        values = out[col]
        codes = None
        if isinstance(values.dtype, pd.CategoricalDtype):
            cells = np.append(np.array(values.cat.categories, dtype=object), np.nan)
            codes = values.cat.codes.to_numpy()            # -1 (a gap) takes the appended NaN
        else:
            cells = values.to_numpy()
        if cells.dtype == object:
            is_letter = np.fromiter(map(type, cells), dtype=object, count=len(cells)) == str
            if is_letter.any():
                cells = cells.copy()
                cells[is_letter] = [v[1:] for v in cells[is_letter]]
                used = np.zeros(len(cells), dtype=bool)
                used[np.unique(codes) if codes is not None else slice(None)] = True
                letters[col] = sorted(set(cells[is_letter & used]))
        columns[col] = cells if codes is None else cells[codes]
    return pd.DataFrame(columns, copy=False), letters


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
        plain, letters = pyreadstat_form(out)
        del out
        floor, floor_cpu, _ = cpu_of(lambda: pyreadstat.write_dta(plain, str(Path(tmp) / "floor.dta"),
                                                                 missing_user_values=letters))
    print(f"recoded .dta: {secs:.1f} s (recoding {prep:.1f} s); pyreadstat write_dta of the same cells {floor:.1f} s")
    print(f"CPU seconds : {cpu:.1f} s (recoding {prep_cpu:.1f} s); write_dta {floor_cpu:.1f} s "
          f"({cpu / max(floor_cpu, 1e-9):.2f}x; on a busy machine compare these)")
    result(f"recoded form -> .dta {args.cases:,} x 200", f"{secs:.1f} s", f"{floor:.1f} s", secs / floor,
           "<= 1.3x", secs <= 1.3 * floor)


if __name__ == "__main__":
    main()
