"""Variable and value labels of the demo interview file, taken from the questionnaire."""

from __future__ import annotations

from pathlib import Path
from typing import Sequence

from skipwise.demo.population import DISTRICTS
from skipwise.demo.sampling import DISPOSITIONS, INTERVIEW_MODES
from skipwise.io import SurveyMeta
from skipwise.questionnaire import load_questionnaire
from skipwise.questionnaire.model import ItemType

__all__ = ["survey_meta"]

_CONTEXT_LABELS = {
    "case_id": ("Case identifier", None),
    "district": ("District (stratum)", DISTRICTS),
    "stratum": ("Sampling stratum (= district)", DISTRICTS),
    "psu": ("Primary sampling unit (block)", None),
    "sel_prob": ("Probability of selection of the address", None),
    "disposition": ("Final disposition code", DISPOSITIONS),
    "interview_mode": ("Interview mode", INTERVIEW_MODES),
}


def _key(v: object) -> object:
    return int(v) if isinstance(v, float) and v.is_integer() else v


def survey_meta(questionnaire: str | Path, *, missing_codes: Sequence[float] = ()) -> SurveyMeta:
    """Labels (and SPSS user-missing codes) for the interview file of the demo questionnaire.

    Parameters
    ----------
    questionnaire
        Path of the questionnaire file (labels, values and codes come from it).
    missing_codes
        Codes declared user-missing on every questionnaire column (for SPSS).
    """
    q = load_questionnaire(questionnaire)
    meta = SurveyMeta(file_label=q.title[:80] or None)
    for col, (label, values) in _CONTEXT_LABELS.items():
        meta.column_labels[col] = label
        if values:
            meta.value_labels[col] = {int(k): str(v) for k, v in values.items()}
    for item in q.items:
        codes = {_key(c.value): c.label or c.reason.replace("_", " ") for c in item.codes}
        if item.type is ItemType.MULTI:
            for col, (_, opt_label) in zip(item.columns, item.options):
                meta.column_labels[col] = f"{item.label}: {opt_label}"[:250]
                meta.value_labels[col] = {_key(item.selected): "Selected", _key(item.unselected): "Not selected",
                                          **codes}
        elif item.type is ItemType.TEXT:
            meta.column_labels[item.name] = item.label  # a text column carries no numeric labels or codes
            continue
        else:
            meta.column_labels[item.name] = item.label
            vals = {_key(k): v for k, v in (item.values or {}).items()}
            meta.value_labels[item.name] = {**vals, **codes}
        if missing_codes:
            for col in item.columns:
                meta.missing_values[col] = list(missing_codes)
    return meta
