"""Data-only files (``.csv``, ``.xlsx``) and Parquet, which carries the metadata as JSON."""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd

from skipwise.errors import SkipwiseError
from skipwise.publish import clean_message
from skipwise.io.meta import SurveyMeta
from skipwise.io.readers import META_KEY, MIXED_KEY
from skipwise.io.writers_common import EXT_LETTER, Job, check_names, problem

__all__ = ["prepare_csv", "prepare_xlsx", "prepare_parquet"]


def _plain_frame(df: pd.DataFrame) -> pd.DataFrame:
    out = df.copy(deep=False)
    out.attrs = {}
    for col in out.columns:
        if isinstance(out[col].dtype, pd.DatetimeTZDtype):
            out[col] = out[col].dt.tz_localize(None)
    return out


def prepare_csv(df: pd.DataFrame, meta: SurveyMeta, path: Path, fmt: str) -> Job:
    problems = check_names(df, path, fmt)
    if problems:
        raise SkipwiseError(problems)
    frame = _plain_frame(df)
    return lambda tmp: frame.to_csv(tmp, index=False, encoding="utf-8")


def prepare_xlsx(df: pd.DataFrame, meta: SurveyMeta, path: Path, fmt: str) -> Job:
    problems = check_names(df, path, fmt)
    # Sheet size limits [memory: Office Open XML spreadsheet limits, 1,048,576 x 16,384].
    if len(df) + 1 > 1_048_576 or df.shape[1] > 16_384:
        problems.append(problem(path, f"{len(df):,} rows x {df.shape[1]:,} columns do not fit one sheet",
                                hint="write .parquet, .sav or .dta instead"))
    if problems:
        raise SkipwiseError(problems)
    frame = _plain_frame(df)
    from skipwise.io.inert import write_inert_excel

    return lambda tmp: write_inert_excel(frame, tmp)  # answers starting with '=' stay text


def prepare_parquet(df: pd.DataFrame, meta: SurveyMeta, path: Path, fmt: str) -> Job:
    import pyarrow as pa
    import pyarrow.parquet as pq

    problems = check_names(df, path, fmt)
    if problems:
        raise SkipwiseError(problems)
    frame = _plain_frame(df)
    mixed: list[str] = []
    for col in frame.columns:
        s = frame[col]
        if s.dtype != object or pd.api.types.infer_dtype(s, skipna=True) not in ("mixed", "mixed-integer"):
            continue
        num = pd.to_numeric(s, errors="coerce")
        rest = s.notna() & num.isna()
        if s[rest].astype(str).str.fullmatch(EXT_LETTER.pattern).all():
            # Arrow columns hold one type: numbers mixed with ".a" letters are kept as text
            # (shortest round-trip repr of each float) and restored by read_survey.
            text = num.astype(str).astype(object)  # shortest round-trip text, like repr
            text[rest] = s[rest]
            frame[col] = text.where(s.notna(), None)
            mixed.append(col)
    try:
        table = pa.Table.from_pandas(frame, preserve_index=None)
    except (pa.ArrowInvalid, pa.ArrowTypeError, pa.ArrowNotImplementedError) as exc:
        raise SkipwiseError(problem(path, f"the data cannot be stored in Parquet ({clean_message(exc)})",
                                    hint="make each column hold one type of value")) from None
    extra = {META_KEY: meta.to_json().encode("utf-8")}
    if mixed:
        extra[MIXED_KEY] = json.dumps(mixed).encode("utf-8")
    table = table.replace_schema_metadata({**(table.schema.metadata or {}), **extra})
    return lambda tmp: pq.write_table(table, tmp)
