"""What every survey-file writer shares: problem records, column names, notes, pyreadstat columns.

The format families live in :mod:`skipwise.io.writers_spss`,
:mod:`skipwise.io.writers_stata` and :mod:`skipwise.io.writers_plain`;
:func:`skipwise.io.writers.write_survey` dispatches to them.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np
import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode
from skipwise.io.meta import SurveyMeta

__all__ = ["MetadataWarning", "Job", "Prepared", "problem", "check_names", "note", "drain_notes",
           "prepare_columns", "stata_letter", "STATA_LETTER", "EXT_LETTER", "SPSS_DATE_FORMAT",
           "SPSS_DATETIME_FORMAT"]

#: Prepares one write and returns the job that writes the temporary file.
Job = Callable[[Path], None]

# Stata naming rules [memory: Stata User's Guide, "Naming conventions"]: 1-32 characters,
# letters, digits and underscores, not starting with a digit, not a reserved word.
_STATA_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_]{0,31}")
_STATA_RESERVED = {"_all", "_b", "byte", "_coef", "_cons", "double", "float", "if", "in", "int", "long",
                   "_n", "_N", "_pi", "_pred", "_rc", "_skip", "strL", "using", "with"}
# SPSS naming rules [memory: SPSS Command Syntax Reference, "Variable names"]: start with a letter
# or @, then letters, digits, . _ $ # @; at most 64 bytes; not ending in "."; not a reserved word.
_SPSS_NAME = re.compile(r"[\w.@#$]+")
_SPSS_RESERVED = {"ALL", "AND", "BY", "EQ", "GE", "GT", "LE", "LT", "NE", "NOT", "OR", "TO", "WITH"}
SPSS_DATE_FORMAT = re.compile(r"(DATE|ADATE|EDATE|SDATE|JDATE)\d+")
SPSS_DATETIME_FORMAT = re.compile(r"(DATETIME|YMDHMS)\d+(\.\d+)?")
STATA_LETTER = re.compile(r"\.[a-z]")
#: A stored missing letter: Stata's ``.a``-``.z`` or SAS's ``.A``-``.Z`` and ``._`` (as read_survey keeps them).
EXT_LETTER = re.compile(r"\.[a-zA-Z_]")


class MetadataWarning(UserWarning):
    """Metadata was adapted to what the target format can hold (e.g. codes written as a range)."""


def problem(path: Path, message: str, *, item: str | None = None, hint: str | None = None,
            code: ProblemCode = ProblemCode.BAD_DATA) -> Problem:
    from skipwise.publish import user_path

    # ``path`` may be the publisher's hidden temporary file: the message names the user's output
    return Problem(code=code, category=Category.DATA, file=user_path(path), item=item, message=message, hint=hint)


def check_names(df: pd.DataFrame, path: Path, fmt: str) -> list[Problem]:
    problems: list[Problem] = []
    names = list(df.columns)
    for dup in sorted({str(n) for n in names if names.count(n) > 1}):
        problems.append(problem(path, f"column name '{dup}' occurs more than once", item=dup,
                                hint="rename the columns so every name is unique"))
    for name in names:
        if not isinstance(name, str) or not name:
            problems.append(problem(path, f"column name {name!r} is not a text name", item=str(name),
                                    hint="rename the column"))
        elif fmt == "dta" and (not _STATA_NAME.fullmatch(name) or name in _STATA_RESERVED
                               or re.fullmatch(r"str\d+", name)):
            problems.append(problem(path, f"column name '{name}' is not allowed in Stata files", item=name,
                                    hint="use 1-32 letters, digits or underscores, not starting with a "
                                         "digit and not a reserved word; rename before writing .dta"))
        elif fmt in ("sav", "zsav") and (not name[0].isalpha() and name[0] != "@"
                                         or not _SPSS_NAME.fullmatch(name) or name.endswith(".")
                                         or len(name.encode("utf-8")) > 64 or name.upper() in _SPSS_RESERVED):
            problems.append(problem(path, f"column name '{name}' is not allowed in SPSS files", item=name,
                                    hint="start with a letter; use letters, digits, '.', '_', '@', '#', '$'; "
                                         "at most 64 bytes; not a reserved word such as AND, BY, TO"))
    return problems


_NOTES: dict[str, list[str]] = {}  # topic -> columns, filled while one write is prepared


def note(topic: str, column: str | None = None) -> None:
    """Remember a metadata adaptation (``topic``) for ``column``; write_survey reports each topic
    once per file, with the columns it concerns."""
    cols = _NOTES.setdefault(topic, [])
    if column is not None and column not in cols:
        cols.append(column)


def drain_notes() -> list[str]:
    """The notes gathered since the last call, one text per topic (and forget them)."""
    out = []
    for topic, cols in _NOTES.items():
        shown = ", ".join(cols[:8]) + (f" and {len(cols) - 8} more" if len(cols) > 8 else "")
        out.append(topic + (f" ({shown})" if cols else ""))
    _NOTES.clear()
    return out


def stata_letter(value: str, col: str, path: Path, problems: list[Problem]) -> str | None:
    """The bare Stata letter for a stored missing letter (SAS's ``.A`` becomes ``a``); None and a
    problem for SAS's ``._``, which Stata has no letter for."""
    if value == "._":
        problems.append(problem(path, "the SAS special missing value ._ has no Stata equivalent", item=col,
                                hint="recode ._ to one of .A-.Z in SAS, or write .parquet or .csv"))
        return None
    if value[1:].isupper():
        note("SAS special missing values .A-.Z were written as Stata's .a-.z", col)
    return value[1:].lower()


# -- column preparation for pyreadstat -----------------------------------------------------------
@dataclass
class Prepared:
    """Columns converted to what pyreadstat writes, and what each holds."""

    frame: pd.DataFrame
    kinds: dict[str, str] = field(default_factory=dict)  # number, text, date, datetime, extmiss, other
    letters: dict[str, set[str]] = field(default_factory=dict)  # bare Stata letters used per column
    stata_formats: dict[str, str] = field(default_factory=dict)


_STATA_EPOCH = pd.Timestamp("1960-01-01")


def _date_kind(s: pd.Series, fmt: str) -> str:
    if fmt.startswith("%td") or SPSS_DATE_FORMAT.fullmatch(fmt):
        return "date"
    if fmt.startswith("%tc") or SPSS_DATETIME_FORMAT.fullmatch(fmt):
        return "datetime"
    valid = s.dropna()
    return "date" if bool((valid == valid.dt.normalize()).all()) else "datetime"


def prepare_columns(df: pd.DataFrame, meta: SurveyMeta, path: Path, problems: list[Problem], *,
                    ext_missing_ok: bool) -> Prepared:
    out = Prepared(frame=pd.DataFrame(index=pd.RangeIndex(len(df))))
    columns: dict = {}
    for col in df.columns:
        s = df[col].reset_index(drop=True)
        if isinstance(s.dtype, pd.CategoricalDtype):
            s = pd.Series(s.to_numpy(dtype=object), dtype=object)
        kind = "other"
        if pd.api.types.is_timedelta64_dtype(s):  # durations are written as seconds
            kind, s = "number", s.dt.total_seconds()
        elif pd.api.types.is_bool_dtype(s) or pd.api.types.is_numeric_dtype(s):
            kind, s = "number", pd.Series(_as_floats(s), copy=False)
        elif pd.api.types.is_datetime64_any_dtype(s):
            kind = "datetime"
        elif pd.api.types.is_string_dtype(s) and s.dtype != object and not (ext_missing_ok and _all_letters(s)):
            kind, s = "text", pd.Series(s.to_numpy(dtype=object, na_value=None), dtype=object)
        elif s.dtype == object or pd.api.types.is_string_dtype(s):
            s = s.astype(object).where(s.notna(), None) if s.dtype != object else s
            inferred = pd.api.types.infer_dtype(s, skipna=True)
            if inferred == "empty":
                kind, s = "number", pd.Series(np.full(len(s), np.nan))
            elif inferred == "string" and not (ext_missing_ok and _all_letters(s)):
                kind, s = "text", s.where(s.notna(), None)
            elif inferred == "string":
                # Every stored value is an extended missing letter: a numeric column with no
                # answers (e.g. an item nobody was asked, recoded by status).
                rest = s.notna()
                mixed = pd.Series(np.full(len(s), np.nan), index=s.index, dtype=object)
                mixed[rest] = _bare_letters(s[rest].astype(str), str(col), path, problems)
                kind, s = "extmiss", mixed
                out.letters[col] = set(pd.unique(mixed[rest].dropna()))
            elif inferred in ("integer", "floating", "mixed-integer-float", "decimal", "boolean"):
                kind, s = "number", pd.to_numeric(s).astype(float)
            elif inferred in ("date", "datetime", "datetime64"):
                kind, s = "datetime", pd.to_datetime(s)
            elif inferred in ("mixed", "mixed-integer"):
                values = np.asarray(s.to_numpy(dtype=object), dtype=object)
                fast = _floats_and_texts(values, numbers=False)  # floats and letters: one pass over the cells
                if fast is not None:
                    rest, text_codes, texts = fast[1], fast[2], [str(u) for u in fast[3]]
                else:
                    num, rest, texts, codes = split_numbers(s)
                odd = [t for t in texts if not EXT_LETTER.fullmatch(t)]
                if odd:
                    problems.append(problem(path, "column mixes numbers and text, or holds values that are neither "
                                                  f"numbers, text nor dates (e.g. {odd[0]!r})", item=str(col),
                                            hint="make the column all numbers or all text"))
                elif not ext_missing_ok:
                    problems.append(problem(path, "column holds Stata extended missing values (.a-.z) or SAS "
                                                  "special missing values (.A-.Z, ._), which SPSS cannot store",
                                            item=str(col),
                                            hint="recode them to numeric codes declared as user-missing, "
                                                 "or write .dta or .parquet"))
                else:
                    kind = "extmiss"
                    bare = np.array([stata_letter(t, str(col), path, problems) for t in texts], dtype=object)
                    if fast is not None:  # the numbers are Python floats already: kept as they are
                        mixed = values.copy()
                        mixed[rest] = bare[text_codes]
                    else:
                        mixed = numbers_as_objects(s, num)
                        mixed[rest] = bare[codes[rest]]
                    out.letters[col] = {b for b in bare if b is not None}
                    s = pd.Series(mixed, dtype=object)
        if kind == "datetime":
            if isinstance(s.dtype, pd.DatetimeTZDtype):
                s = s.dt.tz_localize(None)
            kind = _date_kind(s, meta.formats.get(col, ""))
            if ext_missing_ok:  # Stata: elapsed days (%td) or milliseconds (%tc) since 1960
                unit = pd.Timedelta(days=1) if kind == "date" else pd.Timedelta(milliseconds=1)
                s = (s - _STATA_EPOCH) / unit
                out.stata_formats[col] = "%td" if kind == "date" else "%tc"
        out.kinds[col] = kind
        if kind == "text":
            _refuse_nul(s, str(col), path, problems)
        columns[col] = s.to_numpy() if kind != "datetime" and kind != "date" else s.reset_index(drop=True)
    _refuse_nul_labels(meta, [str(c) for c in df.columns], path, problems)
    if columns:  # one frame built at once, not one insertion per column, sharing the columns' arrays
        out.frame = pd.DataFrame(columns, index=pd.RangeIndex(len(df)), copy=False)
    return out


def _as_floats(s: pd.Series) -> np.ndarray:
    """A numeric column as the floats pyreadstat writes, without a copy where it already is one.

    float64 and float32 stay as stored; small whole numbers (8 and 16 bits, booleans) become
    float32, which holds each of them exactly and which pyreadstat writes as the same doubles
    (status columns are int16: half the memory of float64); everything else float64, missing
    cells NaN.
    """
    dtype = s.dtype
    if isinstance(dtype, np.dtype):
        if dtype == np.float64 or dtype == np.float32:
            return s.to_numpy()
        if dtype == np.bool_ or (dtype.kind in "iu" and dtype.itemsize <= 2):
            return s.to_numpy().astype(np.float32)
    return s.to_numpy(dtype=float, na_value=np.nan)


def split_numbers(s: pd.Series) -> tuple[np.ndarray, np.ndarray, list[str], np.ndarray]:
    """Numbers and texts of an object column, each distinct value converted once.

    Returns the values as numbers (``pd.to_numeric(errors="coerce")``, NaN for text and blanks),
    the mask of stored values that are no numbers, those values' distinct texts (in order of first
    appearance) and, per row, the index of its text among them (meaningful where the mask is set).
    """
    values = np.asarray(s.to_numpy(dtype=object), dtype=object)
    fast = _floats_and_texts(values)
    if fast is not None:  # Python floats and texts only: the column converted at once, texts factorized
        num, rest, text_codes, text_uniques = fast
        position = np.full(len(values), -1, dtype=np.int64)
        position[rest] = text_codes
        return num, rest, [str(u) for u in text_uniques], position
    codes, uniques = pd.factorize(values, use_na_sentinel=True)
    as_numbers = pd.to_numeric(pd.Series(uniques, dtype=object), errors="coerce").to_numpy(
        dtype=np.float64, na_value=np.nan)
    num = np.append(as_numbers, np.nan)[codes]  # code -1 (blank) takes the appended NaN
    textual = np.flatnonzero(np.isnan(as_numbers))
    position = np.full(len(uniques) + 1, -1, dtype=np.int64)
    position[textual] = np.arange(textual.size)
    rest = (codes >= 0) & np.isnan(num)
    return num, rest, [str(uniques[k]) for k in textual], position[codes]


def numbers_as_objects(s: pd.Series, num: np.ndarray) -> np.ndarray:
    """``num`` as an object array, reusing the column's own float objects (no boxing per cell).

    Cells that hold a Python float already keep it; blanks become NaN and every other cell (an
    int, numeric text, a numpy scalar) its number, as ``num.astype(object)`` would give.
    """
    values = s.to_numpy(dtype=object)
    codes, uniques = pd.factorize(values, use_na_sentinel=True)
    plain = np.append(np.fromiter((type(u) is float for u in uniques), dtype=bool, count=len(uniques)), False)
    out = values.copy()
    redo = ~plain[codes]
    out[redo] = num[redo].astype(object)
    return out


def _floats_and_texts(values: np.ndarray, numbers: bool = True
                      ) -> tuple[np.ndarray | None, np.ndarray, np.ndarray, list] | None:
    """Numbers, no-number mask, text codes and distinct texts of an object array that holds Python
    floats and texts only, no text being a number (a recoded column: answers and ``.a`` letters);
    None for any other column.

    Each cell's type is read once (``map(type, ...)`` runs in C); the floats are converted at once
    and only the texts are factorized, so no number is hashed or parsed (``numbers=False``: the
    numbers are not wanted, None in their place).
    """
    types = np.fromiter(map(type, values), dtype=object, count=len(values))
    is_text = types == str
    if not (is_text | (types == float)).all():
        return None
    num = None
    if numbers:
        num = np.full(len(values), np.nan)
        num[~is_text] = values[~is_text].astype(np.float64)
    text_codes, text_uniques = pd.factorize(values[is_text])
    as_numbers = pd.to_numeric(pd.Series(text_uniques, dtype=object), errors="coerce")
    if as_numbers.notna().any():
        return None  # a text that is a number ("7"): the general way
    return num, is_text, text_codes, list(text_uniques)


_NUL_HINT = ("SPSS and Stata files end a text at a NUL character, so the rest would be lost without "
             "a word: remove the NUL characters (usually damage from a conversion) before writing")


def _refuse_nul(s: pd.Series, col: str, path: Path, problems: list[Problem]) -> None:
    """A text cell holding NUL (U+0000) is refused, naming the column and the first rows: the
    format would cut the text there silently, and changing respondents' answers is not ours."""
    rows = np.flatnonzero(s.str.contains("\x00", regex=False, na=False).to_numpy(dtype=bool))
    if len(rows):
        where = ", ".join(str(r + 1) for r in rows[:5]) + (f" and {len(rows) - 5:,} more" if len(rows) > 5 else "")
        problems.append(problem(path, f"text holds a NUL character in {len(rows):,} row(s) (data row {where})",
                                item=col, hint=_NUL_HINT))


def _refuse_nul_labels(meta: SurveyMeta, columns: list[str], path: Path, problems: list[Problem]) -> None:
    texts = [(c, meta.column_labels.get(c)) for c in columns]
    texts += [(c, str(lab)) for c in columns for lab in (meta.value_labels.get(c) or {}).values()]
    texts += [(None, meta.file_label)]
    for col, text in texts:
        if isinstance(text, str) and "\x00" in text:
            problems.append(problem(path, f"a label holds a NUL character ({clean_label(text)!r})", item=col,
                                    hint=_NUL_HINT))


def clean_label(text: str, limit: int = 60) -> str:
    shown = text.replace("\x00", "\\0")
    return shown if len(shown) <= limit else shown[:limit] + "..."


def _all_letters(s: pd.Series) -> bool:
    text = s[s.notna()].astype(str)
    return bool(len(text)) and bool(text.str.fullmatch(EXT_LETTER.pattern).all())


def _bare_letters(text: pd.Series, col: str, path: Path, problems: list[Problem]) -> pd.Series:
    """Stata's bare letters for stored ``.a``-``.z`` / SAS ``.A``-``.Z`` (one call per distinct letter)."""
    mapping = {v: stata_letter(v, col, path, problems) for v in pd.unique(text)}
    return text.map(mapping)
