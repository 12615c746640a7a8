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

__all__ = ["BLANK", "STRUCT", "NONRESP", "SUBST", "INVALID", "Decoded", "decode_item", "column_views", "match_codes",
           "NumericPlan", "numeric_plan", "numeric_fast_path", "decode_numeric", "Scratch"]

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


def match_codes(codes: tuple[Code, ...], num: np.ndarray) -> np.ndarray:
    """Index of the code each number carries, -1 for none (a text code never matches a number)."""
    return _match_codes(codes, num, None, np.zeros(0, bool))


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


# -- the numeric fast path: status, kind and rule state by byte arithmetic ----------------------
#
# A number-valued item's cell falls in exactly one class: blank, code i, a valid value, or an invalid
# value (none of the others).  Each class has a fixed kind and, for each universe value, a fixed
# status and rule state; the status (6 bits) and the state (2 bits) of a class are packed into one
# byte.  The classes are exclusive, so one pass per class of "class indicator x class constant",
# added up, gives every cell its constants: four bytes per cell (the in-universe byte, the change
# out of universe, the change when the universe is unknown, the kind), computed as rows of one
# 4 x rows uint8 matrix.  The universe then selects by two more byte operations.  All of it is
# elementwise numpy on preallocated buffers: no masked copies, no table lookups, no temporaries.
_STATE_SHIFT = 6


def _byte(status: int, state: int) -> int:
    return status | state << _STATE_SHIFT


@dataclass(frozen=True)
class NumericPlan:
    """How the fast path decodes one number-valued item (made once per questionnaire).

    ``tests`` is the value test as a short list of ``(op, operand)`` steps ANDed together
    (``ge``/``le`` a bound, ``int`` whole numbers, ``in`` a list of allowed values, ``real`` not
    NaN); ``code_values`` are the numeric codes, ``code_index`` their positions in ``item.codes``,
    ``overlap`` the positions (in ``code_values``) of codes that also pass the value test (a code
    wins over the value it also is).  ``consts`` is a 4 x classes uint8 matrix, classes in the
    order blank, valid, code 0, code 1, ..., each column minus the invalid class's ``base``:
    rows are the in-universe byte, its change out of universe, its change when the universe is
    unknown, and the kind.
    """

    tests: tuple[tuple[str, object], ...]
    code_values: tuple[float, ...]
    code_index: tuple[int, ...]
    overlap: tuple[int, ...]
    base: np.ndarray      # uint8 (4,): the invalid class
    consts: np.ndarray    # uint8 (4, 2 + codes): blank, valid, codes (each minus base, modulo 256)

    @property
    def classes(self) -> int:
        return 2 + len(self.code_values)


def numeric_fast_path(item: Item, series: pd.Series) -> bool:
    """Whether the numeric fast path decodes this item's column (a number-valued item stored as numbers)."""
    return (item.type in (ItemType.INTEGER, ItemType.NUMBER, ItemType.CATEGORICAL) and not _text_valued(item)
            and pd.api.types.is_numeric_dtype(series.dtype))


def _value_tests(item: Item) -> tuple[tuple[str, object], ...]:
    """The value test of :func:`_valid` (numbers only) as steps; NaN fails every step but ``in``/``real``."""
    if item.type is ItemType.CATEGORICAL and item.values is not None:
        keys = sorted(float(k) for k in item.values if not isinstance(k, str))
        if keys and all(np.isfinite(k) and k == int(k) for k in keys) and keys == [float(v) for v in range(int(keys[0]),
                                                                                          int(keys[-1]) + 1)]:
            return (("ge", keys[0]), ("le", keys[-1]), ("int", None))  # whole numbers lo..hi
        return (("in", keys),)
    tests: list[tuple[str, object]] = []
    if item.range is not None:
        tests += [("ge", float(item.range[0])), ("le", float(item.range[1]))]
    if item.type is ItemType.INTEGER:
        tests.append(("int", None))
    return tuple(tests) or (("real", None),)


def _passes(tests: tuple[tuple[str, object], ...], x: np.ndarray) -> np.ndarray:
    """The value test on a small array (the code values)."""
    ok = np.ones(x.shape, bool)
    with np.errstate(invalid="ignore"):
        for op, v in tests:
            ok &= (x >= v if op == "ge" else x <= v if op == "le" else np.floor(x) == x if op == "int"
                   else isin_small(x, list(v)) if op == "in" else ~np.isnan(x))  # type: ignore[arg-type]
    return ok


