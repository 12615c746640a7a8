"""The classifier's vocabulary: one status per (case, item).

Fixed statuses are module constants; nonresponse *reasons* (``dont_know``,
``refused``, ...) come from the questionnaire's codes of kind ``nonresponse``.
Every status has a stable number (docs/contract.md §1, docs/statuses.md): the fixed
statuses 1-9 (:data:`STATUS_NUMBERS`), reasons 11-99
(:attr:`skipwise.questionnaire.model.Questionnaire.reason_numbers`).
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
LEFT_BLANK = "left_blank"  # in universe, blank, the item is optional: no answer was required

#: Fixed statuses in the order reports show them; reasons are inserted after ANSWERED.
FIXED_STATUSES: tuple[str, ...] = (
    ANSWERED, SKIPPED, ITEM_MISSING, WRONG_CODE, OFF_ROUTE, GATE_UNKNOWN, BREAKOFF, INVALID, LEFT_BLANK,
)
#: Stable number of each fixed status in ``<item>_status`` columns (docs/contract.md §1).
STATUS_NUMBERS: dict[str, int] = {
    ANSWERED: 1, SKIPPED: 2, ITEM_MISSING: 3, GATE_UNKNOWN: 4, BREAKOFF: 5,
    OFF_ROUTE: 6, WRONG_CODE: 7, INVALID: 8, LEFT_BLANK: 9,
}
#: Statuses that are routing faults (listed case by case).
FAULT_STATUSES: tuple[str, ...] = (OFF_ROUTE, WRONG_CODE, INVALID)
#: Statuses of cells outside the item's universe.
OUT_OF_UNIVERSE: tuple[str, ...] = (SKIPPED, OFF_ROUTE)
#: Statuses that are rule inputs *absent* (docs/contract.md §3): not asked, or no answer was required.
ABSENT_AS_INPUT: tuple[str, ...] = (SKIPPED, OFF_ROUTE, LEFT_BLANK)
#: In-universe statuses outside every item rate's base D (counted apart, docs/contract.md §1).
OUTSIDE_D: tuple[str, ...] = (BREAKOFF, LEFT_BLANK)
