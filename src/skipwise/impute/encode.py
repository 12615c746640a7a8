"""Turning questionnaire items and context columns into classes and predictors.

A routed item is only *answered* for some cases; elsewhere it was skipped,
refused, and so on. As a class variable such an item takes its answer where
answered and its status (``"skipped"``, ``"refused"``, ...) elsewhere, so
"not asked" is a class of its own. As a predictor, a numeric item enters as
its answer (0 where not answered) plus a 0/1 indicator of "not answered"; a
categorical item enters as indicators of its values plus one of "not
answered". Context columns enter as they are (numeric: missing set to the
mean; text: indicators).

References
----------
Little, R. J. A. and Rubin, D. B. (2019). *Statistical Analysis with Missing Data*,
3rd ed., sec. 3.4 (the missing-indicator device for predictors that do not apply).
"""

from __future__ import annotations

from typing import Sequence

import numpy as np
import pandas as pd

from skipwise.classify import statuses as S
from skipwise.impute.draws import distinct_columns
from skipwise.questionnaire.model import ItemType, Questionnaire

__all__ = ["class_arrays", "predictor_matrix", "item_values"]


def item_values(data: pd.DataFrame, status: pd.DataFrame, q: Questionnaire, name: str) -> np.ndarray:
    """Stored values where the item is answered, NaN elsewhere (object array for text values)."""
    answered = (status[name] == S.ANSWERED).to_numpy()
    col = data[name]
    if pd.api.types.is_numeric_dtype(col) and not pd.api.types.is_bool_dtype(col):
        x = col.to_numpy(dtype=np.float64, na_value=np.nan)
        return np.where(answered, x, np.nan)
    num = pd.to_numeric(col, errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan)
    if q.item(name).type in (ItemType.INTEGER, ItemType.NUMBER) or not np.isnan(num[answered]).any():
        return np.where(answered, num, np.nan)
    out = col.astype(object).to_numpy(copy=True)
    out[~answered] = np.nan
    return out


def class_arrays(data: pd.DataFrame, status: pd.DataFrame, q: Questionnaire,
                 names: Sequence[str]) -> list[np.ndarray]:
    """One array per class variable: items as answer-or-status, context columns as stored."""
    out = []
    for name in names:
        if name in q:
            vals = item_values(data, status, q, name).astype(object)
            not_ans = (status[name] != S.ANSWERED).to_numpy()
            vals[not_ans] = status[name].astype(str).to_numpy()[not_ans]
            out.append(vals)
        else:
            out.append(data[name].to_numpy())
    return out


def predictor_matrix(data: pd.DataFrame, status: pd.DataFrame, q: Questionnaire,
                     names: Sequence[str]) -> np.ndarray:
    """Predictor matrix (no constant) for the given items and context columns; constant columns dropped."""
    parts: list[np.ndarray] = []
    n = len(data)
    for name in names:
        if name in q:
            item = q.item(name)
            vals = item_values(data, status, q, name)
            miss = pd.isna(vals)
            if item.type is ItemType.CATEGORICAL or vals.dtype == object:
                codes, _ = pd.factorize(pd.Series(vals, dtype=object), sort=True)
                k = codes.max(initial=-1) + 1
                parts.append((codes[:, None] == np.arange(1, k)[None, :]).astype(float))
            else:
                parts.append(np.where(miss, 0.0, vals.astype(float))[:, None])
            parts.append(miss.astype(float)[:, None])
            continue
        col = data[name]
        if pd.api.types.is_numeric_dtype(col):
            # a copy: under copy-on-write the array pandas returns may be a read-only view of the data
            x = col.to_numpy(dtype=np.float64, na_value=np.nan, copy=True)
            bad = np.isnan(x)
            x[bad] = np.nanmean(x) if (~bad).any() else 0.0
            parts.append(x[:, None])
        else:
            codes, _ = pd.factorize(col, sort=True, use_na_sentinel=False)
            parts.append((codes[:, None] == np.arange(1, codes.max(initial=-1) + 1)[None, :]).astype(float))
    if not parts:
        return np.empty((n, 0))
    mat = np.hstack(parts)
    keep = np.ptp(mat, axis=0) > 0 if n else np.zeros(mat.shape[1], bool)
    mat = mat[:, keep]
    # Drop exact duplicates of earlier columns (an indicator repeating another): keeps XᵀX regular.
    return mat[:, distinct_columns(mat)]
