"""Finding the point where an interview ended.

Three ways, chosen in the questionnaire's ``breakoff:`` block:

- ``last_item: COLUMN`` — a paradata column naming the last item the case
  reached.  Blank cells (``item_missing`` / ``gate_unknown``) of items after
  that one become ``breakoff``.  Cases where the column is blank fall back
  to the trailing-run rule below.
- ``disposition: COLUMN`` with ``breakoff_codes: [...]`` — cases whose
  disposition is one of the codes broke off; every blank applicable cell
  after their last activity becomes ``breakoff``.  Other cases never do.
- otherwise (default) the *trailing-run rule*: find the case's last
  *activity* (an answer, a nonresponse code or an invalid value); if at
  least ``min_run`` (default 5) cells after it are ``item_missing`` or
  ``gate_unknown``, the case broke off there and those cells become
  ``breakoff``.  Earlier blanks stay ``item_missing``.  Skipped cells after
  the last activity neither count nor break the run.

Optional items (``optional: true``) neither set nor count toward the
break-off point: an answer to an optional comment box is not the case's last
activity, and its blank is no evidence of a break-off.  Once a break-off is
found, an optional item's blank after that point (``left_blank`` or
``gate_unknown``) becomes ``breakoff`` like any other (docs/contract.md §1).

All of it works on the whole status matrix at once, row-locally.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from skipwise.classify import cells as K
from skipwise.classify import statuses as S
from skipwise.questionnaire.model import Questionnaire

__all__ = ["apply_breakoff", "last_activity"]


def _position_dtype(p: int) -> type:
    """The narrowest unsigned type holding positions 0..p (one byte for questionnaires up to 254 items)."""
    return np.uint8 if p < 255 else np.uint16 if p < 65535 else np.uint32


def _activity_end(kinds: np.ndarray, counted: np.ndarray | None, dtype: type) -> np.ndarray:
    """Position + 1 of each case's last activity (0: none), in ``dtype``: a running maximum over items."""
    last = np.zeros(kinds.shape[0], dtype=dtype)
    act = np.empty(kinds.shape[0], dtype=bool)
    step = np.empty(kinds.shape[0], dtype=dtype)
    for j in range(kinds.shape[1]):
        if counted is None or counted[j]:
            np.greater_equal(kinds[:, j], K.NONRESP, out=act)  # NONRESP, SUBST, INVALID
            np.multiply(act.view(np.uint8), dtype(j + 1), out=step, dtype=dtype)
            np.maximum(last, step, out=last)
    return last


def last_activity(kinds: np.ndarray, counted: np.ndarray | None = None) -> np.ndarray:
    """Index of each case's last item with an answer, code of nonresponse or invalid value (-1: none).

    ``counted`` (one bool per item, default all) leaves out the items that do not set the point
    (optional items).  One pass over the item columns (contiguous in the Fortran-ordered matrix),
    never over cases.
    """
    return _activity_end(kinds, counted, _position_dtype(kinds.shape[1])).astype(np.int32) - 1


def apply_breakoff(status: np.ndarray, kinds: np.ndarray, data: pd.DataFrame, q: Questionnaire,
                   code_of: dict[str, int]) -> None:
    """Turn the blank cells after each broken-off interview's end into ``breakoff`` (in place)."""
    spec = q.breakoff
    n, p = status.shape
    if n == 0 or p == 0 or not spec.enabled:
        return
    missing, unknown, breakoff = code_of[S.ITEM_MISSING], code_of[S.GATE_UNKNOWN], code_of[S.BREAKOFF]
    left_blank = code_of[S.LEFT_BLANK]
    required = np.array([not it.optional for it in q.items], dtype=bool)
    dtype = _position_dtype(p)

    def candidate(col: np.ndarray, out: np.ndarray, tmp: np.ndarray) -> np.ndarray:
        np.equal(col, missing, out=out)
        out |= np.equal(col, unknown, out=tmp)
        out |= np.equal(col, left_blank, out=tmp)
        return out

    # `end` (position + 1) is where a broken-off case's blank cells start becoming break-offs.
    end = _activity_end(kinds, required, dtype)
    if spec.disposition:
        broke = data[spec.disposition].isin(list(spec.breakoff_codes)).to_numpy()
    else:
        trailing = np.zeros(n, dtype=dtype)
        cand, tmp, after = (np.empty(n, dtype=bool) for _ in range(3))
        for j in np.flatnonzero(required):
            candidate(status[:, j], cand, tmp)
            np.less_equal(end, dtype(j), out=after)
            cand &= after
            np.add(trailing, cand.view(np.uint8), out=trailing, dtype=dtype)
        broke = trailing >= spec.min_run
        if spec.last_item:
            reached = _position_of_last_item(data[spec.last_item], q)
            given = reached >= -1
            end = np.where(given, reached + 1, end).astype(dtype)
            broke = broke | given
    rows = np.flatnonzero(broke)
    if rows.size == 0:
        return
    # Only the broken-off cases change: their rows, gathered (few in most files), then put back.
    sub, sub_end = status[rows], end[rows]
    cand, tmp = np.empty(rows.size, dtype=bool), np.empty(rows.size, dtype=bool)
    for j in range(p):
        col = sub[:, j]
        turn = candidate(col, cand, tmp) & (sub_end <= j)
        if turn.any():  # arithmetic on the int8 column: breakoff where turned, unchanged elsewhere
            col += turn.view(np.int8) * (np.int8(breakoff) - col)
    status[rows] = sub


def _position_of_last_item(column: pd.Series, q: Questionnaire) -> np.ndarray:
    """Interview position of the item named in a paradata column; -2 where blank or unknown."""
    pos = {name: j for j, name in enumerate(q.item_names)}
    pos.update({col: j for j, it in enumerate(q.items) for col in it.columns})
    names = column.astype("string").str.strip()
    return names.map(pos).astype("float64").fillna(-2).to_numpy(dtype=np.int64)
