"""Write survey files atomically, keeping labels and missing-value definitions.

``.sav``/``.zsav`` and ``.dta`` carry variable labels, value labels and
missing-value definitions; ``.parquet`` carries the whole
:class:`~skipwise.io.meta.SurveyMeta` as JSON in its schema metadata;
``.csv`` and ``.xlsx`` hold the data only (they have no place for labels).
"""

from __future__ import annotations

import json
import re
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np
import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError
from skipwise.io.atomic import atomic_output, check_writable
from skipwise.io.meta import SurveyMeta, get_meta, normalize_value
from skipwise.io.readers import META_KEY, MIXED_KEY, format_of

__all__ = ["write_survey", "MetadataWarning"]

_Job = Callable[[Path], None]

# Stata naming rules [memory: Stata User's Guide, "Naming conventions"]: 1-32 characters,
# letters, digits and underscores, not starting with a digit, not a reserved word.
_STATA_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_]{0,31}")
_STATA_RESERVED = {"_all", "_b", "byte", "_coef", "_cons", "double", "float", "if", "in", "int", "long",
                   "_n", "_N", "_pi", "_pred", "_rc", "_skip", "strL", "using", "with"}
# SPSS naming rules [memory: SPSS Command Syntax Reference, "Variable names"]: start with a letter
# or @, then letters, digits, . _ $ # @; at most 64 bytes; not ending in "."; not a reserved word.
_SPSS_NAME = re.compile(r"[\w.@#$]+")
_SPSS_RESERVED = {"ALL", "AND", "BY", "EQ", "GE", "GT", "LE", "LT", "NE", "NOT", "OR", "TO", "WITH"}
_SPSS_NUM_FORMAT = re.compile(r"(F|N|COMMA|DOT|DOLLAR|PCT|E)\d+(\.\d+)?")
_SPSS_DATE_FORMAT = re.compile(r"(DATE|ADATE|EDATE|SDATE|JDATE)\d+")
_SPSS_DATETIME_FORMAT = re.compile(r"(DATETIME|YMDHMS)\d+(\.\d+)?")
_STATA_NUM_FORMAT = re.compile(r"%-?\d+\.\d+[gfe]c?")
_SPSS_MEASURES = {"nominal", "ordinal", "scale"}
_STATA_LETTER = re.compile(r"\.[a-z]")
# Stata value labels must be integers in this range [memory: Stata manual, "label"].
_STATA_LABEL_MIN, _STATA_LABEL_MAX = -2_147_483_647, 2_147_483_620


class MetadataWarning(UserWarning):
    """Metadata was adapted to what the target format can hold (e.g. codes written as a range)."""


def _problem(path: Path, message: str, *, item: str | None = None, hint: str | None = None,
             code: ProblemCode = ProblemCode.BAD_DATA) -> Problem:
    return Problem(code=code, category=Category.DATA, file=str(path), item=item, message=message, hint=hint)


def _check_names(df: pd.DataFrame, path: Path, fmt: str) -> list[Problem]:
    problems: list[Problem] = []
    names = list(df.columns)
    for dup in sorted({str(n) for n in names if names.count(n) > 1}):
        problems.append(_problem(path, f"column name '{dup}' occurs more than once", item=dup,
                                 hint="rename the columns so every name is unique"))
    for name in names:
        if not isinstance(name, str) or not name:
            problems.append(_problem(path, f"column name {name!r} is not a text name", item=str(name),
                                     hint="rename the column"))
        elif fmt == "dta" and (not _STATA_NAME.fullmatch(name) or name in _STATA_RESERVED
                               or re.fullmatch(r"str\d+", name)):
            problems.append(_problem(path, f"column name '{name}' is not allowed in Stata files", item=name,
                                     hint="use 1-32 letters, digits or underscores, not starting with a "
                                          "digit and not a reserved word; rename before writing .dta"))
        elif fmt in ("sav", "zsav") and (not name[0].isalpha() and name[0] != "@"
                                         or not _SPSS_NAME.fullmatch(name) or name.endswith(".")
                                         or len(name.encode("utf-8")) > 64 or name.upper() in _SPSS_RESERVED):
            problems.append(_problem(path, f"column name '{name}' is not allowed in SPSS files", item=name,
                                     hint="start with a letter; use letters, digits, '.', '_', '@', '#', '$'; "
                                          "at most 64 bytes; not a reserved word such as AND, BY, TO"))
    return problems


