"""Checks of an item's value set, range, options and codes."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from skipwise.errors import ProblemCode
from skipwise.questionnaire.model import Code, ItemType
from skipwise.questionnaire.templates import template_problem
from skipwise.questionnaire.yamlread import LineDict, LineList

if TYPE_CHECKING:  # pragma: no cover
    from skipwise.questionnaire.loader import _Builder

__all__ = ["check_item_values", "check_collisions", "normalize_texts"]


def _num(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def check_item_values(b: "_Builder", d: LineDict, itype: ItemType, name: str):
    """Validate ``values``, ``range`` and ``options``; return them in frozen form."""
    from skipwise.questionnaire.loader import parse_date

    values = rng = None
    options: tuple[tuple[object, str], ...] = ()
    if "values" in d:
        if itype not in (ItemType.CATEGORICAL, ItemType.INTEGER):
            b.add(ProblemCode.BAD_VALUE, f"'values' is for categorical items, not {itype.value}", d.key_line("values"), name)
        raw = b.need_map(d["values"], "'values'", d.key_line("values"), name)
        if raw is not None:
            for k in raw:
                if isinstance(k, bool) or not (_num(k) or isinstance(k, str)):
                    b.add(ProblemCode.BAD_VALUE, f"category value {k!r} must be a number or quoted text",
                          raw.key_line(k), name, "quote values such as 'yes' or 'no'")
            values = {k: str(v) for k, v in raw.items() if not isinstance(k, bool)}
    elif itype is ItemType.CATEGORICAL:
        b.add(ProblemCode.MISSING_KEY, "a categorical item needs 'values'", d.line, name,
              "e.g. values: {1: Yes, 2: No}")
    if "range" in d:
        raw = d["range"]
        line = d.key_line("range")
        if itype not in (ItemType.INTEGER, ItemType.NUMBER, ItemType.DATE):
            b.add(ProblemCode.BAD_VALUE, f"'range' is for integer, number or date items, not {itype.value}", line, name)
        elif not isinstance(raw, list) or len(raw) != 2:
            b.add(ProblemCode.BAD_VALUE, "range must be [lowest, highest]", line, name)
        elif itype is ItemType.DATE:
            lo, hi = parse_date(raw[0]), parse_date(raw[1])
            if lo is None or hi is None or lo > hi:
                b.add(ProblemCode.BAD_VALUE, f"date range [{', '.join(str(x) for x in raw)}] must be two dates YYYY-MM-DD, lowest first", line, name)
            else:
                rng = (lo.isoformat(), hi.isoformat())
        elif not (_num(raw[0]) and _num(raw[1])) or raw[0] > raw[1]:
            b.add(ProblemCode.BAD_VALUE, f"range {list(raw)!r} must be two numbers, lowest first", line, name)
        else:
            rng = (raw[0], raw[1])
    if itype is ItemType.MULTI:
        raw = d.get("options")
        if raw is None:
            b.add(ProblemCode.MISSING_KEY, "a multi item needs 'options' (one data column each)", d.line, name,
                  "e.g. options: {car: Car, bus: Bus}")
        else:
            opts = b.need_map(raw, "'options'", d.key_line("options"), name)
            options = tuple((k, str(v)) for k, v in (opts or {}).items())
        col = d.get("column", "{item}_{option}")
        why = template_problem(col, ("item", "option"), ("item", "option"))
        if why:
            b.add(ProblemCode.BAD_VALUE, f"multi 'column' {col!r}: {why}", d.key_line("column"), name,
                  "e.g. column: '{item}_{option}'")
        sel, unsel = d.get("selected", 1), d.get("unselected", 0)
        if sel is None or sel == unsel:
            b.add(ProblemCode.BAD_VALUE, "'selected' must be a value different from 'unselected'",
                  d.key_line("selected") if "selected" in d else d.line, name)
    else:
        for key in ("options", "selected", "unselected", "column"):
            if key in d:
                b.add(ProblemCode.BAD_VALUE, f"'{key}' is only for multi items", d.key_line(key), name)
    return values, rng, options


def check_collisions(b: "_Builder", d: LineDict, name: str, itype: ItemType, values: dict | None,
                     rng: tuple | None, codes: tuple[Code, ...], own: tuple[Code, ...] = ()) -> None:
    """A special code must never be a valid answer: not a category, not inside the range.

    A clash with a global code is reported on the item's line, one with the item's own code on
    that code's line.
    """
    for code in codes:
        line = (code.line if code in own else None) or d.line
        if values is not None and any(_same(code.value, k) for k in values):
            b.add(ProblemCode.CODE_COLLISION, f"code {code.value!r} ({code.reason}) is also a category of '{name}'",
                  line, name, "give the code a value outside the categories")
        elif rng is not None and itype in (ItemType.INTEGER, ItemType.NUMBER) and _num(code.value) \
                and rng[0] <= code.value <= rng[1]:
            b.add(ProblemCode.CODE_COLLISION, f"code {code.value!r} ({code.reason}) lies inside the range "
                  f"[{rng[0]}, {rng[1]}] of '{name}'", line, name, "move the code outside the range, or override it "
                  "for this item")
        elif itype is ItemType.MULTI and (_same(code.value, d.get("selected", 1)) or _same(code.value, d.get("unselected", 0))):
            b.add(ProblemCode.CODE_COLLISION, f"code {code.value!r} ({code.reason}) equals the selected/unselected "
                  f"value of '{name}'", line, name, "use another code value")


def _same(a: Any, b: Any) -> bool:
    if _num(a) and _num(b):
        return float(a) == float(b)
    return a == b


#: Keys whose values are texts (names, labels, reasons): kept as written in the file.
_SURVEY_TEXTS = ("name", "title", "case_id")
_SECTION_TEXTS = ("name", "label")
_ITEM_TEXTS = ("name", "label", "text", "column")
_CODE_TEXTS = ("reason", "label")
_LABELLED = ("values", "options")


def normalize_texts(b: "_Builder", doc: LineDict) -> None:
    """Replace every text value of the questionnaire by its source text, in place (YAML 1.2 rule).

    ``label: 2024`` is the text "2024", ``label: 1.50`` is "1.50" and ``name: true`` is "true":
    the file's own characters, never a number or boolean turned back into text.  A list or a
    mapping where a text belongs is refused with its line; an empty or null label is "".
    """

    def texts(d: Any, keys: tuple[str, ...], what: str, item: str | None = None) -> None:
        if not isinstance(d, LineDict):
            return
        for key in keys:
            if key in d:
                _one(b, d, key, f"'{key}' of {what}", item, is_label=key in ("label", "title", "text"))

    survey = doc.get("survey")
    texts(survey, _SURVEY_TEXTS, "the survey")
    context = doc.get("context")
    if isinstance(context, LineList):
        for i in range(len(context)):
            t = context.text(i)
            if t is not None and context[i] is not None:
                context[i] = t
    for code in _codes(doc.get("codes")):
        texts(code, _CODE_TEXTS, "a code")
    for sec in doc.get("sections") if isinstance(doc.get("sections"), list) else []:
        texts(sec, _SECTION_TEXTS, "a section")
        items = sec.get("items") if isinstance(sec, LineDict) else None
        for it in items if isinstance(items, list) else []:
            if not isinstance(it, LineDict):
                continue
            texts(it, ("name",), "an item")
            name = it.get("name") if isinstance(it.get("name"), str) else None
            texts(it, _ITEM_TEXTS[1:], "an item", name)
            for code in _codes(it.get("codes")):
                texts(code, _CODE_TEXTS, "a code", name)
            for key in _LABELLED:
                labels = it.get(key)
                if isinstance(labels, LineDict):
                    for k in list(labels):
                        _one(b, labels, k, f"the label of {key[:-1]} {k!r}", name, is_label=True)


def _codes(raw: Any) -> list:
    return [c for c in raw if isinstance(c, LineDict)] if isinstance(raw, LineList) else []


def _one(b: "_Builder", d: LineDict, key: Any, what: str, item: str | None, is_label: bool) -> None:
    value = d[key]
    text = d.text(key)
    if text is None:
        kind = "a list" if isinstance(value, list) else "a mapping"
        b.add(ProblemCode.BAD_VALUE, f"{what} must be a text, found {kind}", d.key_line(key), item,
              "write the text on one line, quoted if it holds ':', '[' or '{'")
        d[key] = ""
    elif value is None:
        if is_label:
            d[key] = ""  # an empty label; a missing name is left None for the loader to report
    elif not isinstance(value, str):
        d[key] = text
