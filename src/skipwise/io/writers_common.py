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
        kind = "other"
        recoded = _letter_categorical(s, str(col), path, problems) if ext_missing_ok else None
        if recoded is not None:  # numbers and letters as categories (a recoded column): written as it is
            kind, s, out.letters[col] = "extmiss", recoded[0], recoded[1]
        elif isinstance(s.dtype, pd.CategoricalDtype):
            s = pd.Series(s.to_numpy(dtype=object), dtype=object)
        if kind == "extmiss":
            pass
        elif pd.api.types.is_timedelta64_dtype(s):  # durations are written as seconds
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
                fast = _floats_and_texts_table(values)  # floats and letters: the distinct values, once
                if fast is not None:
                    cell_codes, table, is_text = fast
                    texts = [str(u) for u in table[:-1][is_text]]
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
                        table[:-1][is_text] = bare
                        mixed = table[cell_codes]
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
        if kind in ("datetime", "date") or isinstance(s.dtype, pd.CategoricalDtype):
            columns[col] = s.reset_index(drop=True)
        else:
            columns[col] = s.to_numpy()
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
    fast = _floats_and_texts_table(values)
    if fast is not None:  # Python floats and texts only: each distinct value converted once
        codes, table, is_text = fast
        numbers = np.full(len(table), np.nan)
        numbers[:-1][~is_text] = table[:-1][~is_text].astype(np.float64)
        text_at = np.full(len(table), -1, dtype=np.int64)
        text_at[:-1][is_text] = np.arange(int(is_text.sum()))
        position = text_at[codes]
        return numbers[codes], position >= 0, [str(u) for u in table[:-1][is_text]], position
    codes, uniques = pd.factorize(values, use_na_sentinel=True)
    as_numbers = pd.to_numeric(pd.Series(uniques, dtype=object), errors="coerce").to_numpy(
        dtype=np.float64, na_value=np.nan)
    codes, other_zero = signed_zeros(codes, as_numbers, values)
    if other_zero is not None:
        as_numbers = np.append(as_numbers, other_zero)
        uniques = np.append(np.asarray(uniques, dtype=object), np.array([other_zero], dtype=object))
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


def _letter_categorical(s: pd.Series, col: str, path: Path, problems: list[Problem]
                        ) -> tuple[pd.Series, set[str]] | None:
    """A categorical column of floats and extended missing letters, numbers first, with pyreadstat's
    bare letters (``"a"`` for ``".a"``) as categories, and the letters its cells hold; None for
    any other column.

    Only the categories are looked at and renamed, and the cells' codes counted once: no cell is
    converted.  pyreadstat judges a categorical by its first categories, so the numbers must come
    first (a column of letters only has no numbers and is judged by what is left once the letters
    declared missing are set aside: nothing, a numeric column).
    """
    if not isinstance(s.dtype, pd.CategoricalDtype):
        return None
    categories = np.asarray(s.cat.categories, dtype=object)
    kinds = np.fromiter(map(type, categories), dtype=object, count=len(categories))
    is_text = kinds == str
    if not is_text.any() or not (is_text | (kinds == float)).all() or (np.diff(is_text.astype(np.int8)) < 0).any():
        return None  # no letters (a numeric column), or something else than numbers then letters
    texts = categories[is_text]
    if not all(EXT_LETTER.fullmatch(t) for t in texts):
        return None
    bare = [stata_letter(t, col, path, problems) for t in texts]
    if len(set(bare)) < len(bare):
        return None  # ".A" and ".a": the general way says which cells
    codes = s.cat.codes.to_numpy()
    used = np.bincount(codes.astype(np.intp) + 1, minlength=len(categories) + 1)[1:] > 0
    renamed = categories.copy()
    renamed[is_text] = bare
    held = {b for b, u in zip(bare, used[is_text]) if u}
    return s.cat.rename_categories(pd.Index(renamed, dtype=object)), held


def _floats_and_texts_table(values: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
    """The distinct values of an object array that holds Python floats and texts only, no text
    being a number (a recoded column: answers and ``.a`` letters); None for any other column.

    Returns each cell's index into the table of distinct values, that table (an object array with
    NaN appended, the index of blank cells) and the mask of its texts.  The cells are hashed once
    (``pd.factorize``, in C) and only the distinct values are looked at, so ``table[codes]`` gives
    the column back with every cell holding one shared object per distinct value.  Values that
    compare equal share one entry (``1`` and ``1.0``: the first one seen; the number is the same).
    """
    codes, uniques = pd.factorize(values, use_na_sentinel=True)
    kinds = np.fromiter(map(type, uniques), dtype=object, count=len(uniques))
    is_text = kinds == str
    if not (is_text | (kinds == float)).all():
        return None
    if pd.to_numeric(pd.Series(uniques[is_text], dtype=object), errors="coerce").notna().any():
        return None  # a text that is a number ("7"): the general way
    numbers = np.full(len(uniques), np.nan)
    numbers[~is_text] = uniques[~is_text].astype(np.float64)
    codes, other_zero = signed_zeros(codes, numbers, values)
    extra = [] if other_zero is None else [other_zero]
    table = np.empty(len(uniques) + len(extra) + 1, dtype=object)
    table[:len(uniques)] = uniques
    table[len(uniques):-1] = extra
    table[-1] = np.nan
    return codes, table, np.append(is_text, np.zeros(len(extra), dtype=bool))


def signed_zeros(codes: np.ndarray, distinct: np.ndarray, values: np.ndarray) -> tuple[np.ndarray, float | None]:
    """Codes in which the zeros of the sign the distinct zero lacks get a code of their own.

    ``pd.factorize`` takes ``0.0`` and ``-0.0`` for one value (they compare equal), keeping the
    first one seen; a file written from the distinct values keeps each cell's own sign.  ``distinct``
    holds the distinct values as floats (NaN for texts), ``values`` the cells.  Returns the codes
    (changed in place) and the zero of the other sign, whose code is ``len(distinct)``, or None.
    """
    zero = np.flatnonzero(distinct == 0)
    if not zero.size:
        return codes, None
    k = zero[0]
    cells = np.flatnonzero(codes == k)
    flipped = cells[np.signbit(np.asarray(values[cells], dtype=np.float64)) != np.signbit(distinct[k])]
    if not flipped.size:
        return codes, None
    codes[flipped] = len(distinct)
    return codes, float(-distinct[k])


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
