"""One column of data (with its metadata) drafted as one item.

The type is taken, in this order, from

1. a date column: ``date``;
2. value labels covering every observed value that is not a code: ``categorical``;
3. a pandas categorical column (e.g. from Parquet): ``categorical`` with its categories
   (``level: ordinal`` when the categories are ordered);
4. few distinct values (:data:`FEW_VALUES`, each seen on average at least :data:`REPEATS`
   times): ``categorical`` with the observed values, for text columns, and for whole-number
   columns of a file that has no value labels at all (a labelled file labels its categories);
5. otherwise ``integer``/``number`` for numbers and ``text`` for free text.

Stored texts that read like "Don't know", "Refused", "N/A" become codes, in any column; numbers
become codes only where a label or a missing-value definition says so.  A range comes from the
value labels when there are any, else from the observed values, and each is marked for review.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from skipwise.classify.cells import column_views
from skipwise.draft.guess import data_text_codes, guess_code, make_code, typical_codes_note
from skipwise.draft.model import LABELS_RANGE_NOTE, OBSERVED_NOTE, SAS, STATA, DraftCode, DraftItem, Value
from skipwise.io.meta import SurveyMeta, normalize_value
from skipwise.questionnaire.model import ItemType

__all__ = ["draft_item", "FEW_VALUES", "REPEATS", "LONGEST_CATEGORY"]

#: At most this many distinct values (codes aside) make a column categorical.  Twelve covers the
#: usual rating scales (0-10 has 11 points) and short lists (common practice, no source).
FEW_VALUES = 12
#: ...and only when each value is seen on average at least this many times: values seen once
#: each are names, ids or free text, not categories (common practice, no source).
REPEATS = 2
#: A text longer than this is an answer in words, not a category (common practice, no source).
LONGEST_CATEGORY = 60
FROM_DATA_NOTE = "# values: the distinct values observed (no value labels): add labels, confirm the list"


def _hits(value: Value, num: np.ndarray, txt: np.ndarray | None) -> np.ndarray:
    if isinstance(value, str):
        return (txt == value) if txt is not None else np.zeros(len(num), bool)
    return num == float(value)


def _num_text(v: Value) -> str:
    return str(normalize_value(v))


def _metadata_codes(col: str, num: np.ndarray, txt: np.ndarray | None, blank: np.ndarray,
                    labels: dict[Value, str], meta: SurveyMeta) -> tuple[dict[Value, DraftCode], list[str]]:
    codes: dict[Value, DraftCode] = {}
    notes: list[str] = []
    src = {"dta": STATA, "sas7bdat": SAS, "xpt": SAS}.get(meta.source_format or "", "SPSS missing value")
    for v in meta.missing_values.get(col, []):
        v = normalize_value(v)
        codes.setdefault(v, make_code(v, labels.get(v), src))
    for lo, hi in meta.missing_ranges.get(col, []):
        seen = np.unique(num[~blank & (num >= lo) & (num <= hi)])
        inside = {normalize_value(x) for x in seen} | {k for k in labels
                                                         if not isinstance(k, str) and lo <= k <= hi}
        for v in sorted(inside):
            codes.setdefault(v, make_code(v, labels.get(v), "SPSS missing range"))
        notes.append(f"# SPSS missing range [{_num_text(lo)}, {_num_text(hi)}]: "
                     "only values seen or labelled became codes")
    for v, lab in labels.items():
        if v not in codes and guess_code(lab):
            codes[v] = make_code(v, lab, "value label")
    return codes, notes


def _categories(s: pd.Series) -> list[Value] | None:
    """The declared categories of a pandas categorical column (numbers or texts), else None."""
    if not isinstance(s.dtype, pd.CategoricalDtype):
        return None
    cats = [normalize_value(c) for c in s.cat.categories]
    if all(isinstance(c, str) for c in cats):
        return [c.strip() for c in cats if c.strip()]
    if all(isinstance(c, int) for c in cats):
        return cats
    return None  # non-whole or mixed categories: drafted from the values like any other column


def _few(values: np.ndarray, n_cells: int) -> bool:
    k = len(values)
    return 0 < k <= FEW_VALUES and n_cells >= REPEATS * k


def draft_item(col: str, s: pd.Series, meta: SurveyMeta) -> DraftItem:
    """The draft of one column: type, values, range, codes and review notes."""
    num, txt, blank = column_views(s)
    labels = {normalize_value(k): str(v) for k, v in meta.value_labels.get(col, {}).items()}
    codes, notes = _metadata_codes(col, num, txt, blank, labels, meta)
    declared = _categories(s)
    if txt is not None:  # stored texts that read like "Don't know", "Refused", "N/A"
        words = txt[~blank & np.isnan(num)]
        if declared is not None:
            words = np.concatenate([words, np.array([c for c in declared if isinstance(c, str)], dtype=object)])
        for c in data_text_codes(words, set(codes) | set(labels)):
            codes[c.value] = c
    coded = np.zeros(len(num), bool)
    for v in codes:
        coded |= _hits(v, num, txt)
    rest = ~blank & ~coded
    cats = {k: v for k, v in labels.items() if k not in codes}
    label = meta.column_labels.get(col, "")
    level = {"ordinal": "ordinal"}.get(meta.measure.get(col, ""))
    common = dict(name=col, label=label, codes=tuple(codes.values()))

    if pd.api.types.is_datetime64_any_dtype(s.dtype):
        rng = None
        if rest.any():
            seen = s[rest]
            rng = (seen.min().date().isoformat(), seen.max().date().isoformat())
        return DraftItem(type=ItemType.DATE, range=rng, notes=tuple(notes), **common)
    if declared is not None and not cats:
        values = {c: str(c) for c in declared if c not in codes}
        if values:
            ordered = bool(s.cat.ordered)
            notes.append("# values: the categories of the data's categorical column"
                         + (" (ordered)" if ordered else "") + ": add labels, confirm")
            return DraftItem(type=ItemType.CATEGORICAL, values=values, level="ordinal" if ordered else level,
                             notes=tuple(notes), **common)
    if rest.any():
        numeric = not np.isnan(num[rest]).any()
    else:  # only blanks and codes: numeric unless the labels or codes are text
        numeric = txt is None or any(not isinstance(c.value, str) or c.source in (STATA, SAS)
                                     for c in codes.values()) or (bool(cats) and not any(isinstance(k, str) for k in cats))
    if numeric and all(not isinstance(k, str) for k in cats):
        return _numeric_item(num[rest], s, cats, codes, notes, level, plain=not meta.value_labels, common=common)
    return _text_item(txt[rest] if txt is not None else np.array([], dtype=object), cats, notes, level, common)


def _numeric_item(seen: np.ndarray, s: pd.Series, cats: dict, codes: dict, notes: list[str], level: str | None,
                  *, plain: bool, common: dict) -> DraftItem:
    if cats and np.isin(seen, np.array([float(k) for k in cats])).all():
        return DraftItem(type=ItemType.CATEGORICAL, values=dict(sorted(cats.items())), level=level,
                         notes=tuple(notes), **common)
    whole = bool(np.all(np.floor(seen) == seen)) and all(float(k).is_integer() for k in cats)
    odd = typical_codes_note(seen)
    if odd:
        notes.append(odd)
    distinct = np.unique(seen[np.isfinite(seen)])
    if plain and whole and not cats and _few(distinct, seen.size):
        words = ("False", "True") if pd.api.types.is_bool_dtype(s.dtype) else None
        values = {int(v): words[int(v)] if words else str(int(v)) for v in distinct}
        notes.append(FROM_DATA_NOTE + "; or make it an integer item with a range")
        return DraftItem(type=ItemType.CATEGORICAL, values=values, level=level, notes=tuple(notes), **common)
    itype = ItemType.INTEGER if whole else ItemType.NUMBER
    finite = seen[np.isfinite(seen)]
    rng, range_note = None, OBSERVED_NOTE
    if cats:  # the labelled values span the range; observed values beyond them widen it, noted
        lo, hi = min(float(k) for k in cats), max(float(k) for k in cats)
        range_note = LABELS_RANGE_NOTE
        if finite.size and (finite.min() < lo or finite.max() > hi):
            range_note = (f"# from the value labels [{_num_text(lo)}, {_num_text(hi)}], widened to the observed "
                          f"values: confirm")
            lo, hi = min(lo, float(finite.min())), max(hi, float(finite.max()))
        rng = (normalize_value(lo), normalize_value(hi))
    elif finite.size:
        rng = (normalize_value(float(finite.min())), normalize_value(float(finite.max())))
    if rng is not None:
        inside = [v for v in codes if not isinstance(v, str) and rng[0] <= v <= rng[1]]
        if inside:
            notes.append(f"# range: left out, code {_num_text(inside[0])} lies among the observed values")
            rng = None
    elif not seen.size:
        notes.append("# no values observed: check the type")
    values = None
    if cats and itype is ItemType.INTEGER:
        values = dict(sorted(cats.items()))
        notes.append("# values: labels only, they do not cover every observed value")
    elif cats:
        notes.append("# value labels not kept (non-whole values): " + "; ".join(
            f"{_num_text(k)} = {v}" for k, v in sorted(cats.items()))[:300])
    return DraftItem(type=itype, values=values, range=rng, range_note=range_note, level=level,
                     notes=tuple(notes), **common)


def _text_item(seen: np.ndarray, cats: dict, notes: list[str], level: str | None, common: dict) -> DraftItem:
    distinct = sorted(set(seen.tolist()))
    str_cats = {str(k).strip(): v for k, v in cats.items()}
    if str_cats and set(distinct) <= set(str_cats):
        return DraftItem(type=ItemType.CATEGORICAL, values=dict(sorted(str_cats.items())), level=level,
                         notes=tuple(notes), **common)
    if cats:
        notes.append("# value labels not kept: not every stored value is labelled")
    elif _few(distinct, seen.size) and max(len(v) for v in distinct) <= LONGEST_CATEGORY:
        notes.append(FROM_DATA_NOTE)
        return DraftItem(type=ItemType.CATEGORICAL, values={v: v for v in distinct}, level=level,
                         notes=tuple(notes), **common)
    return DraftItem(type=ItemType.TEXT, notes=tuple(notes), **common)
