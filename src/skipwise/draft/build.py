"""A whole draft from a data frame: the case id, one item per column, codes shared by most items."""

from __future__ import annotations

from collections import Counter

import pandas as pd

from skipwise.classify.cells import column_views
from skipwise.draft.columns import draft_item
from skipwise.draft.model import Draft, DraftCode, DraftItem, Value
from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError, did_you_mean
from skipwise.io.meta import SurveyMeta, get_meta
from skipwise.questionnaire.model import ItemType

__all__ = ["draft_questionnaire", "lift_codes"]


def _pick_case_id(data: pd.DataFrame, case_id: str | None) -> tuple[str, str]:
    cols = [str(c) for c in data.columns]
    if case_id is not None:
        if case_id not in cols:
            raise SkipwiseError(Problem(
                code=ProblemCode.MISSING_COLUMN, category=Category.USAGE, item=case_id,
                message=f"case id column '{case_id}' is not in the data",
                hint=did_you_mean(case_id, cols) or "name one of the data's columns"))
        _, _, blank = column_views(data[case_id])
        unique = bool(data[case_id].is_unique) and not blank.any()
        return case_id, "" if unique else "# note: values are not all unique and filled: check"
    for col in data.columns:
        _, _, blank = column_views(data[col])
        if not blank.any() and data[col].is_unique:
            return str(col), "# first column whose values are all unique and filled: confirm"
    raise SkipwiseError(Problem(
        code=ProblemCode.BAD_DATA, category=Category.DATA,
        message="no column has unique, filled values to serve as the case id",
        hint="name the case id column with --case-id (then run 'skipwise check' to see its duplicates)"))


def _key(c: DraftCode) -> tuple:
    return (c.value if isinstance(c.value, str) else float(c.value), c.reason, c.kind)


def _key_eq(a: Value, b: Value) -> bool:
    if isinstance(a, str) or isinstance(b, str):
        return a == b
    return float(a) == float(b)


def _collides(c: DraftCode, it: DraftItem) -> bool:
    if it.values is not None and any(_key_eq(c.value, k) for k in it.values):
        return True
    if it.range is not None and it.type in (ItemType.INTEGER, ItemType.NUMBER) and not isinstance(c.value, str):
        return it.range[0] <= c.value <= it.range[1]
    return False


def lift_codes(items: list[DraftItem]) -> tuple[list[DraftCode], list[int], list[DraftItem]]:
    """Move codes shared by more than half of the items to the global list.

    A code moves only when it collides with no category or range of the items that do not
    declare it (a code may never be a valid answer).  Returns the global codes, how many items
    declared each, and the items without them.
    """
    per_value: dict[object, Counter] = {}
    example: dict[tuple, DraftCode] = {}
    for it in items:
        for c in it.codes:
            k = _key(c)
            per_value.setdefault(k[0], Counter())[k] += 1
            example.setdefault(k, c)
    lifted, shared = [], []
    for counter in per_value.values():
        k, n = counter.most_common(1)[0]
        code = example[k]
        if len(items) >= 2 and n * 2 > len(items) and not any(
                _collides(code, it) for it in items if all(_key(c) != k for c in it.codes)):
            labels = Counter(c.label for it in items for c in it.codes if _key(c) == k and c.label)
            label = labels.most_common(1)[0][0] if labels else None
            lifted.append(DraftCode(value=code.value, reason=code.reason, kind=code.kind, label=label,
                                    source=code.source, reason_guessed=code.reason_guessed))
            shared.append(n)
    keys = {_key(c) for c in lifted}
    kept = [DraftItem(name=it.name, type=it.type, label=it.label, values=it.values, range=it.range,
                      range_note=it.range_note, level=it.level,
                      codes=tuple(c for c in it.codes if _key(c) not in keys), notes=it.notes) for it in items]
    order = sorted(range(len(lifted)), key=lambda i: (isinstance(lifted[i].value, str), _key(lifted[i])[0]))
    return [lifted[i] for i in order], [shared[i] for i in order], kept


def draft_questionnaire(data: pd.DataFrame, meta: SurveyMeta | None = None, *, case_id: str | None = None,
                        name: str = "draft", title: str | None = None, source: str | None = None) -> Draft:
    """Draft a questionnaire from a data frame and its metadata.

    Parameters
    ----------
    data
        The survey data as :func:`skipwise.io.read_survey` returns it (codes as stored).
    meta
        Labels and missing-value definitions; default ``get_meta(data)``.
    case_id
        The case id column; default the first column whose values are unique and filled.
    name, title
        The survey's short id and title (title default: the file label, else ``name``).
    source
        The data file's name, for the header comment.

    Returns
    -------
    Draft

    Raises
    ------
    SkipwiseError
        MISSING_COLUMN if ``case_id`` is not a column; BAD_DATA if no column can serve.
    """
    meta = get_meta(data) if meta is None else meta
    cid, note = _pick_case_id(data, case_id)
    items = [draft_item(str(col), data[col], meta) for col in data.columns if str(col) != cid]
    codes, shared, items = lift_codes(items)
    return Draft(name=name, title=title or meta.file_label or name, case_id=cid, case_id_note=note,
                 codes=tuple(codes), shared=tuple(shared), items=tuple(items), source=source)
