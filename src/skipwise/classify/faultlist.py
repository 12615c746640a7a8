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


def _joined(data: pd.DataFrame, columns: list[str], rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``col=value; col=value`` at each of ``rows``, as codes and distinct texts.

    The codes of the columns are combined one column at a time and factorized again, so the
    text is built once per distinct combination of stored values.
    """
    if not columns:
        return np.zeros(rows.size, dtype=np.int64), np.array([""], dtype=object)
    codes = np.zeros(rows.size, dtype=np.int64)
    texts = np.array([""], dtype=object)
    for k, col in enumerate(columns):
        c, t = _coded_text(data[col], rows)
        codes, combos = pd.factorize(codes * len(t) + c)
        part = (col + "=") + t[combos % len(t)]
        texts = (texts[combos // len(t)] + "; " + part) if k else part
    return codes, texts


def _stored_text(data: pd.DataFrame, columns: tuple[str, ...], rows: np.ndarray, *,
                 multi: bool) -> tuple[np.ndarray, np.ndarray]:
    if not multi:
        return _coded_text(data[columns[0]], rows)
    return _joined(data, list(columns), rows)


def _rule_columns(q: Questionnaire, rule: ast.BoolNode | None) -> list[str]:
    """Columns a rule reads, in order of first mention (a set read as a whole: its option columns)."""
    if rule is None:
        return []
    names = dict.fromkeys(n for n, _ in ast.names(rule))
    return list(dict.fromkeys(c for n in names for c in (q.item(n).columns if n in q else (n,))))


class _Texts:
    """Codes per fault and distinct texts, gathered item by item into one text column."""

    def __init__(self) -> None:
        self.codes: list[np.ndarray] = []
        self.texts: list[np.ndarray] = []
        self.size = 0

    def add(self, coded: tuple[np.ndarray, np.ndarray]) -> None:
        codes, texts = coded
        self.codes.append(codes.astype(np.int64, copy=False) + self.size)
        self.texts.append(texts)
        self.size += len(texts)

    def column(self) -> pd.Series | np.ndarray:
        return text_column(np.concatenate(self.codes), np.concatenate(self.texts))


_STR = pd.Series(np.array(["x"], dtype=object)).dtype  # the text dtype pandas gives object arrays of str


def text_column(codes: np.ndarray, texts: np.ndarray) -> pd.Series | np.ndarray:
    """``texts[codes]`` as the column pandas would make of it, built without a Python pass per cell.

    Where pandas stores text in Arrow arrays, the distinct texts go to Arrow once and are taken
    there by the codes (a dictionary array decoded); otherwise the object array itself.
    """
    if isinstance(_STR, pd.StringDtype) and _STR.storage == "pyarrow":
        import pyarrow as pa

        taken = pa.DictionaryArray.from_arrays(pa.array(codes), pa.array(texts, type=pa.large_string())
                                               ).dictionary_decode()
        return pd.Series(pd.arrays.ArrowStringArray(taken, dtype=_STR), copy=False)
    return texts[codes]


def fault_listing(q: Questionnaire, codes: np.ndarray, categories: tuple[str, ...], fault_codes: list[int],
                  case_ids: np.ndarray, data: pd.DataFrame) -> pd.DataFrame:
    """One row per fault cell, items in interview order and cases in file order within an item.

    Reads only the item's own columns and the columns its rule reads, at the faulty rows.
    """
    rows_all, item_of, rules, positions = [], [], [], []
    values, inputs, status = _Texts(), _Texts(), []
    names: list[str] = []
    for j, name in enumerate(q.item_names):
        rows = np.flatnonzero(isin_small(codes[:, j], fault_codes))
        if rows.size == 0:
            continue
        item = q.item(name)
        rows_all.append(rows)
        item_of.append(np.full(rows.size, len(names), dtype=np.int64))
        status.append(codes[rows, j])
        names.append(name)
        positions.append(j)
        rules.append(item.rule_text)
        values.add(_stored_text(data, item.columns, rows, multi=item.type is ItemType.MULTI))
        inputs.add(_joined(data, _rule_columns(q, item.rule), rows))
    if not rows_all:
        return pd.DataFrame({c: pd.Series(dtype=object) for c in FAULT_COLUMNS})
    which = np.concatenate(item_of)
    rule_texts = np.asarray(rules, dtype=object)
    # (an item without a rule has no rule text: None, as the listing always showed it)
    rule = rule_texts[which] if any(r is None for r in rules) else text_column(which, rule_texts)
    return pd.DataFrame({
        "case_id": case_ids[np.concatenate(rows_all)],
        "item": text_column(which, np.asarray(names, dtype=object)),
        "status": text_column(np.concatenate(status).astype(np.int64), np.asarray(categories, dtype=object)),
        "value": values.column(),
        "rule": rule,
        "inputs": inputs.column(),
    }, copy=False)
