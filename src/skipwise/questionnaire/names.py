"""Which names a rule may read at each point of the questionnaire.

A rule may read context columns and items asked *earlier* in interview
order.  Inside a roster, an item's own roster names mean the same member
(``p_age`` in member 2's rules is ``p_age_2``).  Check-all-that-apply sets
are read through their option columns (``modes_car == 1``) or as a whole
with ``answered(modes)`` / ``has_code(modes, "refused")``.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from skipwise.errors import ProblemCode, did_you_mean
from skipwise.questionnaire.model import Item, ItemType
from skipwise.questionnaire.templates import expand, template_problem
from skipwise.questionnaire.yamlread import LineDict, Mark
from skipwise.rules import ast

if TYPE_CHECKING:  # pragma: no cover
    from skipwise.questionnaire.loader import _Builder

__all__ = ["NameTable"]

_NUMERIC = (ItemType.INTEGER, ItemType.NUMBER)


class NameTable:
    def __init__(self, builder: "_Builder", *, context: tuple[str, ...]):
        self.b = builder
        self.context = set(context)
        self.declared: dict[str, int] = {}          # every name the file will define -> line
        self.defined: dict[str, Item] = {}          # names defined so far -> owning item
        self.option_of: dict[str, Item] = {}        # option column -> its set
        self.members: dict[str, list[str]] = {}     # roster section -> base item names
        self.roster_of: dict[str, tuple[str, str]] = {}  # section -> column pattern, name

    # -- first pass ----------------------------------------------------------------------------
    def declare_all(self, sections: list[Any], case_id: str | None) -> None:
        """Collect every name the file defines, to tell forward from unknown references."""
        seen_sections: dict[str, int] = {}
        reserved = dict.fromkeys(self.context, 0)
        if case_id:
            reserved[case_id] = 0
        for sec in sections:
            if not isinstance(sec, LineDict):
                continue
            sname = sec.get("name")
            if isinstance(sname, str):
                if sname in seen_sections:
                    self.b.add(ProblemCode.DUPLICATE_NAME, f"section '{sname}' is defined twice "
                               f"(first on line {seen_sections[sname]})", sec.line, hint="rename one of them")
                seen_sections.setdefault(sname, sec.line)
            roster = sec.get("roster") if isinstance(sec.get("roster"), LineDict) else None
            members = [None]
            pattern = "{item}_{n}"
            if roster is not None and isinstance(roster.get("max"), int) and not isinstance(roster.get("max"), bool):
                members = list(range(1, max(1, min(roster["max"], 99)) + 1))
                given = roster.get("column", pattern)
                pattern = given if template_problem(given, ("item", "n"), ("item", "n")) is None else pattern
            items = sec.get("items") if isinstance(sec.get("items"), list) else []
            bases = [it.get("name") for it in items if isinstance(it, LineDict) and isinstance(it.get("name"), str)]
            if roster is not None and isinstance(sname, str):
                self.members[sname] = bases
                self.roster_of[sname] = (pattern, sname)
            for it in items:
                if not isinstance(it, LineDict) or not isinstance(it.get("name"), str):
                    continue
                for n in members:
                    name = self._expand(pattern, it["name"], n)
                    cols = [name]
                    if it.get("type") == "multi" and isinstance(it.get("options"), dict):
                        col_pat = it.get("column", "{item}_{option}")
                        if template_problem(col_pat, ("item", "option"), ("item", "option")) is None:
                            cols += [_safe_format(col_pat, item=name, option=k) for k in it["options"]]
                    for col in cols:
                        if col in reserved:
                            what = "the case id" if col == case_id else "a context column"
                            self.b.add(ProblemCode.DUPLICATE_NAME, f"name '{col}' is also {what}", it.line, col,
                                       "rename the item")
                        elif col in self.declared:
                            self.b.add(ProblemCode.DUPLICATE_NAME, f"name '{col}' is defined twice (first on line "
                                       f"{self.declared[col]})", it.line, col, "item and column names must be unique")
                        else:
                            self.declared[col] = it.line

    @staticmethod
    def _expand(pattern: str, name: str, n: int | None) -> str:
        return name if n is None else _safe_format(pattern, item=name, n=n)

    def member_mapping(self, section: str, n: int | None) -> dict[str, str]:
        if n is None or section not in self.members:
            return {}
        pattern = self.roster_of[section][0]
        return {base: _safe_format(pattern, item=base, n=n) for base in self.members[section]}

    # -- second pass ---------------------------------------------------------------------------
    def define(self, item: Item) -> None:
        self.defined[item.name] = item
        if item.type is ItemType.MULTI:
            for col in item.columns:
                self.option_of[col] = item
                self.defined[col] = item

    def check_reference(self, name: str, line: int, item: str | None, *, numeric: bool = False) -> bool:
        if name in self.context:
            return True
        if name in self.defined:
            owner = self.defined[name]
            if numeric and (owner.type not in _NUMERIC or name in self.option_of):
                self.b.add(ProblemCode.TYPE_CLASH, f"'{name}' must be an integer item to count roster members",
                           line, item)
                return False
            return True
        self._unknown(name, line, item, None)
        return False

    def _unknown(self, name: str, line: int, item: str | None, column: int | None) -> None:
        if name in self.declared and name == item:
            self.b.add(ProblemCode.FORWARD_REFERENCE, f"the rule of '{name}' reads '{name}' itself, which is "
                       "not yet asked when the rule is decided", line, item,
                       "route the item by earlier items or context columns", column=column)
        elif name in self.declared:
            self.b.add(ProblemCode.FORWARD_REFERENCE, f"'{name}' is asked later (line {self.declared[name]}); "
                       "a rule may only read earlier items or context columns", line, item,
                       "move the rule's item after it, or list the column under context", column=column)
        else:
            hint = did_you_mean(name, list(self.defined) + sorted(self.context))
            self.b.add(ProblemCode.UNKNOWN_NAME, f"unknown name '{name}' in rule", line, item,
                       hint or "names must be earlier items or context columns", column=column)

    def check_rule(self, node: ast.BoolNode, mark: Mark, who: str | None, mapping: dict[str, str], *,
                   report: bool) -> bool:
        offset = 0 if mark.style in ("|", ">") else mark.column - 1 + (1 if mark.style in ("'", '"') else 0)
        ok = True
        for n in ast.walk(node):
            if isinstance(n, (ast.Name, ast.Answered, ast.HasCode)):
                name = mapping.get(n.name, n.name)
                if name in self.defined or n.name in self.context:
                    if isinstance(n, ast.HasCode):
                        ok &= self._check_reason(name, n.reason, mark.line, who, offset + n.col, report)
                    continue
                ok = False
                if report:
                    self._unknown(n.name, mark.line, who, offset + n.col)
            elif isinstance(n, (ast.Compare, ast.InList)) and report:
                ok &= self._check_types(n, mapping, mark.line, who, offset + n.col)
        return ok

    def _check_reason(self, name: str, reason: str, line: int, who: str | None, col: int, report: bool) -> bool:
        if name in self.context:
            if report:
                self.b.add(ProblemCode.BAD_VALUE, f"has_code() reads an item's codes; '{name}' is a context column",
                           line, who, "use a comparison instead", column=col)
            return False
        owner = self.defined[name]
        if reason in owner.reasons:
            return True
        if report:
            self.b.add(ProblemCode.UNKNOWN_NAME, f"'{name}' has no code with reason '{reason}'", line, who,
                       did_you_mean(reason, owner.reasons) or f"its reasons: {', '.join(owner.reasons) or 'none'}",
                       column=col)
        return False

    def _check_types(self, n: ast.Compare | ast.InList, mapping: dict[str, str], line: int,
                     who: str | None, col: int) -> bool:
        """Flag comparisons that can never be true: text vs number, or a category that does not exist."""
        if isinstance(n, ast.InList):
            pairs = [(n.operand, lit) for lit in n.options]
        else:
            pairs = [(n.left, _lit(n.right)), (n.right, _lit(n.left))]
        ok = True
        for side, lit in pairs:
            if not isinstance(side, ast.Name) or lit is None:
                continue
            name = mapping.get(side.name, side.name)
            item = self.defined.get(name)
            if item is None:
                continue
            if item.type is ItemType.MULTI and name == item.name:
                self.b.add(ProblemCode.TYPE_CLASH, f"'{name}' is a check-all-that-apply set and has no single value",
                           line, who, f"compare one option column, e.g. "
                                      f"{item.columns[0] if item.columns else name + '_<option>'} == {item.selected!r}",
                           column=col)
                return False
            is_text_item = item.type is ItemType.TEXT
            if isinstance(lit, str) != is_text_item and not (item.type is ItemType.CATEGORICAL and item.values
                                                             and all(isinstance(k, str) for k in item.values)):
                if any(c.value == lit for c in item.codes):
                    continue
                self.b.add(ProblemCode.TYPE_CLASH, f"'{name}' is {item.type.value} but is compared with "
                           f"{'text' if isinstance(lit, str) else 'a number'} {lit!r}", line, who,
                           "quote text values and leave numbers unquoted", column=col)
                ok = False
            elif item.type is ItemType.CATEGORICAL and item.values is not None and n_is_equality(n):
                known = {_norm(k) for k in item.values} | {_norm(c.value) for c in item.codes}
                if _norm(lit) not in known:
                    self.b.add(ProblemCode.BAD_VALUE, f"'{name}' has no category {lit!r}, so this comparison "
                               "is never true", line, who,
                               f"its categories: {', '.join(map(str, item.values))}", column=col)
                    ok = False
        return ok


def n_is_equality(n: ast.Compare | ast.InList) -> bool:
    return isinstance(n, ast.InList) or n.op in ("==", "!=")


def _lit(node: ast.Node) -> float | str | None:
    if isinstance(node, ast.Number):
        return int(node.value) if float(node.value).is_integer() else node.value
    if isinstance(node, ast.String):
        return node.value
    return None


def _norm(v: Any) -> Any:
    if isinstance(v, (int, float)) and not isinstance(v, bool):
        return float(v)
    return v


def _safe_format(pattern: str, **kw: Any) -> str:
    """The template expanded as plain text (the loader refuses invalid templates itself)."""
    return expand(pattern, **kw)
