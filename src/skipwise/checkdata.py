"""Check a questionnaire against a data file before classifying.

:func:`check_data` compares what the questionnaire declares with what the data
holds and returns a :class:`DataCheck` listing every finding as a
:class:`~skipwise.errors.Problem` (category ``data``).  Findings are *errors*
when classification would be wrong or impossible, *notes* when the file is
merely untidy:

============================ ======== ===================================================
finding (problem code)       severity meaning
============================ ======== ===================================================
``missing-column``           error    a questionnaire column (item, option, context,
                                      case id, break-off paradata) is not in the data
``undeclared-value``         error    cells hold a value that is neither a category, nor
                                      in the range, nor a declared code (top values shown)
``duplicate-case-id``        error    a case id occurs on more than one row
``bad-data``                 error    rows with a blank case id
``unused-code``              note     a declared code never occurs: per item for item
                                      codes; once for a global code, only when it occurs
                                      in none of the items it applies to
``undeclared-column``        note     a data column the questionnaire does not mention
``unnumbered-reason``        note     a nonresponse reason with neither a built-in number
                                      nor a ``number:``: its number may change when
                                      reasons are added (docs/statuses.md)
``no-stata-letter``          note     a reason numbered above 28: no recoded ``.dta``
                                      can hold it (Stata's letters ``.i``-``.z``)
============================ ======== ===================================================

Every count is a sum over rows, so counts of chunks of a file add up.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from enum import Enum
from typing import Sequence

import numpy as np
import pandas as pd

from skipwise.classify import cells as K
from skipwise.errors import Category, Problem, ProblemCode, did_you_mean
from skipwise.io.meta import normalize_value
from skipwise.questionnaire.model import Item, ItemType, Questionnaire

__all__ = ["Severity", "SEVERITY", "DataCheck", "check_data", "ROW_FIELDS"]


class Severity(str, Enum):
    ERROR = "error"   # classification would be wrong: fix before going on
    NOTE = "note"     # worth a look; does not stop anything


SEVERITY: dict[ProblemCode, Severity] = {
    ProblemCode.MISSING_COLUMN: Severity.ERROR,
    ProblemCode.UNDECLARED_VALUE: Severity.ERROR,
    ProblemCode.DUPLICATE_CASE_ID: Severity.ERROR,
    ProblemCode.BAD_DATA: Severity.ERROR,
    ProblemCode.UNUSED_CODE: Severity.NOTE,
    ProblemCode.UNDECLARED_COLUMN: Severity.NOTE,
    ProblemCode.UNNUMBERED_REASON: Severity.NOTE,
    ProblemCode.NO_STATA_LETTER: Severity.NOTE,
}

#: Fields of :meth:`DataCheck.to_rows`.
ROW_FIELDS = ("kind", "item", "finding", "detail", "message", "hint")


@dataclass(frozen=True, kw_only=True)
class DataCheck:
    """Findings of :func:`check_data`.

    Attributes
    ----------
    problems
        Every finding, in the order: case ids, missing columns, undeclared values
        (interview order), unused codes, undeclared columns (data order).
    n_cases, n_columns
        Size of the data checked.
    """

    problems: list[Problem]
    n_cases: int = 0
    n_columns: int = 0

    @staticmethod
    def severity(problem: Problem) -> Severity:
        return SEVERITY.get(problem.code, Severity.ERROR)

    @property
    def errors(self) -> list[Problem]:
        return [p for p in self.problems if self.severity(p) is Severity.ERROR]

    @property
    def notes(self) -> list[Problem]:
        return [p for p in self.problems if self.severity(p) is Severity.NOTE]

    @property
    def ok(self) -> bool:
        """True when no finding is an error (notes allowed)."""
        return not self.errors

    def to_rows(self, fields: Sequence[str] | None = None) -> list[dict[str, object]] | list[tuple]:
        """Flat rows: kind (error/note), item ('' for whole-file findings), finding (the problem
        code), detail (message and hint), message, hint.  With ``fields``, tuples of those fields."""
        rows = []
        for p in self.problems:
            detail = p.message + (f" — {p.hint}" if p.hint else "")
            rows.append({"kind": self.severity(p).value, "item": p.item or "", "finding": p.code.value,
                         "detail": detail, "message": p.message, "hint": p.hint})
        if fields is None:
            return rows
        return [tuple(r[f] for f in fields) for r in rows]


def _show(value: object) -> str:
    if isinstance(value, pd.Timestamp):
        return value.isoformat()
    value = normalize_value(value)
    return repr(value) if isinstance(value, str) else str(value)


def _listed(values: Sequence[object], total: int) -> str:
    text = ", ".join(_show(v) for v in values)
    return text + (f" and {total - len(values):,} more" if total > len(values) else "")


def _problem(code: ProblemCode, message: str, q: Questionnaire, item: str | None = None,
             hint: str | None = None) -> Problem:
    return Problem(code=code, category=Category.DATA, file=q.path, item=item, message=message, hint=hint)


def _case_ids(counts, q: Questionnaire, top: int) -> list[Problem]:
    """Blank and duplicate case ids from merged :class:`~skipwise.checkcounts.CheckCounts`."""
    out = []
    if counts.blank_ids:
        rows = counts.blank_rows
        out.append(_problem(ProblemCode.BAD_DATA, f"{counts.blank_ids:,} row(s) have a blank case id (rows "
                            f"{_listed(list(rows[:top] + 1), counts.blank_ids)})", q, q.case_id,
                            "give every case an id"))
    dups = counts.duplicates
    if dups is not None and dups.distinct:
        out.append(_problem(ProblemCode.DUPLICATE_CASE_ID, f"{dups.distinct:,} case id(s) occur more than once "
                            f"({dups.rows:,} rows): {_listed(list(dups.first['id'][:top]), dups.distinct)}", q,
                            q.case_id, "remove duplicate rows or correct the ids"))
    return out


def _known_columns(q: Questionnaire) -> dict[str, str | None]:
    """Every column the questionnaire names -> the item owning it (None: case id, context, paradata)."""
    known: dict[str, str | None] = {q.case_id: None}
    known.update(dict.fromkeys(q.context))
    for col in (q.breakoff.last_item, q.breakoff.disposition):
        if col:
            known.setdefault(col, None)
    known.update(q.column_owner)
    return known


def _missing(columns: Sequence[str], q: Questionnaire, known: dict[str, str | None]) -> list[Problem]:
    present = [str(c) for c in columns]
    unclaimed = [c for c in present if c not in known]
    out = []
    for col, owner in known.items():
        if col in present:
            continue
        what = ("the case id" if col == q.case_id else f"option column of '{owner}'" if owner and owner != col
                else "an item" if owner else "a context or paradata column")
        out.append(_problem(ProblemCode.MISSING_COLUMN, f"column '{col}' ({what}) is not in the data", q,
                            owner or col, did_you_mean(col, unclaimed)
                            or "add the column to the data or remove it from the questionnaire"))
    return out


def _decoded_columns(item: Item, data: pd.DataFrame) -> list[tuple[str, K.Decoded]]:
    """Decoded cells per data column of the item (each option column of a set on its own)."""
    if item.type is not ItemType.MULTI:
        return [(item.name, K.decode_item(item, data))]
    return [(col, K.decode_item(dataclasses.replace(item, columns=(col,)), data))
            for col in item.columns if col in data.columns]


def _undeclared(item: Item, col: str, values: pd.DataFrame, q: Questionnaire, top: int) -> Problem | None:
    """The finding of one column's undeclared values (``values``: value, cases, first row)."""
    n = int(values["cases"].sum())
    if not n:
        return None
    # stored values as written; most frequent first, ties in order of first appearance
    counts = values.sort_values(["cases", "row"], ascending=[False, True], kind="stable")
    shown = ", ".join(f"{_show(v)} ({c:,})" for v, c in zip(counts["value"].head(top), counts["cases"].head(top)))
    if len(counts) > top:
        shown += f" and {len(counts) - top:,} more value(s)"
    where = f"column '{col}': " if col != item.name else ""
    if item.type is ItemType.MULTI:
        allowed = f"selected {_show(item.selected)}, unselected {_show(item.unselected)}"
    elif item.type is ItemType.CATEGORICAL:
        allowed = "categories " + ", ".join(_show(k) for k in list(item.values or {})[:10])
    elif item.range is not None:
        allowed = f"{item.type.value} range [{_show(item.range[0])}, {_show(item.range[1])}]"
    else:
        allowed = f"type {item.type.value}"
    return _problem(ProblemCode.UNDECLARED_VALUE,
                    f"{where}{n:,} cell(s) hold values that are no declared code and not valid ({allowed}): "
                    f"{shown}", q, item.name,
                    "declare them as categories or codes, widen the range, or correct the data")


