"""SPSS ``.sav`` / ``.zsav`` writing: labels, measure, formats and user-missing values."""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pandas as pd

from skipwise.errors import Problem, SkipwiseError
from skipwise.io.meta import SurveyMeta, normalize_value
from skipwise.io.writers_common import (
    EXT_LETTER, SPSS_DATE_FORMAT, SPSS_DATETIME_FORMAT, Job, Prepared, check_names, note, prepare_columns,
    problem,
)

__all__ = ["prepare_sav"]

_SPSS_NUM_FORMAT = re.compile(r"(F|N|COMMA|DOT|DOLLAR|PCT|E)\d+(\.\d+)?")
_SPSS_MEASURES = {"nominal", "ordinal", "scale"}


def _spss_missing(col: str, p: Prepared, meta: SurveyMeta, path: Path, problems: list[Problem]) -> list | None:
    """User-missing declaration for one SPSS variable, within SPSS's limits.

    SPSS allows up to three discrete values, or one range, or one range plus one
    discrete value; text variables take up to three discrete values of at most
    eight bytes [memory: SPSS Command Syntax Reference, MISSING VALUES].
    """
    discrete = list(dict.fromkeys(normalize_value(v) for v in meta.missing_values.get(col, [])))
    ranges = [(float(lo), float(hi)) for lo, hi in meta.missing_ranges.get(col, [])]
    if not discrete and not ranges:
        return None
    kind = p.kinds[col]
    letters = [v for v in discrete if isinstance(v, str) and EXT_LETTER.fullmatch(v)]
    if kind != "text" and letters:
        note("Stata/SAS missing letters have no SPSS equivalent and were not declared as missing", col)
        discrete = [v for v in discrete if v not in letters]
    if kind == "text":
        bad = [v for v in discrete if not isinstance(v, str) or len(v.encode("utf-8")) > 8]
        if ranges or bad or len(discrete) > 3:
            problems.append(problem(path, "SPSS text variables take at most 3 user-missing values, each a "
                                          f"text of at most 8 bytes (got {discrete + ranges})", item=col,
                                    hint="shorten or drop some missing-value declarations"))
            return None
        return discrete
    if kind not in ("number",):
        problems.append(problem(path, f"user-missing values on a {kind} column cannot be stored", item=col,
                                hint="drop them from the metadata"))
        return None
    bad = [v for v in discrete if isinstance(v, (str, bool)) or not isinstance(v, (int, float))]
    if bad:
        problems.append(problem(path, f"user-missing values {bad} are not numbers", item=col,
                                hint="numeric variables take numeric missing codes only"))
        return None

    def in_ranges(v: float) -> bool:
        return any(lo <= v <= hi for lo, hi in ranges)

    discrete = [v for v in discrete if not in_ranges(v)]
    if (not ranges and len(discrete) <= 3) or (len(ranges) == 1 and len(discrete) <= 1):
        return discrete + [{"lo": lo, "hi": hi} for lo, hi in ranges]
    ends = [float(v) for v in discrete] + [x for r in ranges for x in r]
    lo, hi = min(ends), max(ends)
    values = p.frame[col].astype(float)
    declared = values.isin(discrete)
    for r_lo, r_hi in ranges:
        declared |= values.between(r_lo, r_hi)
    caught = pd.unique(values[values.between(lo, hi) & ~declared])
    labelled = [k for k in meta.value_labels.get(col, {})
                if isinstance(k, (int, float)) and lo <= k <= hi and k not in discrete and not in_ranges(k)]
    if len(caught) or labelled:
        shown = sorted({normalize_value(v) for v in caught} | {normalize_value(k) for k in labelled})[:10]
        problems.append(problem(
            path, f"{len(discrete)} discrete user-missing values and {len(ranges)} ranges exceed SPSS's limit "
                  "(3 values, or 1 range + 1 value), and the covering range "
                  f"[{normalize_value(lo)}, {normalize_value(hi)}] would also catch the valid values {shown}",
            item=col, hint="declare fewer codes, or recode the special codes into one block of adjacent values"))
        return None
    note("SPSS allows at most 3 discrete user-missing values: wrote the range covering each variable's "
         "codes instead (no valid value falls inside)", col)
    return [{"lo": lo, "hi": hi}]


