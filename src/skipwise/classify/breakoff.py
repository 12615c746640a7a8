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
``gate_unknown``) becomes ``breakoff`` like any other (DESIGN §3).

All of it works on the whole status matrix at once, row-locally.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from skipwise.classify import cells as K
from skipwise.classify import statuses as S
from skipwise.questionnaire.model import Questionnaire

__all__ = ["apply_breakoff", "last_activity"]


def last_activity(kinds: np.ndarray, counted: np.ndarray | None = None) -> np.ndarray:
    """Index of each case's last item with an answer, code of nonresponse or invalid value (-1: none).

    ``counted`` (one bool per item, default all) leaves out the items that do not set the point
    (optional items).  One pass over the item columns (contiguous in the Fortran-ordered matrix),
    never over cases.
    """
    # position + 1 of the latest activity so far: a running maximum, no masked copy per item
    last = np.zeros(kinds.shape[0], dtype=np.int32)
    for j in range(kinds.shape[1]):
        if counted is None or counted[j]:
            np.maximum(last, (kinds[:, j] >= K.NONRESP) * np.int32(j + 1), out=last)  # NONRESP, SUBST, INVALID
    last -= 1
    return last


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

    def candidate(j: int) -> np.ndarray:
        col = status[:, j]
        return (col == missing) | (col == unknown) | (col == left_blank)

    # `end` is the position after which a broken-off case's blank cells become break-offs.
    end = last_activity(kinds, required)
    if spec.disposition:
        broke = data[spec.disposition].isin(list(spec.breakoff_codes)).to_numpy()
    else:
        trailing = np.zeros(n, dtype=np.int32)
        for j in np.flatnonzero(required):
            trailing += candidate(j) & (end < j)
        broke = trailing >= spec.min_run
        if spec.last_item:
            reached = _position_of_last_item(data[spec.last_item], q)
            given = reached >= -1
            end = np.where(given, reached, end)
            broke = broke | given
    for j in range(p):
        turn = candidate(j) & broke & (end < j)
        if turn.any():  # arithmetic on the int8 column: breakoff where turned, unchanged elsewhere
            col = status[:, j]
            col += turn.view(np.int8) * (np.int8(breakoff) - col)


def _position_of_last_item(column: pd.Series, q: Questionnaire) -> np.ndarray:
    """Interview position of the item named in a paradata column; -2 where blank or unknown."""
    pos = {name: j for j, name in enumerate(q.item_names)}
    pos.update({col: j for j, it in enumerate(q.items) for col in it.columns})
    names = column.astype("string").str.strip()
    return names.map(pos).astype("float64").fillna(-2).to_numpy(dtype=np.int64)
