"""Status-coded exports of a classified file.

Two forms, chosen by the user:

``columns``
    All original columns unchanged, plus one integer status column per item
    (``<item>_status``) whose value labels name the status.
``recoded``
    All original columns, but in every numeric item column each cell that is
    not an answer carries a distinct special code per status.  In ``.sav`` the
    codes are numbers (``STATUS_CODES``) declared as user-missing values with
    labels; in ``.dta`` they are extended missing values (``STATUS_LETTERS``)
    with labels; in ``.parquet`` and ``.csv`` they are the numbers.  An analyst
    in any package then sees why each cell is empty.  Text and date items, and
    categorical items whose categories are texts, keep their cells (those formats
    have no missing codes for text) and get a status column instead.

The numbering is fixed so files of different waves line up (docs/contract.md §1,
docs/statuses.md): statuses 1-9, reasons 11-99 by the questionnaire's
:attr:`~skipwise.questionnaire.model.Questionnaire.reason_numbers`; a recoded
``.sav`` holds -900 - number, a recoded ``.dta`` the letters ``.a``-``.h``
(statuses 2-9) and ``.i``-``.z`` (reasons 11-28).
"""

from __future__ import annotations

from enum import Enum
from pathlib import Path
from typing import Iterator

import numpy as np
import pandas as pd

from skipwise.classify import statuses as S
from skipwise.classify.cells import column_views
from skipwise.classify.delivery import status_value_labels
from skipwise.classify.result import Classification
from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError
from skipwise.generated import Generated, check_generated
from skipwise.io import SurveyMeta, get_meta
from skipwise.io.writers_common import signed_zeros
from skipwise.questionnaire.model import ItemType

__all__ = ["ExportForm", "status_numbers", "status_letters", "with_status_columns", "recoded_copy",
           "STATUS_SUFFIX", "status_columns", "fault_listing", "fault_listing_parts", "fault_count",
           "write_fault_listing", "faults_path"]

STATUS_SUFFIX = "_status"
#: Extended missing letters of Stata, ``.a`` ... ``.z``: statuses 2-9 take ``.a``-``.h``, reasons 11-28 ``.i``-``.z``.
_LETTERS = "abcdefghijklmnopqrstuvwxyz"


class ExportForm(str, Enum):
    COLUMNS = "columns"
    RECODED = "recoded"


def status_numbers(cl: Classification) -> dict[str, int]:
    """Stable number of every status (docs/contract.md §1): fixed ones 1-9, reasons 11-99 (docs/statuses.md).

    Reasons come in the order of their numbers, so the value labels written from this mapping are
    in the same order in every run (the questionnaire's mapping follows no fixed order).
    """
    return questionnaire_status_numbers(cl.questionnaire)


def questionnaire_status_numbers(q) -> dict[str, int]:
    """:func:`status_numbers` from the questionnaire alone (every classification of ``q`` has these)."""
    reasons = sorted(q.reason_numbers.items(), key=lambda kv: kv[1])
    return {**S.STATUS_NUMBERS, **dict(reasons)}


def status_codes(cl: Classification) -> dict[str, int]:
    """Special code of every non-answer status in a recoded ``.sav``: -900 - its number."""
    return {s: -900 - k for s, k in status_numbers(cl).items() if s != S.ANSWERED}


def letter_of(number: int) -> str | None:
    """Stata extended missing letter of a status number: 2-9 -> ``.a``-``.h``, 11-28 -> ``.i``-``.z``."""
    if 2 <= number <= 9:
        return "." + _LETTERS[number - 2]
    if 11 <= number <= 28:
        return "." + _LETTERS[number - 3]
    return None


def status_letters(cl: Classification) -> dict[str, str]:
    """Extended missing letter of every non-answer status with one (reasons above 28 have none)."""
    out = {}
    for status, number in status_numbers(cl).items():
        letter = letter_of(number) if status != S.ANSWERED else None
        if letter is not None:
            out[status] = letter
    return out


