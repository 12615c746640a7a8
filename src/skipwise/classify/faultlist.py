"""The routing-fault listing, built column by column.

One row per ``off_route``, ``wrong_code`` or ``invalid`` cell: case id, item,
status, the stored value and the stored values of the columns the item's rule
reads.  The text of a column is built only at the rows that need it, and only
once per distinct stored value: the rows' values are factorized, the distinct
values are written as text, and the texts are taken back by the codes.  A
joined ``col=value; col=value`` text is built the same way from the codes of
its columns combined, so its cost follows the number of faults and of distinct
value combinations, never the number of columns in the file.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from skipwise.questionnaire.model import ItemType, Questionnaire
from skipwise.rules import ast
from skipwise.rules.evaluate import isin_small

__all__ = ["fault_listing", "FAULT_COLUMNS", "cell_text"]

FAULT_COLUMNS = ["case_id", "item", "status", "value", "rule", "inputs"]


def _is_number(dtype: object) -> bool:
    return pd.api.types.is_numeric_dtype(dtype) and not pd.api.types.is_bool_dtype(dtype)


def _number_text(x: np.ndarray) -> np.ndarray:
    """float64 values as text: whole numbers without a trailing '.0', NaN as ''."""
    whole = np.isfinite(x) & (np.floor(x) == x)
    text = np.where(whole, np.char.mod("%d", np.where(whole, x, 0).astype(np.int64)), x.astype(str))
    return np.where(np.isnan(x), "", text).astype(object)


def cell_text(series: pd.Series) -> pd.Series:
    """Stored cells as text; whole numbers without a trailing '.0'; blank cells ''."""
    if _is_number(series.dtype):
        x = series.to_numpy(dtype=np.float64, na_value=np.nan)
        return pd.Series(_number_text(x), index=series.index, dtype=object)
    return series.astype(object).where(series.notna(), "").astype(str)


def _coded_text(series: pd.Series, rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Codes (one per row) and the distinct texts they index, for ``series`` at ``rows``."""
    if _is_number(series.dtype):
        # Distinct numbers first, then text for each distinct number only.
        x = series.to_numpy(dtype=np.float64, na_value=np.nan)[rows]
        codes, uniques = pd.factorize(x, use_na_sentinel=False)
        return codes, _number_text(uniques)
    text = cell_text(series.iloc[rows]).to_numpy(dtype=object)
    codes, uniques = pd.factorize(text, use_na_sentinel=False)
    return codes, np.asarray(uniques, dtype=object)


def _joined(data: pd.DataFrame, columns: list[str], rows: np.ndarray) -> np.ndarray:
    """``col=value; col=value`` at each of ``rows`` (text built per distinct combination)."""
    if not columns:
        return np.full(rows.size, "", dtype=object)
    codes = np.zeros(rows.size, dtype=np.int64)
    texts = np.array([""], dtype=object)
    for k, col in enumerate(columns):
        c, t = _coded_text(data[col], rows)
        combo, first = np.unique(codes * len(t) + c, return_index=True)
        # each distinct combination: the text so far, then this column's part
        prefix = texts[codes[first]]
        part = (col + "=") + t[c[first]]
        texts = (prefix + "; " + part) if k else part
        codes = np.searchsorted(combo, codes * len(t) + c)
    return texts[codes]


def _stored_text(data: pd.DataFrame, columns: tuple[str, ...], rows: np.ndarray, *, multi: bool) -> np.ndarray:
    if not multi:
        c, t = _coded_text(data[columns[0]], rows)
        return t[c]
    return _joined(data, list(columns), rows)


def _rule_columns(q: Questionnaire, rule: ast.BoolNode | None) -> list[str]:
    """Columns a rule reads, in order of first mention (a set read as a whole: its option columns)."""
    if rule is None:
        return []
    names = dict.fromkeys(n for n, _ in ast.names(rule))
    return list(dict.fromkeys(c for n in names for c in (q.item(n).columns if n in q else (n,))))


def fault_listing(q: Questionnaire, codes: np.ndarray, categories: tuple[str, ...], fault_codes: list[int],
                  case_ids: np.ndarray, data: pd.DataFrame) -> pd.DataFrame:
    """One row per fault cell, items in interview order and cases in file order within an item.

    Reads only the item's own columns and the columns its rule reads, at the faulty rows.
    """
    cats = np.asarray(categories, dtype=object)
    rows_all, item_of, values, inputs = [], [], [], []
    names, rules, positions = [], [], []
    for j, name in enumerate(q.item_names):
        rows = np.flatnonzero(isin_small(codes[:, j], fault_codes))
        if rows.size == 0:
            continue
        item = q.item(name)
        rows_all.append(rows)
        item_of.append(np.full(rows.size, len(names), dtype=np.int64))
        names.append(name)
        positions.append(j)
        rules.append(item.rule_text)
        values.append(_stored_text(data, item.columns, rows, multi=item.type is ItemType.MULTI))
        inputs.append(_joined(data, _rule_columns(q, item.rule), rows) if item.rule is not None
                      else np.full(rows.size, "", dtype=object))
    if not rows_all:
        return pd.DataFrame({c: pd.Series(dtype=object) for c in FAULT_COLUMNS})
    rows = np.concatenate(rows_all)
    which = np.concatenate(item_of)
    col_of = np.asarray(positions, dtype=np.int64)[which]
    return pd.DataFrame({
        "case_id": case_ids[rows],
        "item": np.asarray(names, dtype=object)[which],
        "status": cats[codes[rows, col_of]],
        "value": np.concatenate(values),
        "rule": np.asarray(rules, dtype=object)[which],
        "inputs": np.concatenate(inputs),
    })[FAULT_COLUMNS]