def check_data(data: pd.DataFrame, questionnaire: Questionnaire, *, top: int = 5) -> DataCheck:
    """Compare a questionnaire with the data it describes.

    Parameters
    ----------
    data
        The survey data, codes as stored (as :func:`skipwise.io.read_survey` returns it).
    questionnaire
        A loaded questionnaire.
    top
        How many values (and case ids, rows) a finding lists before "and N more".

    Returns
    -------
    DataCheck
        ``ok`` is False when any finding is an error (see the module's table).
    """
    from skipwise.checkcounts import check_counts

    return check_findings(check_counts(data, questionnaire, top=top, whole=True), questionnaire,
                          [str(c) for c in data.columns], top=top)


def check_findings(counts, questionnaire: Questionnaire, columns: Sequence[str], *, top: int = 5) -> DataCheck:
    """The findings of :func:`check_data` from merged counts (:mod:`skipwise.checkcounts`) and the file's columns.

    The dask engine counts partitions and calls this on the client; the in-memory engine
    counts the whole file as one chunk.
    """
    q = questionnaire
    known = _known_columns(q)
    present = set(columns)
    problems = _case_ids(counts, q, top) + _missing(columns, q, known)
    unused: list[Problem] = []
    global_hits = np.zeros(len(q.codes), dtype=np.int64)
    global_users = np.zeros(len(q.codes), dtype=np.int64)
    for item in q.items:
        if item.name not in counts.hits:
            continue
        cols = [c for c in item.columns if c in present] if item.type is ItemType.MULTI else [item.name]
        for col in cols:
            if (item.name, col) in counts.undeclared:
                found = _undeclared(item, col, counts.undeclared[(item.name, col)], q, top)
                if found is not None:
                    problems.append(found)
        hits = counts.hits[item.name]
        for i, code in enumerate(item.codes):
            g = next((j for j, gc in enumerate(q.codes) if gc is code), None)
            if g is not None:
                global_hits[g] += hits[i]
                global_users[g] += 1
            elif hits[i] == 0:
                unused.append(_problem(ProblemCode.UNUSED_CODE, f"code {_show(code.value)} ({code.reason}) "
                                       "never occurs in this item", q, item.name,
                                       "remove it if the instrument cannot produce it"))
    for g, code in enumerate(q.codes):
        if global_users[g] and not global_hits[g]:
            unused.append(_problem(ProblemCode.UNUSED_CODE, f"global code {_show(code.value)} ({code.reason}) "
                                   f"occurs in none of the {global_users[g]:,} item(s) it applies to", q, None,
                                   "remove it if the instrument cannot produce it"))
    extra = [_problem(ProblemCode.UNDECLARED_COLUMN, f"column '{c}' is not in the questionnaire", q, str(c),
                      "add it as an item, or list it under context if it is frame or paradata")
             for c in columns if str(c) not in known]
    return DataCheck(problems=problems + unused + reason_number_notes(q) + extra, n_cases=counts.n,
                     n_columns=len(columns))