def _check_letters(cl: Classification, numeric_items: list[str]) -> None:
    """Refuse a recoded ``.dta`` when a numeric item carries a reason numbered above 28 (one problem per reason)."""
    q = cl.questionnaire
    carriers: dict[str, list[str]] = {}
    for name in numeric_items:
        for reason in q.item(name).nonresponse_reasons:
            if letter_of(q.reason_numbers[reason]) is None:
                carriers.setdefault(reason, []).append(name)
    problems = []
    for reason, names in carriers.items():
        code = q.item(names[0]).code_for(reason)
        shown = ", ".join(names[:10]) + (f" and {len(names) - 10} more" if len(names) > 10 else "")
        problems.append(Problem(
            code=ProblemCode.NO_STATA_LETTER, category=Category.USAGE, file=q.path, item=names[0],
            line=code.line if code is not None else None,
            message=f"reason '{reason}' has number {q.reason_numbers[reason]}, but Stata's extended missing "
                    f"letters .i-.z only hold reasons 11-28; numeric items carrying it: {shown}",
            hint="write the 'columns' form (status columns beside the data) for this file, or pin the reason to "
                 "a free number from 11 to 28 with 'number:' in the questionnaire"))
    if problems:
        raise SkipwiseError(problems, headline=f"{len(problems)} reason(s) cannot be written in recoded .dta form")


def _by_code(cl: Classification, mapping: dict[str, object], fill: object) -> np.ndarray:
    """Lookup array from the classification's category codes to ``mapping``'s values."""
    return np.array([mapping.get(c, fill) for c in cl.categories], dtype=object)


def with_status_columns(data: pd.DataFrame, cl: Classification, meta: SurveyMeta | None = None,
                        items: list[str] | None = None, dtype: type = np.int16) -> tuple[pd.DataFrame, SurveyMeta]:
    """The data plus one labelled integer status column per item.

    ``dtype`` is that of the status columns: int16, or float32 for a frame about to be written
    (the writers hand numbers to pyreadstat as floats; float32 holds every status number exactly,
    so the file is the same and no second copy of the columns is made).
    """
    meta = (meta or get_meta(data)).copy()
    numbers = status_numbers(cl)
    lookup = np.array([numbers[c] for c in cl.categories], dtype=dtype)
    labels = status_value_labels(numbers, cl.questionnaire)
    chosen = [(j, name) for j, name in enumerate(cl.items) if items is None or name in items]
    check_generated(status_columns([name for _, name in chosen]), data.columns)
    # One column-major block filled column by column, handed to pandas without a copy: the status
    # columns exist once in memory (a dict of columns would be copied into a block by pandas).
    block = np.empty((len(chosen), len(data)), dtype=dtype).T
    for k, (j, name) in enumerate(chosen):
        np.take(lookup, cl.codes[:, j], out=block[:, k])
        col = name + STATUS_SUFFIX
        meta.column_labels[col] = f"skipwise status of {name}"
        meta.value_labels[col] = dict(labels)
        meta.measure[col] = "nominal"
    new = pd.DataFrame(block, index=data.index, columns=[name + STATUS_SUFFIX for _, name in chosen], copy=False)
    out = pd.concat([data, new], axis=1)
    out.attrs = {}
    return out, meta


def status_columns(items: list[str] | tuple[str, ...]) -> list[Generated]:
    """The ``<item>_status`` names the export adds, for the generated-name guard."""
    return [Generated(name=name + STATUS_SUFFIX, role=f"status column of '{name}'",
                      hint="rename the data's column before exporting statuses, or use the recoded form")
            for name in items]