def numeric_plan(item: Item, table: np.ndarray, reason_code: np.ndarray, state_of: np.ndarray
                 ) -> NumericPlan | None:
    """The item's :class:`NumericPlan`, or None when some outcome does not fit a byte.

    ``table`` is the status table by [kind, universe] (-1: the code's reason), ``reason_code``
    the status of each code's reason, ``state_of`` the rule state of each status.
    """
    if item.type not in (ItemType.INTEGER, ItemType.NUMBER, ItemType.CATEGORICAL) or _text_valued(item):
        return None

    def outcomes(kind: int, reason: int = -1) -> list[int] | None:
        statuses = [int(reason if s < 0 else s) for s in table[kind]]  # universe FALSE, UNK, TRUE
        if min(statuses) < 0 or max(statuses) >= 1 << _STATE_SHIFT:
            return None
        out, unk, inn = (_byte(s, int(state_of[s])) for s in statuses)
        return [inn, out - inn, unk - inn, kind]

    numeric = [(i, float(c.value)) for i, c in enumerate(item.codes) if not isinstance(c.value, str)]  # type: ignore[arg-type]
    columns = [outcomes(BLANK), outcomes(SUBST)] + [outcomes(KIND_OF[item.codes[i].kind], int(reason_code[i]))
                                                    for i, _ in numeric]
    invalid = outcomes(INVALID)
    if invalid is None or any(c is None for c in columns):
        return None
    base = np.array(invalid, dtype=np.int64)
    consts = (np.array(columns, dtype=np.int64).T - base[:, None]) % 256
    tests = _value_tests(item)
    values = np.array([v for _, v in numeric], dtype=np.float64)
    overlap = tuple(int(k) for k in np.flatnonzero(_passes(tests, values)))
    return NumericPlan(tests=tests, code_values=tuple(values.tolist()), code_index=tuple(i for i, _ in numeric),
                       overlap=overlap, base=(base % 256).astype(np.uint8), consts=consts.astype(np.uint8))


class Scratch:
    """Buffers of the fast path for one block of ``n`` rows (one per thread at a time)."""

    def __init__(self, n: int, classes: int):
        self.masks = np.empty((max(classes, 2), n), dtype=bool)
        self.acc = np.empty((4, n), dtype=np.uint8)
        self.term = np.empty((4, n), dtype=np.uint8)
        self.where = np.empty((2, n), dtype=bool)
        self.tmp = np.empty(n, dtype=bool)
        self.real = np.empty(n, dtype=np.float64)


_U01 = np.array([[0], [1]], dtype=np.int8)  # universe FALSE and UNK, against which u is compared


def decode_numeric(plan: NumericPlan, x: np.ndarray, u: np.ndarray | None, status: np.ndarray,
                   kind: np.ndarray, state: np.ndarray | None, s: Scratch) -> None:
    """Statuses, kinds and (if ``state`` is given) rule states of a number column ``x`` (float64).

    ``u`` is the universe (int8 FALSE/UNK/TRUE; None: TRUE everywhere).  Writes ``status``,
    ``kind`` (int8) and ``state`` in place; gives the statuses and kinds of :func:`decode_item`
    with the status table.
    """
    n = len(x)
    masks, acc, term = s.masks[:, :n], s.acc[:, :n], s.term[:, :n]
    blank, valid, tmp = masks[0], masks[1], s.tmp[:n]
    np.isnan(x, out=blank)
    with np.errstate(invalid="ignore"):
        first = True
        for op, v in plan.tests:
            dst = valid if first else tmp
            if op == "ge":
                np.greater_equal(x, v, out=dst)
            elif op == "le":
                np.less_equal(x, v, out=dst)
            elif op == "int":
                np.equal(np.floor(x, out=s.real[:n]), x, out=dst)
            elif op == "real":
                np.logical_not(blank, out=dst)
            else:
                dst[...] = isin_small(x, list(v))  # type: ignore[arg-type]
            if not first:
                np.logical_and(valid, tmp, out=valid)
            first = False
    k = len(plan.code_values)
    if k:
        hits = masks[2:2 + k]
        np.equal(x[None, :], np.asarray(plan.code_values)[:, None], out=hits)
        for i in plan.overlap:
            np.greater(valid, hits[i], out=valid)  # valid and not this code
    acc[...] = plan.base[:, None]
    for c in range(plan.classes):
        np.multiply(plan.consts[:, c:c + 1], masks[c].view(np.uint8)[None, :], out=term)
        np.add(acc, term, out=acc)
    word = acc[0]
    if u is not None:
        where = s.where[:, :n]
        np.equal(u[None, :], _U01, out=where)
        np.multiply(acc[1:3], where.view(np.uint8), out=acc[1:3])
        np.add(word, acc[1], out=word)
        np.add(word, acc[2], out=word)
    np.bitwise_and(word, np.uint8(63), out=status.view(np.uint8))
    kind[...] = acc[3].view(np.int8)
    if state is not None:
        np.right_shift(word, np.uint8(_STATE_SHIFT), out=state.view(np.uint8))
