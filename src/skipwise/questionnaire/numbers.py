"""Stable numbers of nonresponse reasons (docs/contract.md §1; the table is in docs/statuses.md).

A reason's number is what its cells hold in ``<item>_status`` columns (11-99),
the basis of its recoded ``.sav`` code (-900 - number) and, for 11-28, of its
extended missing letter in a recoded ``.dta`` (11 -> ``.i`` ... 28 -> ``.z``).
It never depends on the order of the codes in the questionnaire:

1. a code may pin its reason's number with ``number:``;
2. otherwise a common reason has its built-in number (:data:`BUILTIN_REASON_NUMBERS`);
3. otherwise the reason takes the lowest number from 21 up that no pinned or
   built-in reason of the questionnaire holds, reasons taken in alphabetical
   order.  Such a number can change when reasons are added, so ``check``
   warns about it: pin it.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, Iterable, Mapping

from skipwise.errors import ProblemCode
from skipwise.questionnaire.model import Code, CodeKind, Item
from skipwise.questionnaire.yamlread import LineDict

if TYPE_CHECKING:  # pragma: no cover
    from skipwise.questionnaire.loader import _Builder

__all__ = ["BUILTIN_REASON_NUMBERS", "FIRST_REASON", "LAST_REASON", "LAST_STATA_LETTER",
           "FIRST_FREE", "reason_numbers", "free_numbers", "code_number", "number_reasons"]

FIRST_REASON, LAST_REASON = 11, 99
#: The highest reason number that has an extended missing letter in Stata (28 -> ``.z``).
LAST_STATA_LETTER = 28
#: Numbers below this are reserved for the built-in reasons, used or not.
FIRST_FREE = 21

#: Built-in numbers of the common nonresponse reasons (the project's own choice; docs/statuses.md).
BUILTIN_REASON_NUMBERS: Mapping[str, int] = {
    "dont_know": 11,          # the respondent did not know
    "refused": 12,            # the respondent declined to answer
    "no_answer": 13,          # a coded non-answer whose cause was not recorded
    "not_applicable": 14,     # the respondent said the question does not apply (when used as nonresponse)
    "not_stated": 15,         # a register or form field left unstated
    "cannot_choose": 16,      # the respondent could not choose between the answers offered
    "illegible": 17,          # paper form: the answer cannot be read
    "multiple_answers": 18,   # paper form: several boxes marked on a single-answer question
    "interviewer_error": 19,  # the interviewer did not ask or did not record the answer
    "data_lost": 20,          # recorded, then lost in transmission or processing
}


def reason_numbers(reasons: Iterable[str], pinned: Mapping[str, int]) -> dict[str, int]:
    """Number of every nonresponse reason: pinned, else built-in, else a free number from 21 up.

    ``pinned`` maps a reason to the number its code gives with ``number:`` (already checked to
    be distinct and within 11-99).  The result depends only on the *set* of reasons and the
    pins, never on their order.
    """
    reasons = set(reasons)
    out = {r: pinned[r] for r in reasons if r in pinned}
    out.update({r: BUILTIN_REASON_NUMBERS[r] for r in reasons
                if r not in out and r in BUILTIN_REASON_NUMBERS and BUILTIN_REASON_NUMBERS[r] not in out.values()})
    rest = sorted(r for r in reasons if r not in out)
    taken = set(out.values())
    free = (k for k in free_numbers() if k not in taken)
    for r in rest:
        out[r] = next(free, 0)  # 0: more than 79 unnumbered reasons; the loader refuses the file
    return out


def free_numbers() -> range:
    """Numbers given to reasons that have neither a pin nor a built-in number, lowest first."""
    return range(FIRST_FREE, LAST_REASON + 1)


def code_number(b: "_Builder", d: LineDict, kind: CodeKind | None, reason: Any, item: str | None) -> int | None:
    """The ``number:`` pinned on a code: a whole number 11-99, on a nonresponse code only."""
    if "number" not in d:
        return None
    value, line = d["number"], d.key_line("number")
    if not isinstance(value, int) or isinstance(value, bool) or not FIRST_REASON <= value <= LAST_REASON:
        b.add(ProblemCode.BAD_VALUE, f"code number {value!r} of reason {reason!r} must be a whole number "
              f"from {FIRST_REASON} to {LAST_REASON}", line, item,
              "numbers 1-9 belong to the fixed statuses; see docs/statuses.md")
        return None
    if kind is not None and kind is not CodeKind.NONRESPONSE:
        b.add(ProblemCode.BAD_VALUE, f"code number {value} is given to a {kind.value} code ({reason}); "
              "only a nonresponse reason becomes a status with a number", line, item,
              "remove 'number', or make the code kind nonresponse")
        return None
    return value


def number_reasons(b: "_Builder", global_codes: tuple[Code, ...], items: list[Item]) -> dict[str, int]:
    """Every nonresponse reason's stable number; report pins that disagree or clash."""
    pins: dict[str, Code] = {}
    owner: dict[int, str] = {}
    reasons: dict[str, None] = {}
    seen: set[int] = set()
    for code in (*global_codes, *(c for it in items for c in it.codes)):
        if id(code) in seen or code.kind is not CodeKind.NONRESPONSE:
            continue
        seen.add(id(code))
        reasons.setdefault(code.reason, None)
        if code.number is None:
            continue
        first = pins.get(code.reason)
        if first is not None and first.number != code.number:
            b.add(ProblemCode.DUPLICATE_NAME, f"reason '{code.reason}' is numbered {code.number} here but "
                  f"{first.number} on line {first.line}", code.line, None, "give a reason one number everywhere")
        elif first is None and code.number in owner:
            b.add(ProblemCode.DUPLICATE_NAME, f"number {code.number} is given to both '{owner[code.number]}' "
                  f"and '{code.reason}'", code.line, None, "each reason needs its own number; see docs/statuses.md")
        elif first is None:
            pins[code.reason] = code
            owner[code.number] = code.reason
    for reason in reasons:
        builtin = BUILTIN_REASON_NUMBERS.get(reason)
        if reason not in pins and builtin in owner:
            code = pins[owner[builtin]]
            b.add(ProblemCode.DUPLICATE_NAME, f"number {builtin} given to '{owner[builtin]}' is the built-in "
                  f"number of '{reason}', also a reason of this questionnaire", code.line, None,
                  f"pin '{reason}' to another number, or give '{owner[builtin]}' another one")
    numbers = reason_numbers(reasons, {r: c.number for r, c in pins.items()})  # type: ignore[misc]
    if 0 in numbers.values():
        b.add(ProblemCode.BAD_VALUE, "more nonresponse reasons than free numbers 21-99", None, None,
              "merge reasons, or pin their numbers")
    return numbers
