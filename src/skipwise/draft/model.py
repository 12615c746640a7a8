"""What a draft holds: its codes, items and the questionnaire-level parts, before rendering."""

from __future__ import annotations

from dataclasses import dataclass

from skipwise.questionnaire.model import CodeKind, ItemType

__all__ = ["Value", "DraftCode", "DraftItem", "Draft", "ROUTING_NOTE", "KIND_NOTE", "OBSERVED_NOTE",
           "LABELS_RANGE_NOTE", "STATA", "SAS", "DATA_TEXT", "TEXT_FROM_LABEL", "TEXT_NOTE"]

Value = int | float | str

ROUTING_NOTE = "# asked_if: add the routing condition"
KIND_NOTE = "# guessed: confirm kind"
OBSERVED_NOTE = "# observed, confirm: widen to the valid range"
LABELS_RANGE_NOTE = "# from the value labels"
STATA = "Stata extended missing"
SAS = "SAS special missing"
DATA_TEXT = "text in the data"
#: A variable label longer than this many characters also becomes the item's ``text:`` (the
#: question wording); shorter ones read as names of the variable (common practice, no source).
TEXT_FROM_LABEL = 60
TEXT_NOTE = "# from the variable label: check it is the wording as asked"


@dataclass(frozen=True, kw_only=True)
class DraftCode:
    """A special code found in the metadata or the data; ``source`` says where (for the comment)."""

    value: Value
    reason: str
    kind: CodeKind
    label: str | None = None
    source: str = "value label"    # or "SPSS missing value", "SPSS missing range", STATA, SAS, DATA_TEXT
    reason_guessed: bool = False   # True when the reason is not one of the known wordings


@dataclass(frozen=True, kw_only=True)
class DraftItem:
    """One drafted item; ``notes`` are review comments written under it."""

    name: str
    type: ItemType
    label: str = ""
    values: dict[Value, str] | None = None
    range: tuple[Value, Value] | None = None
    range_note: str = OBSERVED_NOTE   # the comment beside ``range:``
    level: str | None = None          # ``level:`` (nominal | ordinal | scale) when the data says so
    codes: tuple[DraftCode, ...] = ()
    notes: tuple[str, ...] = ()


@dataclass(frozen=True, kw_only=True)
class Draft:
    """A whole draft: the survey block, global codes and the items in file order."""

    name: str
    title: str
    case_id: str
    case_id_note: str
    codes: tuple[DraftCode, ...] = ()       # lifted to the global list
    shared: tuple[int, ...] = ()            # for each global code, how many items declared it
    items: tuple[DraftItem, ...] = ()       # item-level codes only (global ones removed)
    source: str | None = None
