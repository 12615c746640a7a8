"""Typed, frozen objects of a loaded questionnaire (format version 1).

The loader (:mod:`skipwise.questionnaire.loader`) turns the YAML file into
these objects once; nothing here touches data.  Rosters and check-all-that-
apply sets are *expanded* at load time: a roster item ``p_age`` asked for up
to 6 members becomes the items ``p_age_1`` … ``p_age_6``, each with its
member condition added to its rule, so the classifier only ever sees plain
items in interview order.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass, field
from enum import Enum
from typing import Mapping

from skipwise.rules import ast

__all__ = ["CodeKind", "ItemType", "Code", "Item", "Section", "Roster", "BreakoffSpec", "Questionnaire",
           "STUDY_KEYS"]

#: Keys of the optional ``study:`` block (study-level metadata for codebooks and the DDI export).
STUDY_KEYS = ("title", "id", "producer", "population", "geography", "nation", "fieldwork_start",
              "fieldwork_end", "mode", "sample_design", "weighting", "citation", "abstract")


class CodeKind(str, Enum):
    """What a special code means for classification (docs/questionnaire-format.md)."""

    STRUCTURAL = "structural"    # a legitimate not-asked mark
    NONRESPONSE = "nonresponse"  # counts as item nonresponse; the status is the code's reason
    SUBSTANTIVE = "substantive"  # a real answer with a special meaning; exempt from range checks


class ItemType(str, Enum):
    INTEGER = "integer"
    NUMBER = "number"
    CATEGORICAL = "categorical"
    TEXT = "text"
    DATE = "date"
    MULTI = "multi"  # check-all-that-apply set: one data column per option


@dataclass(frozen=True, kw_only=True)
class Code:
    value: float | str
    reason: str
    kind: CodeKind
    label: str | None = None
    number: int | None = None   # pinned status number of a nonresponse reason (11-99)
    line: int | None = None


@dataclass(frozen=True, kw_only=True)
class Roster:
    """A section repeated for household members 1..max while ``count >= k``."""

    count: str            # an earlier integer item or context column holding the number of members
    max: int
    column: str = "{item}_{n}"  # how expanded columns are named
    line: int | None = None

    def column_name(self, item: str, n: int) -> str:
        from skipwise.questionnaire.templates import expand

        return expand(self.column, item=item, n=n)


@dataclass(frozen=True, kw_only=True)
class Item:
    """One classified unit in interview order (a plain item, a set, or one roster member's item).

    ``columns`` are the data columns the item reads: ``(name,)`` for plain
    items, one per option for a ``multi`` set.
    """

    name: str
    type: ItemType
    section: str
    label: str = ""
    values: Mapping[float | str, str] | None = None
    range: tuple[float | str, float | str] | None = None
    codes: tuple[Code, ...] = ()
    rule: ast.BoolNode | None = None
    rule_parts: tuple[str, ...] = ()
    columns: tuple[str, ...] = ()
    options: tuple[tuple[object, str], ...] = ()
    selected: float | str = 1
    unselected: float | str | None = 0
    roster: str | None = None
    member: int | None = None
    base_name: str = ""
    text: str | None = None       # the question wording as asked
    optional: bool = False        # a blank in universe is ``left_blank``, not nonresponse
    level: str | None = None      # measurement level in delivered files: nominal | ordinal | scale
    line: int | None = None

    @property
    def rule_text(self) -> str:
        """The routing condition as written (section, item and roster parts AND-ed)."""
        if not self.rule_parts:
            return ""
        if len(self.rule_parts) == 1:
            return self.rule_parts[0]
        return " and ".join(f"({p})" for p in self.rule_parts)

    def code_for(self, reason: str) -> Code | None:
        return next((c for c in self.codes if c.reason == reason), None)

    @property
    def reasons(self) -> tuple[str, ...]:
        return tuple(c.reason for c in self.codes)

    @property
    def nonresponse_reasons(self) -> tuple[str, ...]:
        return tuple(c.reason for c in self.codes if c.kind is CodeKind.NONRESPONSE)


@dataclass(frozen=True, kw_only=True)
class Section:
    name: str
    label: str = ""
    asked_if: str | None = None
    roster: Roster | None = None
    optional: bool = False        # inherited by every item of the section
    items: tuple[str, ...] = ()   # expanded item names, interview order
    line: int | None = None


@dataclass(frozen=True, kw_only=True)
class BreakoffSpec:
    """How the point where an interview ended is found (see :mod:`skipwise.classify.breakoff`)."""

    min_run: int = 5
    last_item: str | None = None          # paradata column naming the last item reached
    disposition: str | None = None        # disposition column ...
    breakoff_codes: tuple[object, ...] = ()  # ... and its codes that mean "broke off"
    line: int | None = None
    enabled: bool = True                  # ``breakoff: false`` turns detection off


@dataclass(frozen=True, kw_only=True)
class Questionnaire:
    name: str
    title: str = ""
    case_id: str
    context: tuple[str, ...] = ()
    codes: tuple[Code, ...] = ()
    sections: tuple[Section, ...] = ()
    items: tuple[Item, ...] = ()
    breakoff: BreakoffSpec = field(default_factory=BreakoffSpec)
    study: Mapping[str, str] = field(default_factory=dict)
    #: Stable status number (11-99) of every nonresponse reason (see docs/statuses.md).
    reason_numbers: Mapping[str, int] = field(default_factory=dict)
    path: str | None = None

    def __post_init__(self) -> None:
        object.__setattr__(self, "_by_name", {it.name: it for it in self.items})
        if not self.reason_numbers and self.nonresponse_reasons:  # built in code, not by the loader
            from skipwise.questionnaire.numbers import reason_numbers
            pins = {c.reason: c.number for c in (*self.codes, *(c for it in self.items for c in it.codes))
                    if c.kind is CodeKind.NONRESPONSE and c.number is not None}
            object.__setattr__(self, "reason_numbers", reason_numbers(self.nonresponse_reasons, pins))

    def item(self, name: str) -> Item:
        return self._by_name[name]  # type: ignore[attr-defined]

    def __contains__(self, name: object) -> bool:
        return name in self._by_name  # type: ignore[attr-defined]

    @functools.cached_property  # items never change (frozen): built once, not per call in loops
    def item_names(self) -> tuple[str, ...]:
        return tuple(it.name for it in self.items)

    @functools.cached_property
    def columns(self) -> tuple[str, ...]:
        """Every data column the questionnaire classifies, in interview order."""
        return tuple(c for it in self.items for c in it.columns)

    @functools.cached_property  # looked up per column in loops: built once (a dict, so it pickles
    def column_owner(self) -> dict[str, str]:  # with the questionnaire sent to dask workers): read it only
        """The item that owns each data column (a set's option columns: the set)."""
        return {c: it.name for it in self.items for c in it.columns}

    @property
    def reasons(self) -> tuple[str, ...]:
        """Every code reason used anywhere, in first-seen order."""
        seen: dict[str, None] = {}
        for c in self.codes:
            seen.setdefault(c.reason, None)
        for it in self.items:
            for c in it.codes:
                seen.setdefault(c.reason, None)
        return tuple(seen)

    @property
    def nonresponse_reasons(self) -> tuple[str, ...]:
        seen: dict[str, None] = {}
        for it in self.items:
            for r in it.nonresponse_reasons:
                seen.setdefault(r, None)
        for c in self.codes:
            if c.kind is CodeKind.NONRESPONSE:
                seen.setdefault(c.reason, None)
        return tuple(seen)