def reason_number_notes(q: Questionnaire) -> list[Problem]:
    """Notes on reasons whose stable number is not fixed, or too high for a recoded ``.dta``."""
    from skipwise.questionnaire.numbers import BUILTIN_REASON_NUMBERS, LAST_STATA_LETTER

    codes = [c for c in (*q.codes, *(c for it in q.items for c in it.codes)) if c.kind.value == "nonresponse"]
    out = []
    for reason in sorted(q.reason_numbers, key=q.reason_numbers.__getitem__):
        number = q.reason_numbers[reason]
        first = next(c for c in codes if c.reason == reason)
        pinned = any(c.number is not None for c in codes if c.reason == reason)
        if not pinned and reason not in BUILTIN_REASON_NUMBERS:
            out.append(Problem(code=ProblemCode.UNNUMBERED_REASON, category=Category.DEFINITION, file=q.path,
                               line=first.line, message=f"reason '{reason}' has no built-in number and no "
                               f"'number:'; it is numbered {number} here, which can change when reasons are "
                               "added or removed", hint=f"pin it: add 'number: {number}' to its code "
                               "(docs/statuses.md lists the built-in numbers)"))
        if number > LAST_STATA_LETTER:
            out.append(Problem(code=ProblemCode.NO_STATA_LETTER, category=Category.DEFINITION, file=q.path,
                               line=first.line, message=f"reason '{reason}' has number {number}: a recoded "
                               ".dta cannot hold it (Stata's letters .i-.z take reasons 11-28)",
                               hint="pin a free number from 11 to 28 with 'number:', or write .dta files in "
                               "the columns form"))
    return out
