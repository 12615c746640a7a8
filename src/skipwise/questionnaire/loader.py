"""Load and validate a questionnaire file (format version 1).

All problems of a file are collected and raised together as one
:class:`~skipwise.errors.SkipwiseError`, each with its line and, where it
helps, the nearest valid name.  The file format is documented in
``docs/questionnaire-format.md``.
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path
from typing import Any

from skipwise.errors import ProblemCode, ProblemList, did_you_mean
from skipwise.questionnaire.model import (
    BreakoffSpec, Code, CodeKind, Item, ItemType, Questionnaire, Roster, Section,
)
from skipwise.questionnaire.names import NameTable
from skipwise.questionnaire.model import STUDY_KEYS
from skipwise.questionnaire.numbers import code_number, number_reasons
from skipwise.questionnaire.templates import expand, template_problem
from skipwise.questionnaire.yamlread import LineDict, LineList, is_version, load_yaml_text, read_text_file
from skipwise.rules import ast
from skipwise.rules.parser import RuleSyntaxError, parse_rule

__all__ = ["load_questionnaire", "loads_questionnaire", "RESERVED_STATUSES"]

TOP_KEYS = ("format", "survey", "context", "codes", "sections", "breakoff", "study")
SURVEY_KEYS = ("name", "title", "case_id")
SECTION_KEYS = ("name", "label", "asked_if", "items", "roster", "optional")
ROSTER_KEYS = ("count", "max", "column")
ITEM_KEYS = ("name", "label", "type", "values", "range", "codes", "asked_if",
             "options", "selected", "unselected", "column", "text", "optional", "level")
CODE_KEYS = ("value", "reason", "kind", "label", "number")
BREAKOFF_KEYS = ("min_run", "last_item", "disposition", "breakoff_codes")
RESERVED_STATUSES = ("answered", "skipped", "item_missing", "wrong_code", "off_route",
                     "gate_unknown", "breakoff", "invalid", "left_blank", "imputed")


def load_questionnaire(path: str | Path) -> Questionnaire:
    """Read and validate a questionnaire file.

    Raises
    ------
    SkipwiseError
        Carrying every problem found in the file, each with file, line and item.
    """
    path = Path(path)
    return loads_questionnaire(read_text_file(path), file=str(path))


def loads_questionnaire(text: str, file: str | None = None) -> Questionnaire:
    """Like :func:`load_questionnaire`, from text already in memory."""
    doc = load_yaml_text(text, file)
    return _Builder(file).build(doc)


def _is_number(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool)


class _Builder:
    def __init__(self, file: str | None):
        self.file = file
        self.problems = ProblemList(file=file)

    # -- small helpers -------------------------------------------------------------------------
    def add(self, code: ProblemCode, message: str, line: int | None, item: str | None = None,
            hint: str | None = None, column: int | None = None) -> None:
        self.problems.add(code, message, line=line, item=item, hint=hint, column=column)

    def check_keys(self, d: LineDict, allowed: tuple[str, ...], what: str, item: str | None = None) -> None:
        for key, line in getattr(d, "duplicate_keys", []):
            self.add(ProblemCode.DUPLICATE_NAME, f"key '{key}' appears twice in {what}", line, item,
                     "keep one of them")
        for key in d:
            if key not in allowed:
                hint = did_you_mean(str(key), allowed) or f"allowed keys: {', '.join(allowed)}"
                self.add(ProblemCode.UNKNOWN_KEY, f"unknown key '{key}' in {what}", d.key_line(key), item, hint)

    def need_map(self, value: Any, what: str, line: int, item: str | None = None) -> LineDict | None:
        if isinstance(value, LineDict):
            return value
        self.add(ProblemCode.BAD_VALUE, f"{what} must be a mapping of keys to values", line, item)
        return None

    def need_list(self, value: Any, what: str, line: int, item: str | None = None) -> LineList | None:
        if isinstance(value, LineList):
            return value
        self.add(ProblemCode.BAD_VALUE, f"{what} must be a list", line, item, "write it as '- ...' entries")
        return None

    # -- document ------------------------------------------------------------------------------
    def build(self, doc: Any) -> Questionnaire:
        if not isinstance(doc, LineDict):
            self.add(ProblemCode.BAD_VALUE, "the file must be a mapping with 'format', 'survey' and "
                     "'sections'", 1, hint="see docs/questionnaire-format.md")
            self.problems.raise_if_any()
        self.check_keys(doc, TOP_KEYS, "the file")
        from skipwise.questionnaire.values import normalize_texts
        normalize_texts(self, doc)
        fmt = doc.get("format")
        if not is_version(fmt, 1):
            self.add(ProblemCode.FORMAT_VERSION, f"format must be 1, found {fmt!r}",
                     doc.key_line("format") if "format" in doc else 1, hint="write 'format: 1' at the top")
        survey = self.survey(doc)
        context = self.context(doc)
        global_codes = self.codes(doc.get("codes"), doc.key_line("codes"), None) if "codes" in doc else ()
        names = NameTable(self, context=context)
        sections_raw = self.need_list(doc.get("sections"), "'sections'", doc.key_line("sections"))
        if "sections" not in doc:
            self.add(ProblemCode.MISSING_KEY, "missing 'sections'", doc.line, hint="list the sections and their items")
        names.declare_all(sections_raw or [], survey.get("case_id"))
        sections, items = [], []
        for raw in sections_raw or []:
            built = self.section(raw, global_codes, names)
            if built:
                sections.append(built[0])
                items.extend(built[1])
        breakoff = self.breakoff(doc)
        study = self.study(doc.get("study"), doc.key_line("study"), "the questionnaire") if "study" in doc else {}
        numbers = number_reasons(self, global_codes, items)
        self.problems.raise_if_any(
            headline=f"{len(self.problems)} problem(s) in questionnaire {self.file or ''}".rstrip())
        return Questionnaire(name=survey["name"], title=survey.get("title", ""), case_id=survey["case_id"],
                             context=context, codes=global_codes, sections=tuple(sections),
                             items=tuple(items), breakoff=breakoff, reason_numbers=numbers, study=study,
                             path=self.file)

    def study(self, raw: Any, line: int, where: str) -> dict[str, str]:
        """The study-level metadata block: known keys, each a single text, number or date."""
        block = self.need_map(raw, "'study'", line)
        if block is None:
            return {}
        self.check_keys(block, STUDY_KEYS, f"'study' of {where}")
        out: dict[str, str] = {}
        for key, value in block.items():
            if isinstance(value, (LineDict, LineList)) or value is None or isinstance(value, bool):
                self.add(ProblemCode.BAD_VALUE, f"study key '{key}' must be a single text", block.key_line(key),
                         hint="quote the text, e.g. mode: \"face to face\"")
            elif key in STUDY_KEYS:
                out[str(key)] = str(value)
        return out

    def survey(self, doc: LineDict) -> dict[str, str]:
        raw = self.need_map(doc.get("survey"), "'survey'", doc.key_line("survey")) if "survey" in doc else None
        if "survey" not in doc:
            self.add(ProblemCode.MISSING_KEY, "missing 'survey'", doc.line, hint="add survey: {name: ..., case_id: ...}")
        out = {"name": "", "case_id": ""}
        if raw is None:
            return out
        self.check_keys(raw, SURVEY_KEYS, "'survey'")
        for key in ("name", "case_id"):
            if not isinstance(raw.get(key), str) or not raw.get(key):
                self.add(ProblemCode.MISSING_KEY, f"survey needs '{key}'", raw.line,
                         hint="e.g. case_id: resp_id" if key == "case_id" else "a short id")
            else:
                out[key] = raw[key]
        if "title" in raw:
            out["title"] = str(raw["title"])
        return out

    def context(self, doc: LineDict) -> tuple[str, ...]:
        if "context" not in doc:
            return ()
        raw = self.need_list(doc["context"], "'context'", doc.key_line("context"))
        out: list[str] = []
        for i, name in enumerate(raw or []):
            if not isinstance(name, str):
                self.add(ProblemCode.BAD_VALUE, f"context entry {name!r} must be a column name", raw.item_line(i))
            elif name in out:
                self.add(ProblemCode.DUPLICATE_NAME, f"context column '{name}' listed twice", raw.item_line(i))
            else:
                out.append(name)
        return tuple(out)

    def codes(self, raw: Any, line: int, item: str | None) -> tuple[Code, ...]:
        lst = self.need_list(raw, "'codes'", line, item)
        out: list[Code] = []
        for i, entry in enumerate(lst or []):
            eline = lst.item_line(i)
            d = self.need_map(entry, "a code", eline, item)
            if d is None:
                continue
            self.check_keys(d, CODE_KEYS, "a code", item)
            value, reason, kind = d.get("value"), d.get("reason"), d.get("kind")
            ok = True
            if value is None or isinstance(value, (bool, list, dict)):
                self.add(ProblemCode.MISSING_KEY if value is None else ProblemCode.BAD_VALUE,
                         "a code needs a 'value' (a number, or a text such as '.a')", eline, item)
                ok = False
            if not isinstance(reason, str) or not reason.isidentifier():
                self.add(ProblemCode.BAD_VALUE, f"code reason {reason!r} must be a name like dont_know", eline, item)
                ok = False
            elif reason in RESERVED_STATUSES:
                self.add(ProblemCode.BAD_VALUE, f"code reason '{reason}' is a status name", eline, item,
                         "choose another reason name")
                ok = False
            try:
                kind_e = CodeKind(kind)
            except ValueError:
                self.add(ProblemCode.BAD_VALUE, f"code kind {kind!r} is not one of structural, nonresponse, "
                         "substantive", d.key_line("kind") if "kind" in d else eline, item,
                         did_you_mean(str(kind), [k.value for k in CodeKind]))
                ok = False
            number = code_number(self, d, kind_e if ok else None, reason, item)
            if ok:
                # -9 and "-9" would both match a text cell holding "-9": treat them as one value.
                if any(c.value == value or str(c.value) == str(value) for c in out):
                    self.add(ProblemCode.DUPLICATE_NAME, f"code value {value!r} declared twice", eline, item)
                    continue
                out.append(Code(value=value, reason=reason, kind=kind_e,
                                label=str(d["label"]) if "label" in d else None, number=number, line=eline))
        return tuple(out)

    def breakoff(self, doc: LineDict) -> BreakoffSpec:
        if "breakoff" not in doc:
            return BreakoffSpec()
        if doc["breakoff"] is False or doc["breakoff"] is True:
            # `breakoff: false` turns detection off (every blank in universe is then item nonresponse)
            return BreakoffSpec(enabled=bool(doc["breakoff"]), line=doc.key_line("breakoff"))
        d = self.need_map(doc["breakoff"], "'breakoff'", doc.key_line("breakoff"))
        if d is None:
            return BreakoffSpec()
        self.check_keys(d, BREAKOFF_KEYS, "'breakoff'")
        min_run = d.get("min_run", 5)
        if not isinstance(min_run, int) or isinstance(min_run, bool) or min_run < 1:
            self.add(ProblemCode.BAD_VALUE, f"breakoff min_run must be a whole number >= 1, found {min_run!r}",
                     d.key_line("min_run"))
            min_run = 5
        codes = d.get("breakoff_codes", [])
        if "disposition" in d and not codes:
            self.add(ProblemCode.MISSING_KEY, "breakoff 'disposition' needs 'breakoff_codes'", d.line,
                     hint="list the disposition codes that mean the interview broke off")
        for key in ("last_item", "disposition"):
            if key in d and not isinstance(d[key], str):
                self.add(ProblemCode.BAD_VALUE, f"breakoff {key} must be a column name", d.key_line(key))
        return BreakoffSpec(min_run=min_run, last_item=d.get("last_item"), disposition=d.get("disposition"),
                            breakoff_codes=tuple(codes) if isinstance(codes, list) else (codes,), line=d.line)

    # -- sections and items --------------------------------------------------------------------
    def section(self, raw: Any, global_codes: tuple[Code, ...], names: NameTable) -> tuple[Section, list[Item]] | None:
        d = self.need_map(raw, "a section", getattr(raw, "line", 0))
        if d is None:
            return None
        self.check_keys(d, SECTION_KEYS, "a section")
        sname = d.get("name")
        if not isinstance(sname, str):
            self.add(ProblemCode.MISSING_KEY, "a section needs a 'name'", d.line)
            sname = f"section@{d.line}"
        sec_rule = self.rule(d, None, names) if "asked_if" in d else None
        sec_optional = self.flag(d, "optional", f"section '{sname}'", None)
        roster = self.roster(d, names) if "roster" in d else None
        raw_items = self.need_list(d.get("items"), f"items of section '{sname}'", d.key_line("items") if "items" in d else d.line)
        if roster is not None and raw_items is not None and not raw_items:
            self.add(ProblemCode.MISSING_KEY, f"roster section '{sname}' has no items", d.key_line("items"), sname,
                     "list the items asked for each member, or remove the roster")
        members = range(1, roster.max + 1) if roster else [None]
        items: list[Item] = []
        specs = [self.item_spec(r, global_codes) for r in raw_items or []]
        for n in members:
            mapping = names.member_mapping(sname, n)
            for spec in specs:
                if spec is None:
                    continue
                item = self.item(spec, sname, sec_rule, roster, n, mapping, names, sec_optional)
                if item is not None:
                    items.append(item)
        sec = Section(name=sname, label=str(d.get("label", "")), asked_if=d.get("asked_if"),
                      roster=roster, optional=sec_optional, items=tuple(it.name for it in items), line=d.line)
        return sec, items

    def roster(self, d: LineDict, names: NameTable) -> Roster | None:
        r = self.need_map(d["roster"], "'roster'", d.key_line("roster"))
        if r is None:
            return None
        self.check_keys(r, ROSTER_KEYS, "'roster'")
        count, mx, col = r.get("count"), r.get("max"), r.get("column", "{item}_{n}")
        ok = True
        if not isinstance(count, str):
            self.add(ProblemCode.MISSING_KEY, "roster needs 'count': the item holding the number of members", r.line)
            ok = False
        else:
            ok = names.check_reference(count, r.key_line("count"), None, numeric=True)
        if not isinstance(mx, int) or isinstance(mx, bool) or not 1 <= mx <= 99:
            self.add(ProblemCode.BAD_VALUE, f"roster 'max' must be a whole number from 1 to 99, found {mx!r}",
                     r.key_line("max") if "max" in r else r.line)
            ok = False
        why = template_problem(col, ("item", "n"), ("item", "n"))
        if why:
            self.add(ProblemCode.BAD_VALUE, f"roster 'column' {col!r}: {why}", r.key_line("column"),
                     d.get("name") if isinstance(d.get("name"), str) else None,
                     "e.g. column: '{item}_{n}'")
            ok = False
        return Roster(count=count, max=mx, column=col, line=r.line) if ok else None

    def item_spec(self, raw: Any, global_codes: tuple[Code, ...]) -> dict[str, Any] | None:
        """Check one item entry once (not once per roster member)."""
        d = self.need_map(raw, "an item", getattr(raw, "line", 0))
        if d is None:
            return None
        name = d.get("name")
        if not isinstance(name, str) or not name:
            self.add(ProblemCode.MISSING_KEY, "an item needs a 'name'", d.line)
            return None
        self.check_keys(d, ITEM_KEYS, "an item", name)
        try:
            itype = ItemType(d.get("type"))
        except ValueError:
            self.add(ProblemCode.BAD_VALUE if "type" in d else ProblemCode.MISSING_KEY,
                     f"item type {d.get('type')!r} is not one of {', '.join(t.value for t in ItemType)}",
                     d.key_line("type") if "type" in d else d.line, name,
                     did_you_mean(str(d.get("type")), [t.value for t in ItemType]))
            return None
        from skipwise.questionnaire.values import check_item_values
        values, rng, options = check_item_values(self, d, itype, name)
        own = self.codes(d["codes"], d.key_line("codes"), name) if "codes" in d else ()
        codes = self.merge_codes(global_codes, own)
        from skipwise.questionnaire.values import check_collisions
        check_collisions(self, d, name, itype, values, rng, codes, own)
        return {"d": d, "name": name, "type": itype, "values": values, "range": rng,
                "options": options, "codes": codes, "text": self.wording(d, name),
                "optional": self.flag(d, "optional", f"item '{name}'", name) if "optional" in d else None,
                "level": self.level(d, name)}

    def level(self, d: LineDict, item: str) -> str | None:
        """The item's ``level:`` (measurement level in delivered files), or None."""
        levels = ("nominal", "ordinal", "scale")
        if "level" not in d:
            return None
        value = d["level"]
        if isinstance(value, str) and value.strip().lower() in levels:
            return value.strip().lower()
        self.add(ProblemCode.BAD_VALUE, f"'level' of item '{item}' must be nominal, ordinal or scale, "
                 f"found {value!r}", d.key_line("level"), item,
                 did_you_mean(str(value), levels) or "write e.g. 'level: ordinal'")
        return None

    def flag(self, d: LineDict, key: str, what: str, item: str | None) -> bool:
        """A true/false key (false when absent); anything but a YAML boolean is refused."""
        if key not in d:
            return False
        value = d[key]
        if isinstance(value, bool):
            return value
        self.add(ProblemCode.BAD_VALUE, f"'{key}' of {what} must be true or false, found {value!r}",
                 d.key_line(key), item, f"write '{key}: true' or '{key}: false', unquoted")
        return False

    def wording(self, d: LineDict, item: str) -> str | None:
        """The item's ``text:``: the question wording as asked, one text."""
        if "text" not in d:
            return None
        value = d["text"]
        if isinstance(value, str):  # "" also after a list or mapping was refused by normalize_texts
            return value.strip() or None
        self.add(ProblemCode.BAD_VALUE, f"'text' of item '{item}' must be the question wording as one text, "
                 f"found {value!r}", d.key_line("text"), item,
                 "write the wording on one line, or as a block after 'text: >'")
        return None

    @staticmethod
    def merge_codes(global_codes: tuple[Code, ...], own: tuple[Code, ...]) -> tuple[Code, ...]:
        own_values = {c.value for c in own}
        return tuple(c for c in global_codes if c.value not in own_values) + own

    def item(self, spec: dict[str, Any], section: str, sec_rule: ast.BoolNode | None, roster: Roster | None,
             n: int | None, mapping: dict[str, str], names: NameTable, sec_optional: bool = False) -> Item | None:
        d: LineDict = spec["d"]
        base = spec["name"]
        name = mapping.get(base, base)
        parts: list[str] = []
        rules: list[ast.BoolNode] = []
        if sec_rule is not None:
            rules.append(ast.rename(sec_rule, mapping))
            parts.append(d_text(sec_rule, mapping))
        if roster is not None:
            rules.append(ast.Compare(">=", ast.Name(roster.count), ast.Number(float(n))))
            parts.append(f"{roster.count} >= {n}")
        if "asked_if" in d:
            own = self.rule(d, base if n in (None, 1) else None, names, mapping=mapping, item=name)
            if own is not None:
                rules.append(ast.rename(own, mapping))
                parts.append(d["asked_if"] if not mapping else d_text(own, mapping))
        rule = None
        if rules:
            rule = rules[0] if len(rules) == 1 else ast.BoolOp("and", tuple(rules))
        itype: ItemType = spec["type"]
        if itype is ItemType.MULTI:
            pattern = d.get("column", "{item}_{option}")
            columns = tuple(expand(pattern, item=name, option=k) for k, _ in spec["options"])
        else:
            columns = (name,)
        item = Item(name=name, type=itype, section=section, label=str(d.get("label", "")),
                    values=spec["values"], range=spec["range"], codes=spec["codes"], rule=rule,
                    rule_parts=tuple(parts), columns=columns, options=spec["options"],
                    selected=d.get("selected", 1), unselected=d.get("unselected", 0),
                    roster=section if roster else None, member=n, base_name=base, text=spec["text"],
                    optional=sec_optional if spec["optional"] is None else spec["optional"],
                    level=spec["level"], line=d.line)
        names.define(item)
        return item

    def rule(self, d: LineDict, item_for_problems: str | None, names: NameTable, *,
             mapping: dict[str, str] | None = None, item: str | None = None) -> ast.BoolNode | None:
        """Parse ``asked_if`` of a section or item and check every name it reads."""
        text = d["asked_if"]
        mark = d.value_mark("asked_if")
        who = item or d.get("name")
        report = mapping is None or item_for_problems is not None  # report once per roster item
        if not isinstance(text, str):
            if report:
                self.add(ProblemCode.RULE_SYNTAX, f"asked_if must be a condition written as text, found {text!r}",
                         mark.line, who)
            return None
        try:
            node = parse_rule(text)
        except RuleSyntaxError as err:
            if report:
                offset = 0 if mark.style in ("|", ">") else mark.column - 1 + (1 if mark.style in ("'", '"') else 0)
                self.add(ProblemCode.RULE_SYNTAX, f"{err.reason} in rule {text!r} (rule column {err.col})",
                         mark.line, who, err.problems[0].hint, column=offset + err.col)
            return None
        ok = names.check_rule(node, mark, who, mapping or {}, report=report)
        return node if ok else None


def d_text(node: ast.BoolNode, mapping: dict[str, str]) -> str:
    return ast.to_text(ast.rename(node, mapping))


def parse_date(value: Any) -> dt.date | None:
    if isinstance(value, dt.date):
        return value
    try:
        return dt.date.fromisoformat(str(value))
    except ValueError:
        return None