def recoded_copy(data: pd.DataFrame, cl: Classification, fmt: str, meta: SurveyMeta | None = None
                 ) -> tuple[pd.DataFrame, SurveyMeta]:
    """The data with every non-answer cell of numeric items replaced by its status's special code."""
    meta = (meta or get_meta(data)).copy()
    stata = fmt == "dta"
    if stata:
        _check_letters(cl, [n for n in cl.items if not _keeps_cells(cl.questionnaire.item(n))])
    mapping = status_letters(cl) if stata else status_codes(cl)
    lookup = _by_code(cl, mapping, None)
    labels = status_value_labels(mapping, cl.questionnaire)
    out = data.copy(deep=False)  # the columns replaced below are new arrays; the others are shared (copy on write)
    text_items = []
    answered = cl.code(S.ANSWERED)
    for j, name in enumerate(cl.items):
        item = cl.questionnaire.item(name)
        if _keeps_cells(item):
            text_items.append(name)
            continue
        codes = cl.codes[:, j]
        replace = codes != answered
        for col in item.columns:
            _check_no_collision(data[col], mapping, col, stata)
            stored = data[col]
            if stata and stored.dtype == np.float64:
                values = _floats_with_letters(stored.to_numpy(), replace, lookup, codes)
            else:
                values = stored.to_numpy(dtype=object, na_value=np.nan).copy()
                if stata:  # answers as numbers (ints, numbers stored as text: a CSV column holding "Refused")
                    values[~replace] = column_views(stored)[0][~replace]
                values[replace] = lookup[codes[replace]]
            if not stata:
                out[col] = pd.to_numeric(pd.Series(values, index=out.index), errors="coerce")
            elif isinstance(values, pd.Categorical):
                out[col] = pd.Series(values, index=out.index)
            else:  # dtype=object: a column of letters only must not be inferred as text
                out[col] = pd.Series(values, index=out.index, dtype=object)
            # Keep the file's own labels for real answers; drop those of the old codes.
            kept = {k: v for k, v in meta.value_labels.get(col, {}).items()
                    if not any(_same(k, c.value) for c in item.codes if c.kind.value != "substantive")}
            kept.update(labels)
            meta.value_labels[col] = kept
            meta.missing_values[col] = sorted(set(mapping.values()), key=str)
            meta.missing_ranges.pop(col, None)
    if text_items:
        out, meta = with_status_columns(out, cl, meta, items=text_items)
    out.attrs = {}
    return out, meta


def _floats_with_letters(stored: np.ndarray, replace: np.ndarray, lookup: np.ndarray, codes: np.ndarray
                         ) -> pd.Categorical | np.ndarray:
    """A float column with its ``replace`` cells holding their status's letter, as a categorical.

    The categories are the column's distinct numbers followed by the letters (``pd.factorize``
    hashes the floats in C), so the column costs one small code per cell, and pyreadstat judges
    it numeric by its first categories and writes it faster than an object column of the same
    cells (the same bytes).  A column holding both ``0.0`` and ``-0.0`` (equal, so not two
    categories) comes back as an object array keeping each cell's sign.
    """
    answers, distinct = pd.factorize(stored, use_na_sentinel=True)
    letters = list(dict.fromkeys(v for v in lookup if v is not None))
    letter_at = np.array([-1 if v is None else letters.index(v) for v in lookup], dtype=np.intp)
    answers, other_zero = signed_zeros(answers, distinct, stored)
    if other_zero is None:
        at = letter_at[codes[replace]]
        answers[replace] = np.where(at >= 0, at + len(distinct), -1)
        categories = pd.Index(np.concatenate([distinct.astype(object), np.array(letters, dtype=object)]),
                              dtype=object)
        return pd.Categorical.from_codes(answers, dtype=pd.CategoricalDtype(categories))
    distinct = np.append(distinct, other_zero)
    table = np.empty(len(distinct) + len(lookup) + 1, dtype=object)
    table[:len(distinct)] = distinct.astype(object)
    table[len(distinct):-1] = lookup
    table[-1] = np.nan  # a blank answered cell (none after classification; kept blank all the same)
    at = np.where(answers < 0, len(table) - 1, answers)
    at[replace] = codes[replace].astype(np.intp) + len(distinct)
    return table[at]


def _keeps_cells(item) -> bool:
    """Text, date and text-valued categorical items keep their cells (no missing codes for text)."""
    return item.type in (ItemType.TEXT, ItemType.DATE) or (
        item.type is ItemType.CATEGORICAL and bool(item.values) and all(isinstance(k, str) for k in item.values))


def _same(a: object, b: object) -> bool:
    try:
        return float(a) == float(b)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return a == b


