"""What a delivered data file says about its variables, from the questionnaire.

A statistician opening a delivered ``.sav`` expects measurement levels that follow the items
(categorical answers nominal, counts and amounts scale), and a file that started as a CSV should
carry the questionnaire's variable and value labels like one that started as a ``.sav``.
:func:`delivery_meta` adds both to a :class:`~skipwise.io.meta.SurveyMeta`; it never replaces
what the data file itself declared, except that an item's explicit ``level:`` wins.
"""

from __future__ import annotations

from typing import Mapping

import pandas as pd

from skipwise.io.meta import SurveyMeta, normalize_value
from skipwise.questionnaire.model import Item, ItemType, Questionnaire

__all__ = ["LEVELS", "item_level", "delivery_meta", "status_value_labels", "REASON_WORDS"]

#: SPSS measurement levels an item's ``level:`` may name.
LEVELS = ("nominal", "ordinal", "scale")
_BY_TYPE = {ItemType.CATEGORICAL: "nominal", ItemType.MULTI: "nominal", ItemType.TEXT: "nominal",
            ItemType.INTEGER: "scale", ItemType.NUMBER: "scale", ItemType.DATE: "scale"}


#: Words for the built-in reasons (docs/statuses.md) when the questionnaire's code has no label.
REASON_WORDS: dict[str, str] = {
    "dont_know": "Don't know", "refused": "Refused", "no_answer": "No answer", "not_applicable": "Not applicable",
    "not_stated": "Not stated", "cannot_choose": "Can't choose", "illegible": "Illegible",
    "multiple_answers": "Several answers marked", "interviewer_error": "Interviewer error", "data_lost": "Data lost",
}


def status_value_labels(codes: Mapping[str, object], q: Questionnaire) -> dict[object, str]:
    """Human value labels of status codes, the same in every delivered format.

    ``codes`` maps each status or reason token to the value written for it (its number in a
    status column, -900 - number in a recoded ``.sav``, its letter in a recoded ``.dta``).
    Fixed statuses take the report's labels (``skipwise.rates.STATUS_LABELS``); a reason takes
    its code's label from the questionnaire, else the words of a built-in reason, else its token
    in words, followed by "(nonresponse)".
    """
    from skipwise.rates import STATUS_LABELS

    labelled = {}
    for code in (*q.codes, *(c for it in q.items for c in it.codes)):
        if code.label:
            labelled.setdefault(code.reason, code.label)
    out: dict[object, str] = {}
    for status, value in codes.items():
        if status in STATUS_LABELS:
            out[value] = STATUS_LABELS[status]
        else:
            words = labelled.get(status) or REASON_WORDS.get(status) or status.replace("_", " ").capitalize()
            out[value] = f"{words} (nonresponse)"
    return out


def item_level(item: Item) -> str:
    """The item's ``level:`` if given, else nominal for categorical, set and text items, scale otherwise."""
    return getattr(item, "level", None) or _BY_TYPE[item.type]


def _numeric(s: pd.Series) -> bool:
    if pd.api.types.is_bool_dtype(s.dtype):
        return False
    if pd.api.types.is_numeric_dtype(s.dtype):
        return True
    return s.dtype == object and pd.api.types.infer_dtype(s, skipna=True) in ("integer", "floating",
                                                                              "mixed-integer-float", "empty")


def _code_label(reason: str, label: str | None) -> str:
    return label or reason.replace("_", " ").capitalize()


def _item_labels(item: Item) -> dict[object, str]:
    labels: dict[object, str] = {}
    if item.type is ItemType.MULTI:
        labels[normalize_value(item.selected)] = "Selected"
        if item.unselected is not None:
            labels[normalize_value(item.unselected)] = "Not selected"
    else:
        labels.update({normalize_value(k): str(v) for k, v in (item.values or {}).items()})
    for c in item.codes:
        labels.setdefault(normalize_value(c.value), _code_label(c.reason, c.label))
    # numeric columns take numeric keys only (a text key would not fit the column's type)
    return {k: v for k, v in labels.items() if isinstance(k, (int, float)) and not isinstance(k, bool)}


def delivery_meta(meta: SurveyMeta, q: Questionnaire, frame: pd.DataFrame) -> SurveyMeta:
    """``meta`` with measurement levels and, where the file had none, the questionnaire's labels.

    Parameters
    ----------
    meta
        The data file's own metadata (kept: labels and levels it declares stay as they are).
    q
        The questionnaire: item types (and ``level:``) give the levels, item labels, values and
        code labels give variable and value labels for columns without any.
    frame
        The data to be written (only its columns and their types are looked at).
    """
    out = meta.copy()
    for item in q.items:
        level = item_level(item)
        options = dict(item.options) if item.type is ItemType.MULTI else {}
        for k, col in enumerate(item.columns):
            if col not in frame.columns:
                continue
            if getattr(item, "level", None) or col not in out.measure:
                out.measure[col] = level
            if col not in out.column_labels and item.label:
                opt = item.options[k][1] if options and k < len(item.options) else None
                out.column_labels[col] = f"{item.label}: {opt}"[:250] if opt else item.label
            if col not in out.value_labels and item.type not in (ItemType.TEXT, ItemType.DATE) \
                    and _numeric(frame[col]):
                labels = _item_labels(item)
                if labels:
                    out.value_labels[col] = labels
    for col in frame.columns:  # case id and context columns: labelled numbers are categories
        if col not in out.measure and _numeric(frame[col]):
            out.measure[col] = "nominal" if col in out.value_labels or col == q.case_id else "scale"
        elif col not in out.measure and frame[col].dtype == object:
            if pd.api.types.infer_dtype(frame[col], skipna=True) == "string":
                out.measure[col] = "nominal"
    return out
