"""The classifier's vocabulary: one status per (case, item).

Fixed statuses are module constants; nonresponse *reasons* (``dont_know``,
``refused``, ...) come from the questionnaire's codes of kind ``nonresponse``.
"""

from __future__ import annotations

ANSWERED = "answered"
SKIPPED = "skipped"
ITEM_MISSING = "item_missing"
WRONG_CODE = "wrong_code"
OFF_ROUTE = "off_route"
GATE_UNKNOWN = "gate_unknown"
BREAKOFF = "breakoff"
INVALID = "invalid"

#: Fixed statuses in the order reports show them; reasons are inserted after ANSWERED.
FIXED_STATUSES: tuple[str, ...] = (
    ANSWERED, SKIPPED, ITEM_MISSING, WRONG_CODE, OFF_ROUTE, GATE_UNKNOWN, BREAKOFF, INVALID,
)
#: Statuses that are routing faults (listed case by case).
FAULT_STATUSES: tuple[str, ...] = (OFF_ROUTE, WRONG_CODE, INVALID)
#: Statuses of cells outside the item's universe.
OUT_OF_UNIVERSE: tuple[str, ...] = (SKIPPED, OFF_ROUTE)