def _check_no_collision(series: pd.Series, mapping: dict[str, object], col: str, stata: bool) -> None:
    if stata:
        return
    codes = np.array(list(mapping.values()), dtype=np.float64)
    num, _, _ = column_views(series)
    if np.isin(num, codes).any():
        raise SkipwiseError(Problem(
            code=ProblemCode.CODE_COLLISION, category=Category.DATA, item=col,
            message=f"column '{col}' already holds one of skipwise's status codes ({int(codes.max())} to "
                    f"{int(codes.min())})", hint="use the 'columns' export form for this file"))


def fault_listing(cl: Classification) -> pd.DataFrame:
    """The routing faults as written beside a classified file: the case id column keeps the
    data's own name (``resp_id``, not ``case_id``) unless that name is one of the listing's
    other columns, when it stays ``case_id``."""
    faults = cl.faults
    cid = cl.questionnaire.case_id
    if cid and cid != "case_id" and cid not in faults.columns:
        faults = faults.rename(columns={"case_id": cid})
    return faults


def _listing_columns(cl: Classification, columns: list[str]) -> dict[str, str]:
    cid = cl.questionnaire.case_id
    if cid and cid != "case_id" and cid not in columns:
        return {"case_id": cid}
    return {}


def _fault_counts(cl: Classification) -> np.ndarray:
    """Fault cells (``off_route``, ``wrong_code``, ``invalid``) per item."""
    wanted = [cl.code(s) for s in S.FAULT_STATUSES if s in cl.categories]
    per_code = np.stack([np.bincount(cl.codes[:, j], minlength=len(cl.categories)) for j in range(len(cl.items))]
                        ) if len(cl.items) else np.zeros((0, len(cl.categories)), dtype=np.int64)
    return per_code[:, wanted].sum(axis=1)


def fault_count(cl: Classification) -> int:
    """How many rows :func:`fault_listing` has, counted from the statuses (the listing is not built)."""
    if "faults" in cl.__dict__:  # already built
        return len(cl.faults)
    return int(_fault_counts(cl).sum())


def fault_listing_parts(cl: Classification, rows: int = 500_000) -> Iterator[pd.DataFrame]:
    """:func:`fault_listing` in parts of about ``rows`` rows (whole items, in interview order).

    Concatenated, the parts are the listing itself; one part is held at a time (about 270 bytes a
    fault), so a file with tens of millions of faults is listed in a bounded amount of memory.
    Each part is the listing of a run of consecutive items, and scans only those items.
    """
    if "faults" in cl.__dict__:
        yield fault_listing(cl)
        return
    per_item = _fault_counts(cl)
    items = np.flatnonzero(per_item)
    if items.size == 0:
        return
    # A new part starts at the item that brings the running count past a multiple of ``rows``.
    ends = np.cumsum(per_item[items])
    cut = np.flatnonzero(np.diff(ends // max(rows, 1), prepend=0)) + 1
    for group in np.split(items, cut[cut < items.size]):
        part = cl.fault_listing_of(group)
        yield part.rename(columns=_listing_columns(cl, list(part.columns)))


def write_fault_listing(cl: Classification, path: str | Path, rows: int = 500_000) -> int:
    """Write :func:`fault_listing` as CSV to ``path`` (a publisher's temporary file), part by part.

    The bytes are those of ``fault_listing(cl).to_csv(path, index=False)``; returns the row count
    (``rows``: about how many rows are built at a time).
    """
    from skipwise.classify.faultlist import FAULT_COLUMNS
    from skipwise.io.writers_table import write_csv_frames

    header = [_listing_columns(cl, FAULT_COLUMNS).get(c, c) for c in FAULT_COLUMNS]
    return write_csv_frames(fault_listing_parts(cl, rows), path, header)


def faults_path(out: Path) -> Path:
    """Where the fault listing of ``out`` goes: ``x.sav`` -> ``x.sav.faults.csv`` (docs/contract.md §5), so
    ``x.sav`` and ``x.dta`` never claim the same file."""
    return out.with_name(out.name + ".faults.csv")
