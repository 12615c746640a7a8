"""What a stored cell holds, before routing is considered.

Each cell of an item is decoded into one *kind*: blank, a structural code, a
nonresponse code, a substantive answer (a valid value or a substantive code)
or an invalid value (neither a declared code nor within the item's values or
range).  Decoding is vectorized per column.

A check-all-that-apply set is decoded from its option columns into one kind
per case:

1. any option column holding an invalid value (not selected, not unselected,
   not a declared code) makes the set ``INVALID``;
2. otherwise, if any option holds the *selected* or the *unselected* value the
   set is answered (``SUBST``): the respondent went through the list;
3. otherwise, the first option column carrying a code gives the set its code
   (so all options coded -9 make the set ``refused``);
4. otherwise (every option blank) the set is ``BLANK``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from skipwise.questionnaire.model import Code, CodeKind, Item, ItemType
from skipwise.rules.evaluate import isin_small

__all__ = ["BLANK", "STRUCT", "NONRESP", "SUBST", "INVALID", "Decoded", "decode_item", "column_views"]

BLANK, STRUCT, NONRESP, SUBST, INVALID = 0, 1, 2, 3, 4
KIND_OF = _KIND_OF = {CodeKind.STRUCTURAL: STRUCT, CodeKind.NONRESPONSE: NONRESP, CodeKind.SUBSTANTIVE: SUBST}


@dataclass(frozen=True)
class Decoded:
    """Decoded cells of one item: kind, matched code (index into ``item.codes``, -1 none), values."""

    kind: np.ndarray       # int8
    code: np.ndarray       # int8, -1 where no code matched
    values: np.ndarray     # float64, or object array of str for text-valued items


def column_views(series: pd.Series) -> tuple[np.ndarray, np.ndarray | None, np.ndarray]:
    """Numeric view, text view (None for numeric columns) and blank mask of a column."""
    if pd.api.types.is_bool_dtype(series.dtype):
        series = series.astype("float64")
    if series.dtype == np.float64:
        num = series.to_numpy()  # no copy; never written to
        return num, None, np.isnan(num)
    if pd.api.types.is_numeric_dtype(series.dtype):
        num = series.to_numpy(dtype=np.float64, na_value=np.nan)
        return num, None, np.isnan(num)
    if pd.api.types.is_datetime64_any_dtype(series.dtype):
        txt = series.dt.strftime("%Y-%m-%d").to_numpy(dtype=object, na_value=None)
        blank = series.isna().to_numpy()
        return np.full(len(series), np.nan), _fill_text(txt, blank), blank
    obj = series.astype(object)
    blank = obj.isna().to_numpy().copy()
    txt = obj.where(~blank, "").astype(str).str.strip().to_numpy(dtype=object)
    blank |= txt == ""
    num = pd.to_numeric(pd.Series(txt, index=series.index, dtype=object), errors="coerce").to_numpy(
        dtype=np.float64, na_value=np.nan)
    return num, txt, blank


def _fill_text(txt: np.ndarray, blank: np.ndarray) -> np.ndarray:
    out = txt.copy()
    out[blank] = ""
    return out


def _match_codes(codes: tuple[Code, ...], num: np.ndarray, txt: np.ndarray | None, blank: np.ndarray) -> np.ndarray:
    """Index of the code each cell carries, -1 for none.

    Code values are distinct and never blank (a blank is NaN or empty text), so at most one
    code matches a cell and the index is a plain sum of (i + 1) * hit_i, minus one.
    """
    idx = np.full(len(num), -1, dtype=np.int8)
    for i, code in enumerate(codes):
        if isinstance(code.value, str):
            if txt is None:
                continue
            hit = txt == code.value
        else:
            hit = num == float(code.value)
        idx += hit.view(np.int8) * np.int8(i + 1)
    return idx


def _valid(item: Item, num: np.ndarray, txt: np.ndarray | None) -> np.ndarray:
    """Cells holding a value the item allows (codes aside)."""
    t = item.type
    if t is ItemType.TEXT:
        return np.ones(len(num), bool)
    if t is ItemType.DATE:
        source = txt if txt is not None else num
        parsed = pd.to_datetime(pd.Series(source, dtype=object), errors="coerce", format="mixed")
        ok = parsed.notna().to_numpy(copy=True)
        if item.range is not None:
            lo, hi = pd.Timestamp(item.range[0]), pd.Timestamp(item.range[1])
            ok &= ((parsed >= lo) & (parsed <= hi)).fillna(False).to_numpy(dtype=bool)
        return ok
    if t is ItemType.CATEGORICAL and item.values is not None:
        keys = list(item.values)
        ok = isin_small(num, [float(k) for k in keys if not isinstance(k, str)])
        str_keys = [k for k in keys if isinstance(k, str)]
        if str_keys and txt is not None:
            ok |= np.isin(txt.astype(str), np.array(str_keys, dtype=str))
        return ok
    ok = ~np.isnan(num)
    if t is ItemType.INTEGER:
        with np.errstate(invalid="ignore"):
            ok &= np.floor(num) == num
    if item.range is not None:
        with np.errstate(invalid="ignore"):
            ok &= (num >= float(item.range[0])) & (num <= float(item.range[1]))
    return ok


def _kinds(item: Item, codes_idx: np.ndarray, valid: np.ndarray, blank: np.ndarray) -> np.ndarray:
    # INVALID - 1 == SUBST: one subtraction on the bool-as-int8 view gives both.
    kind = np.int8(INVALID) - valid.view(np.int8)
    if item.codes:
        table = np.array([_KIND_OF[c.kind] for c in item.codes] + [0], dtype=np.int8)
        np.copyto(kind, np.take(table, codes_idx), where=codes_idx >= 0)
    np.copyto(kind, np.int8(BLANK), where=blank)
    return kind


def _text_valued(item: Item) -> bool:
    if item.type in (ItemType.TEXT, ItemType.DATE):
        return True
    return item.type is ItemType.CATEGORICAL and bool(item.values) and all(isinstance(k, str) for k in item.values)


def decode_item(item: Item, data: pd.DataFrame) -> Decoded:
    """Decode the stored cells of one item (all its columns) for every case."""
    if item.type is ItemType.MULTI:
        return _decode_multi(item, data)
    num, txt, blank = column_views(data[item.name])
    codes_idx = _match_codes(item.codes, num, txt, blank)
    valid = _valid(item, num, txt)
    kind = _kinds(item, codes_idx, valid, blank)
    if _text_valued(item):
        values = txt if txt is not None else np.where(np.isnan(num), "", num.astype(str)).astype(object)
    else:
        values = num
    return Decoded(kind=kind, code=codes_idx, values=values)


def _decode_multi(item: Item, data: pd.DataFrame) -> Decoded:
    n = len(data)
    any_invalid = np.zeros(n, bool)
    any_mark = np.zeros(n, bool)
    first_code = np.full(n, -1, dtype=np.int8)
    for col in item.columns:
        num, txt, blank = column_views(data[col])
        idx = _match_codes(item.codes, num, txt, blank)
        sel = _equals(item.selected, num, txt)
        unsel = _equals(item.unselected, num, txt) if item.unselected is not None else np.zeros(n, bool)
        mark = (sel | unsel) & ~blank & (idx < 0)
        any_mark |= mark
        any_invalid |= ~blank & (idx < 0) & ~mark
        first_code = np.where((first_code < 0) & (idx >= 0), idx, first_code).astype(np.int8)
    table = np.array([_KIND_OF[c.kind] for c in item.codes] + [0], dtype=np.int8)
    kind = np.full(n, BLANK, dtype=np.int8)
    coded = first_code >= 0
    kind[coded] = table[first_code[coded]]
    kind[any_mark] = SUBST
    kind[any_invalid] = INVALID
    code = np.where(any_mark | any_invalid, -1, first_code).astype(np.int8)
    return Decoded(kind=kind, code=code, values=np.full(n, np.nan))


def _equals(value: object, num: np.ndarray, txt: np.ndarray | None) -> np.ndarray:
    if isinstance(value, str):
        return (txt == value) if txt is not None else np.zeros(len(num), bool)
    return num == float(value)  # type: ignore[arg-type]


# -- the numeric fast path: status, kind and rule state in one pass of arithmetic ------------------
#
# A numeric item's cell falls in exactly one class: blank, code i, a valid value or an invalid one.
# Each class has a fixed kind and, for each of the three universe values, a fixed status and rule
# state; all of them are packed into one int32 per class (status 6 bits per universe value, kind
# 3 bits, state 2 bits per universe value).  The classes are exclusive, so the sum of
# class-indicator x packed-word selects each cell's word, and shifts by the universe read it out:
# elementwise arithmetic only, no masked copies and no table lookups with int8 indices.
_STATUS_BITS, _KIND_SHIFT, _STATE_SHIFT = 6, 18, 21


def packed_word(statuses: tuple[int, int, int], kind: int, states: tuple[int, int, int]) -> int:
    """One class's outcomes as an int32 word (statuses by universe FALSE/UNK/TRUE, kind, states)."""
    word = kind << _KIND_SHIFT
    for u in range(3):
        word |= statuses[u] << (_STATUS_BITS * u) | states[u] << (_STATE_SHIFT + 2 * u)
    return word