_NOTES: list[str] = []  # filled while one write is prepared, emitted by write_survey


def _note(message: str) -> None:
    _NOTES.append(message)


# -- column preparation for pyreadstat -----------------------------------------------------------
@dataclass
class _Prepared:
    """Columns converted to what pyreadstat writes, and what each holds."""

    frame: pd.DataFrame
    kinds: dict[str, str] = field(default_factory=dict)  # number, text, date, datetime, extmiss, other
    letters: dict[str, set[str]] = field(default_factory=dict)  # bare Stata letters used per column
    stata_formats: dict[str, str] = field(default_factory=dict)


_STATA_EPOCH = pd.Timestamp("1960-01-01")


def _date_kind(s: pd.Series, fmt: str) -> str:
    if fmt.startswith("%td") or _SPSS_DATE_FORMAT.fullmatch(fmt):
        return "date"
    if fmt.startswith("%tc") or _SPSS_DATETIME_FORMAT.fullmatch(fmt):
        return "datetime"
    valid = s.dropna()
    return "date" if bool((valid == valid.dt.normalize()).all()) else "datetime"


def _prepare_columns(df: pd.DataFrame, meta: SurveyMeta, path: Path, problems: list[Problem], *,
                     ext_missing_ok: bool) -> _Prepared:
    out = _Prepared(frame=pd.DataFrame(index=pd.RangeIndex(len(df))))
    for col in df.columns:
        s = df[col].reset_index(drop=True)
        if isinstance(s.dtype, pd.CategoricalDtype):
            s = pd.Series(s.to_numpy(dtype=object), dtype=object)
        kind = "other"
        if pd.api.types.is_timedelta64_dtype(s):  # durations are written as seconds
            kind, s = "number", s.dt.total_seconds()
        elif pd.api.types.is_bool_dtype(s) or pd.api.types.is_numeric_dtype(s):
            kind, s = "number", pd.Series(s.to_numpy(dtype=float, na_value=np.nan))
        elif pd.api.types.is_datetime64_any_dtype(s):
            kind = "datetime"
        elif pd.api.types.is_string_dtype(s) and s.dtype != object:
            kind, s = "text", pd.Series(s.to_numpy(dtype=object, na_value=None), dtype=object)
        elif s.dtype == object:
            inferred = pd.api.types.infer_dtype(s, skipna=True)
            if inferred == "empty":
                kind, s = "number", pd.Series(np.full(len(s), np.nan))
            elif inferred == "string":
                kind, s = "text", s.where(s.notna(), None)
            elif inferred in ("integer", "floating", "mixed-integer-float", "decimal", "boolean"):
                kind, s = "number", pd.to_numeric(s).astype(float)
            elif inferred in ("date", "datetime", "datetime64"):
                kind, s = "datetime", pd.to_datetime(s)
            elif inferred in ("mixed", "mixed-integer"):
                num = pd.to_numeric(s, errors="coerce")
                rest = s.notna() & num.isna()
                text = s[rest].astype(str)
                odd = text[~text.str.fullmatch(_STATA_LETTER.pattern)]
                if len(odd):
                    problems.append(_problem(path, "column mixes numbers and text, or holds values that are neither "
                                                   f"numbers, text nor dates (e.g. {odd.iloc[0]!r})", item=str(col),
                                             hint="make the column all numbers or all text"))
                elif not ext_missing_ok:
                    problems.append(_problem(path, "column holds Stata extended missing values (.a-.z), "
                                                   "which SPSS cannot store", item=str(col),
                                             hint="recode them to numeric codes declared as user-missing"))
                else:
                    kind = "extmiss"
                    mixed = num.astype(object)
                    mixed[rest] = text.str[1:]
                    out.letters[col] = set(pd.unique(text.str[1:]))
                    s = mixed
        if kind == "datetime":
            if isinstance(s.dtype, pd.DatetimeTZDtype):
                s = s.dt.tz_localize(None)
            kind = _date_kind(s, meta.formats.get(col, ""))
            if ext_missing_ok:  # Stata: elapsed days (%td) or milliseconds (%tc) since 1960
                unit = pd.Timedelta(days=1) if kind == "date" else pd.Timedelta(milliseconds=1)
                s = (s - _STATA_EPOCH) / unit
                out.stata_formats[col] = "%td" if kind == "date" else "%tc"
        out.kinds[col] = kind
        out.frame[col] = s.to_numpy() if kind != "datetime" and kind != "date" else s
    return out