def _display_format(x: np.ndarray, original: str = "") -> str:
    """SPSS display format for a numeric column, from its values.

    Whole numbers get no decimals (a case id shows as 100001, not 100001.00); other numbers the
    fewest decimals that show them exactly, up to 4, else enough for 3 significant digits of the
    smallest non-zero value and at least 4 (5 below 10: probabilities, weights), at most 8.  The
    width fits the widest value.  A file's own ``F``/``N`` format keeps its decimals and is only
    widened where a value would not fit (e.g. a recoded status code -911).  Common practice, no
    source.
    """
    x = x[np.isfinite(x)]
    m = _SPSS_NUM_FORMAT.fullmatch(original or "")
    if m and not original.startswith(("F", "N")):
        return original  # COMMA, DOLLAR, PCT ...: the file's own choice
    top = float(np.abs(x).max()) if x.size else 0.0
    ints = int(np.floor(np.log10(top))) + 1 if top >= 1 else 1
    sign = 1 if x.size and bool((x < 0).any()) else 0
    if m:
        dec = int(m.group(2)[1:]) if m.group(2) else 0
        width = int(re.match(r"[A-Z]+(\d+)", original).group(1))
        need = sign + ints + (dec + 1 if dec else 0)
        return original if need <= width else f"{original[0]}{min(need, 40)}.{dec}"
    dec = next((d for d in range(5) if np.all(np.abs(x - np.round(x, d)) <= 1e-9 * max(1.0, top))), None)
    if dec is None:
        small = float(np.abs(x[x != 0]).min())
        dec = min(8, max(4, 6 - ints, 2 - int(np.floor(np.log10(small)))))
    return f"F{min(max(sign + ints + (dec + 1 if dec else 0), 1), 40)}.{dec}"


def prepare_sav(df: pd.DataFrame, meta: SurveyMeta, path: Path, fmt: str) -> Job:
    import pyreadstat

    problems = check_names(df, path, fmt)
    p = prepare_columns(df, meta, path, problems, ext_missing_ok=False)
    labels: dict[str, dict] = {}
    for col, vl in meta.value_labels.items():
        kind = p.kinds.get(col)
        want = str if kind == "text" else (int, float)
        keys = [normalize_value(k) for k in vl]
        bad = [k for k in keys if isinstance(k, bool) or not isinstance(k, want)]
        if kind in ("date", "datetime") or bad:
            problems.append(problem(path, f"value labels with keys {bad or keys} do not fit this {kind} column",
                                    item=col, hint="label keys must be stored values of the column's type"))
            continue
        labels[col] = dict(zip(keys, vl.values()))
    missing = {}
    for col in p.frame.columns:
        spec = _spss_missing(col, p, meta, path, problems)
        if spec:
            missing[col] = spec
    formats = {}
    for col, kind in p.kinds.items():
        f = meta.formats.get(col, "")
        if kind == "number":
            formats[col] = _display_format(p.frame[col].to_numpy(dtype=float), f)
        elif (kind == "date" and SPSS_DATE_FORMAT.fullmatch(f)) or (
                kind == "datetime" and SPSS_DATETIME_FORMAT.fullmatch(f)):
            formats[col] = f
        elif kind == "date":
            formats[col] = "DATE11"
    if problems:
        raise SkipwiseError(problems)
    measure = {c: v for c, v in meta.measure.items() if v in _SPSS_MEASURES}

    def job(tmp: Path) -> None:
        pyreadstat.write_sav(
            p.frame, str(tmp), file_label=meta.file_label or "", compress=(fmt == "zsav"),
            column_labels={c: lab for c, lab in meta.column_labels.items() if lab},
            variable_value_labels=labels or None, missing_ranges=missing or None,
            variable_measure=measure or None, variable_format=formats or None,
        )
    return job
