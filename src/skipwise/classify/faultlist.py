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


def _number_codes(x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Codes and distinct numbers of ``x``: offsets from the least whole number where the numbers
    are whole and few apart (no hashing), else a factorization; NaN is a value of its own."""
    if x.size:
        lo, hi = np.fmin.reduce(x), np.fmax.reduce(x)  # NaN ignored (all NaN: NaN)
        if np.isfinite(lo) and np.isfinite(hi) and hi - lo < 4096 and lo == np.floor(lo):
            span = int(hi - lo) + 1
            shifted = np.subtract(x, lo)
            nan = np.isnan(shifted)
            if nan.any():
                shifted[nan] = span
            codes = shifted.astype(np.int32)
            if np.array_equal(codes, shifted):  # whole numbers only
                # every whole number lo..hi gets a text, used or not: at most 4,097 short texts
                return codes, np.append(np.arange(span, dtype=np.float64) + lo, np.nan)
    codes, uniques = pd.factorize(x, use_na_sentinel=False)
    return codes, uniques


def _coded_text(series: pd.Series, rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Codes (one per row) and the distinct texts they index, for ``series`` at ``rows``."""
    if _is_number(series.dtype):
        # Distinct numbers first, then text for each distinct number only.
        x = series.to_numpy(dtype=np.float64, na_value=np.nan)[rows]
        codes, uniques = _number_codes(x)
        return codes, _number_text(uniques)
    text = cell_text(series.iloc[rows]).to_numpy(dtype=object)
    codes, uniques = pd.factorize(text, use_na_sentinel=False)
    return codes, np.asarray(uniques, dtype=object)


def _dense_codes(values: np.ndarray, span: int) -> tuple[np.ndarray, np.ndarray]:
    """Codes and distinct values of ``values`` (whole numbers in ``0..span-1``): a table of the values
    present where ``span`` is small beside the number of values (no hashing), else a factorization."""
    if span > 4 * values.size + 4096:
        return pd.factorize(values)
    present = np.zeros(span, dtype=np.intp)
    present[values] = 1
    combos = np.flatnonzero(present)
    present[combos] = np.arange(combos.size)
    return present[values], combos


def _joined(data: pd.DataFrame, columns: list[str], rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``col=value; col=value`` at each of ``rows``, as codes and distinct texts.

    The codes of the columns are combined into one number per row (mixed radix) and factorized
    once, so the text is built once per distinct combination of stored values.
    """
    if not columns:
        return np.zeros(rows.size, dtype=np.int64), np.array([""], dtype=object)
    parts = [_coded_text(data[col], rows) for col in columns]
    if len(parts) == 1:
        codes, texts = parts[0]
        return codes, (columns[0] + "=") + texts
    sizes = [len(t) for _, t in parts]
    if float(np.prod(np.array(sizes, dtype=np.float64))) >= 2.0 ** 62:
        # too many combinations for one number: combine two columns at a time instead
        codes, texts = parts[0][0], (columns[0] + "=") + parts[0][1]
        for col, (c, t) in zip(columns[1:], parts[1:]):
            codes, combos = pd.factorize(codes * len(t) + c)
            texts = texts[combos // len(t)] + "; " + ((col + "=") + t[combos % len(t)])
        return codes, texts
    combined = parts[0][0].astype(np.int64, copy=True)
    for (c, _), size in zip(parts[1:], sizes[1:]):
        combined *= size
        combined += c
    codes, combos = _dense_codes(combined, int(np.prod(np.array(sizes, dtype=np.int64))))
    texts = None
    for k in range(len(parts) - 1, -1, -1):  # the last column is the lowest digit
        digit = combos % sizes[k]
        combos = combos // sizes[k]
        part = (columns[k] + "=") + parts[k][1][digit]
        texts = part if texts is None else part + "; " + texts
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
    """Codes per fault and distinct texts, written item by item into one preallocated code array."""

    def __init__(self, total: int) -> None:
        self.codes = np.empty(total, dtype=np.int32 if total < 2**31 else np.int64)
        self.texts: list[np.ndarray] = []
        self.size = 0

    def add(self, at: int, coded: tuple[np.ndarray, np.ndarray]) -> None:
        codes, texts = coded
        np.add(codes, self.size, out=self.codes[at:at + len(codes)], casting="unsafe")
        self.texts.append(texts)
        self.size += len(texts)

    def column(self) -> pd.Series | np.ndarray:
        return text_column(self.codes, np.concatenate(self.texts))


_STR = pd.Series(np.array(["x"], dtype=object)).dtype  # the text dtype pandas gives object arrays of str


def text_column(codes: np.ndarray, texts: np.ndarray) -> pd.Series | np.ndarray:
    """``texts[codes]`` as the column pandas would make of it, built without a Python pass per cell.

    Where pandas stores text in Arrow arrays, the distinct texts go to Arrow once and are taken
    there by the codes (Arrow's take: the strings written once, at their final place); otherwise
    the object array itself.
    """
    if isinstance(_STR, pd.StringDtype) and _STR.storage == "pyarrow":
        import pyarrow as pa

        import pyarrow.compute as pc

        taken = pc.take(pa.array(texts, type=pa.large_string(), from_pandas=True), codes)
        return pd.Series(pd.arrays.ArrowStringArray(taken, dtype=_STR), copy=False)
    return texts[codes]


def _nulls_are_nan() -> bool:
    """Whether pandas turns an object array of texts and None into its text dtype with NaN (pandas 3)."""
    return isinstance(_STR, pd.StringDtype) and _STR.storage == "pyarrow" and _STR.na_value is np.nan


def fault_listing(q: Questionnaire, codes: np.ndarray, categories: tuple[str, ...], fault_codes: list[int],
                  case_ids: np.ndarray, data: pd.DataFrame, which: np.ndarray | None = None) -> pd.DataFrame:
    """One row per fault cell, items in interview order and cases in file order within an item.

    Reads only the item's own columns and the columns its rule reads, at the faulty rows;
    ``which`` (item positions, ascending) lists only those items' faults: the listing of a run of
    items, a part of the whole one.
    """
    items = q.items
    positions = range(len(items)) if which is None else which
    found = [(j, np.flatnonzero(isin_small(codes[:, j], fault_codes))) for j in positions]
    found = [(j, rows) for j, rows in found if rows.size]
    if not found:
        return pd.DataFrame({c: pd.Series(dtype=object) for c in FAULT_COLUMNS})
    total = sum(rows.size for _, rows in found)
    rows_all = np.concatenate([rows for _, rows in found])
    owner = np.repeat(np.arange(len(found), dtype=np.int32), [rows.size for _, rows in found])
    status = np.empty(total, dtype=np.int32)
    values, inputs = _Texts(total), _Texts(total)
    names, rules = [], []
    at = 0
    for j, rows in found:
        item = items[j]
        names.append(item.name)
        rules.append(item.rule_text)
        status[at:at + rows.size] = codes[rows, j]
        values.add(at, _stored_text(data, item.columns, rows, multi=item.type is ItemType.MULTI))
        inputs.add(at, _joined(data, _rule_columns(q, item.rule), rows))
        at += rows.size
    rule_texts = np.asarray(rules, dtype=object)
    # (an item without a rule has no rule text: missing, as the listing always showed it)
    rule = text_column(owner, rule_texts) if _nulls_are_nan() else rule_texts[owner]
    return pd.DataFrame({
        "case_id": case_ids[rows_all],
        "item": text_column(owner, np.asarray(names, dtype=object)),
        "status": text_column(status, np.asarray(categories, dtype=object)),
        "value": values.column(),
        "rule": rule,
        "inputs": inputs.column(),
    }, copy=False)