# -- SPSS ---------------------------------------------------------------------------------------
def _spss_missing(col: str, p: _Prepared, meta: SurveyMeta, path: Path, problems: list[Problem]) -> list | None:
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
    letters = [v for v in discrete if isinstance(v, str) and _STATA_LETTER.fullmatch(v)]
    if kind != "text" and letters:
        _note(f"{col}: Stata extended-missing letters {letters} have no SPSS equivalent and were not declared")
        discrete = [v for v in discrete if v not in letters]
    if kind == "text":
        bad = [v for v in discrete if not isinstance(v, str) or len(v.encode("utf-8")) > 8]
        if ranges or bad or len(discrete) > 3:
            problems.append(_problem(path, "SPSS text variables take at most 3 user-missing values, each a "
                                           f"text of at most 8 bytes (got {discrete + ranges})", item=col,
                                     hint="shorten or drop some missing-value declarations"))
            return None
        return discrete
    if kind not in ("number",):
        problems.append(_problem(path, f"user-missing values on a {kind} column cannot be stored", item=col,
                                 hint="drop them from the metadata"))
        return None
    bad = [v for v in discrete if isinstance(v, (str, bool)) or not isinstance(v, (int, float))]
    if bad:
        problems.append(_problem(path, f"user-missing values {bad} are not numbers", item=col,
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
        problems.append(_problem(
            path, f"{len(discrete)} discrete user-missing values and {len(ranges)} ranges exceed SPSS's limit "
                  "(3 values, or 1 range + 1 value), and the covering range "
                  f"[{normalize_value(lo)}, {normalize_value(hi)}] would also catch the valid values {shown}",
            item=col, hint="declare fewer codes, or recode the special codes into one block of adjacent values"))
        return None
    _note(f"{col}: SPSS allows at most 3 discrete user-missing values; wrote the range "
          f"[{normalize_value(lo)}, {normalize_value(hi)}] covering {discrete + ranges}")
    return [{"lo": lo, "hi": hi}]


def _prepare_sav(df: pd.DataFrame, meta: SurveyMeta, path: Path, fmt: str) -> _Job:
    import pyreadstat

    problems = _check_names(df, path, fmt)
    p = _prepare_columns(df, meta, path, problems, ext_missing_ok=False)
    labels: dict[str, dict] = {}
    for col, vl in meta.value_labels.items():
        kind = p.kinds.get(col)
        want = str if kind == "text" else (int, float)
        keys = [normalize_value(k) for k in vl]
        bad = [k for k in keys if isinstance(k, bool) or not isinstance(k, want)]
        if kind in ("date", "datetime") or bad:
            problems.append(_problem(path, f"value labels with keys {bad or keys} do not fit this {kind} column",
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
        if (kind == "number" and _SPSS_NUM_FORMAT.fullmatch(f)) or (
                kind == "date" and _SPSS_DATE_FORMAT.fullmatch(f)) or (
                kind == "datetime" and _SPSS_DATETIME_FORMAT.fullmatch(f)):
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


# -- Stata --------------------------------------------------------------------------------------
def _prepare_dta(df: pd.DataFrame, meta: SurveyMeta, path: Path, fmt: str) -> _Job:
    import pyreadstat

    problems = _check_names(df, path, fmt)
    p = _prepare_columns(df, meta, path, problems, ext_missing_ok=True)
    labels: dict[str, dict] = {}
    for col, vl in meta.value_labels.items():
        kind = p.kinds.get(col)
        if kind not in ("number", "extmiss"):
            problems.append(_problem(path, f"Stata value labels need a numeric column, not a {kind} column",
                                     item=col, hint="recode the text into numeric codes, or drop its labels"))
            continue
        out: dict = {}
        for k, lab in vl.items():
            k = normalize_value(k)
            if isinstance(k, str) and _STATA_LETTER.fullmatch(k):
                out[k[1:]] = lab
            elif isinstance(k, int) and not isinstance(k, bool) and _STATA_LABEL_MIN <= k <= _STATA_LABEL_MAX:
                out[k] = lab
            else:
                problems.append(_problem(path, f"value label key {k!r} cannot be stored in Stata "
                                               "(keys must be whole numbers or .a-.z)", item=col,
                                         hint="recode the value to a whole number, or drop its label"))
        labels[col] = out
    user: dict[str, list[str]] = {}
    for col, kind in p.kinds.items():
        declared = meta.missing_values.get(col, [])
        letters = {v[1:] for v in declared if isinstance(v, str) and _STATA_LETTER.fullmatch(v)}
        others = [v for v in declared if not (isinstance(v, str) and _STATA_LETTER.fullmatch(v))]
        if others or meta.missing_ranges.get(col):
            _note(f"{col}: Stata has no user-missing declaration for ordinary values; "
                  f"{others + meta.missing_ranges.get(col, [])} stay plain values (their value labels are kept)")
        letters |= p.letters.get(col, set())
        if letters and kind == "text":
            problems.append(_problem(path, "extended missing letters cannot be declared on a text column",
                                     item=col, hint="drop them from the metadata"))
        elif letters:
            user[col] = sorted(letters)
    formats = {c: f for c, f in p.stata_formats.items()}
    for col, kind in p.kinds.items():
        f = meta.formats.get(col, "")
        if kind == "number" and _STATA_NUM_FORMAT.fullmatch(f):
            formats[col] = f
    if problems:
        raise SkipwiseError(problems)

    def job(tmp: Path) -> None:
        pyreadstat.write_dta(
            p.frame, str(tmp), file_label=meta.file_label or "",
            column_labels={c: lab for c, lab in meta.column_labels.items() if lab},
            variable_value_labels=labels or None, missing_user_values=user or None,
            variable_format=formats or None,
        )
    return job


# -- data-only and Parquet ----------------------------------------------------------------------
def _plain_frame(df: pd.DataFrame) -> pd.DataFrame:
    out = df.copy(deep=False)
    out.attrs = {}
    for col in out.columns:
        if isinstance(out[col].dtype, pd.DatetimeTZDtype):
            out[col] = out[col].dt.tz_localize(None)
    return out


def _prepare_csv(df: pd.DataFrame, meta: SurveyMeta, path: Path, fmt: str) -> _Job:
    problems = _check_names(df, path, fmt)
    if problems:
        raise SkipwiseError(problems)
    frame = _plain_frame(df)
    return lambda tmp: frame.to_csv(tmp, index=False, encoding="utf-8")


def _prepare_xlsx(df: pd.DataFrame, meta: SurveyMeta, path: Path, fmt: str) -> _Job:
    problems = _check_names(df, path, fmt)
    # Sheet size limits [memory: Office Open XML spreadsheet limits, 1,048,576 x 16,384].
    if len(df) + 1 > 1_048_576 or df.shape[1] > 16_384:
        problems.append(_problem(path, f"{len(df):,} rows x {df.shape[1]:,} columns do not fit one sheet",
                                 hint="write .parquet, .sav or .dta instead"))
    if problems:
        raise SkipwiseError(problems)
    frame = _plain_frame(df)
    return lambda tmp: frame.to_excel(tmp, index=False, engine="openpyxl")


def _prepare_parquet(df: pd.DataFrame, meta: SurveyMeta, path: Path, fmt: str) -> _Job:
    import pyarrow as pa
    import pyarrow.parquet as pq

    problems = _check_names(df, path, fmt)
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
        if s[rest].astype(str).str.fullmatch(_STATA_LETTER.pattern).all():
            # Arrow columns hold one type: numbers mixed with ".a" letters are kept as text
            # (shortest round-trip repr of each float) and restored by read_survey.
            text = num.map(repr, na_action="ignore").astype(object)
            text[rest] = s[rest]
            frame[col] = text.where(s.notna(), None)
            mixed.append(col)
    try:
        table = pa.Table.from_pandas(frame, preserve_index=None)
    except (pa.ArrowInvalid, pa.ArrowTypeError, pa.ArrowNotImplementedError) as exc:
        raise SkipwiseError(_problem(path, f"the data cannot be stored in Parquet ({exc})",
                                     hint="make each column hold one type of value")) from None
    extra = {META_KEY: meta.to_json().encode("utf-8")}
    if mixed:
        extra[MIXED_KEY] = json.dumps(mixed).encode("utf-8")
    table = table.replace_schema_metadata({**(table.schema.metadata or {}), **extra})
    return lambda tmp: pq.write_table(table, tmp)


_PREPARE: dict[str, Callable[[pd.DataFrame, SurveyMeta, Path, str], _Job]] = {
    "sav": _prepare_sav, "zsav": _prepare_sav, "dta": _prepare_dta,
    "csv": _prepare_csv, "xlsx": _prepare_xlsx, "parquet": _prepare_parquet,
}


def write_survey(df: pd.DataFrame, path: str | Path, meta: SurveyMeta | None = None, *,
                 overwrite: bool = True) -> Path:
    """Write ``df`` with its metadata to ``path`` (format from the extension), atomically.

    Parameters
    ----------
    df
        The data. Stata extended missing cells are the strings ``".a"``–``".z"`` in
        an otherwise numeric column (as :func:`read_survey` returns them).
    path
        Target ``.sav``, ``.zsav``, ``.dta``, ``.csv``, ``.xlsx`` or ``.parquet`` file.
    meta
        Labels and missing-value definitions; default ``get_meta(df)``. Entries
        for columns not in ``df`` are ignored.
    overwrite
        If False and ``path`` exists, raise OUTPUT_EXISTS and leave it alone.

    Returns
    -------
    pathlib.Path
        ``path``.

    Notes
    -----
    - SPSS: variable and value labels, measure, numeric formats, discrete
      user-missing values and ranges are written.  SPSS holds at most 3 discrete
      values, or 1 range + 1 value, per variable; beyond that the values are
      written as one range ``[lo, hi]`` covering them *if* no other value present
      in the column or in its value labels falls inside (a MetadataWarning says
      so); otherwise a SkipwiseError is raised.  Read back, such codes appear in
      ``missing_ranges`` rather than ``missing_values``.  Stata letters cannot
      be stored in SPSS (SkipwiseError if the data holds them).
    - Stata: variable labels, value labels (whole-number keys, and keys
      ``".a"``–``".z"`` on extended missing values) and extended missing cells are
      written.  Stata has no user-missing declaration for ordinary values: SPSS
      discrete codes and ranges stay plain values (labels kept, MetadataWarning).
      Text columns cannot carry value labels.  Date columns are written ``%td``,
      date-times ``%tc`` (ms).  Column names Stata forbids raise SkipwiseError.
    - CSV (utf-8) and Excel (one sheet) hold the data only; labels and
      missing-value definitions are not stored.  The index is not written.
    - Parquet: the metadata as JSON in the schema key ``skipwise.meta``.

    Raises
    ------
    SkipwiseError
        FILE_FORMAT for an unknown extension, OUTPUT_EXISTS, BAD_DATA for data or
        metadata the format cannot hold (every such problem is listed).  No
        partial file is ever left behind.
    """
    import pyreadstat

    path = Path(path)
    fmt = format_of(path)
    check_writable(path, overwrite=overwrite)
    meta = (get_meta(df) if meta is None else meta.copy()).subset(str(c) for c in df.columns)
    _NOTES.clear()
    try:
        job = _PREPARE[fmt](df, meta, path, fmt)
    finally:
        notes = list(_NOTES)
        _NOTES.clear()
    for note in notes:
        warnings.warn(f"{path}: {note}", MetadataWarning, stacklevel=2)
    try:
        with atomic_output(path, overwrite=overwrite) as tmp:
            job(tmp)
    except (pyreadstat.ReadstatError, pyreadstat.PyreadstatError, ValueError, TypeError, OverflowError) as exc:
        raise SkipwiseError(_problem(path, f"could not write the file ({type(exc).__name__}: {exc})",
                                     hint="check column types and metadata")) from None
    except OSError as exc:
        raise SkipwiseError(_problem(path, f"could not write the file ({exc.strerror or exc})",
                                     code=ProblemCode.FILE_UNREADABLE,
                                     hint="check the folder exists and is writable")) from None
    return path