def numeric_fast_path(item: Item, series: pd.Series) -> bool:
    """Whether the numeric fast path decodes this item's column (a number-valued item stored as numbers)."""
    return (item.type in (ItemType.INTEGER, ItemType.NUMBER, ItemType.CATEGORICAL) and not _text_valued(item)
            and pd.api.types.is_numeric_dtype(series.dtype))


def decode_numeric(item: Item, series: pd.Series, words: tuple[int, int, int, tuple[int, ...]], u: np.ndarray
                   ) -> tuple[Decoded, np.ndarray, np.ndarray]:
    """Decoded cells, statuses and rule states of a numeric item, given its universe ``u``.

    ``words`` are the packed words of the blank, valid and invalid classes and of each code
    (:func:`packed_word`).  Gives the statuses and kinds of :func:`decode_item` with the status table.
    """
    num, _, blank = column_views(series)
    w_blank, w_valid, w_invalid, w_codes = words
    valid = _valid(item, num, None)
    packed = np.multiply(blank, np.int32(w_blank - w_invalid), dtype=np.int32)
    code = np.full(len(num), -1, dtype=np.int8)
    any_code = None
    for i, c in enumerate(item.codes):
        if isinstance(c.value, str):
            continue  # a text code never matches a number
        hit = num == float(c.value)
        packed += hit * np.int32(w_codes[i] - w_invalid)
        code += hit.view(np.int8) * np.int8(i + 1)
        any_code = hit if any_code is None else any_code | hit
    if any_code is not None:
        valid &= ~any_code  # a code takes precedence over the value it also is
    packed += valid * np.int32(w_valid - w_invalid)
    packed += np.int32(w_invalid)
    shift = u * np.int32(_STATUS_BITS)
    status = ((packed >> shift) & 63).astype(np.int8)
    state = ((packed >> (shift // 3 + _STATE_SHIFT)) & 3).astype(np.int8)
    kind = ((packed >> _KIND_SHIFT) & 7).astype(np.int8)
    return Decoded(kind=kind, code=code, values=num), status, state
