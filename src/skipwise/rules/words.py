"""Routing rules in plain words, for codebooks and reports.

A rule tree (:mod:`skipwise.rules.ast`) is rendered as an English sentence
that uses the questionnaire's item labels and value labels, so that an
analyst who never reads the rule language can tell who was asked an item:
``age < 75 and employed == 1`` becomes *asked if 'Your age in years' is
under 75 and 'In paid work last week' is 'Yes'*.

The wording follows the rule language's three-valued logic: a comparison
with an item that was legitimately skipped is false, so ``x != 1`` on an item
that has its own routing reads *'x' was asked and is not 'Yes'*, while
``not x == 1`` reads *'x' is not 'Yes' or was not asked*.  Context columns
(frame and paradata) are never skipped and get no such clause.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Mapping

from skipwise.rules import ast

if TYPE_CHECKING:  # pragma: no cover
    from skipwise.questionnaire.model import Item, Questionnaire

__all__ = ["rule_words", "universe_words"]

_CMP = {"==": "is", "!=": "is not", "<": "is under", "<=": "is at most", ">": "is over",
        ">=": "is at least"}
_CMP_REVERSED = {"<": ">", "<=": ">=", ">": "<", ">=": "<=", "==": "==", "!=": "!="}
_ARITH = {"+": "plus", "-": "minus", "*": "times", "/": "divided by"}


def universe_words(item: "Item", questionnaire: "Questionnaire") -> str:
    """Who was asked ``item``, as a sentence ("Asked of every case." when it has no rule)."""
    if item.rule is None:
        return "Asked of every case."
    return "Asked if " + rule_words(item.rule, questionnaire) + "."


def rule_words(node: ast.BoolNode, questionnaire: "Questionnaire") -> str:
    """A rule tree in plain words (no leading "asked if", no final full stop)."""
    return _Words(questionnaire).bool(node, top=True)


def _number(v: float) -> str:
    f = float(v)
    return f"{int(f):,}" if f.is_integer() else f"{f:,g}"


class _Words:
    def __init__(self, q: "Questionnaire") -> None:
        self.q = q

    # -- names and values -------------------------------------------------------
    def item(self, name: str) -> "Item | None":
        if name in self.q:
            return self.q.item(name)
        owner = self.q.column_owner.get(name)  # an option column of a check-all-that-apply set
        return self.q.item(owner) if owner is not None else None

    def option(self, name: str) -> tuple["Item", str] | None:
        """The set and the option label of a set's option column."""
        it = self.item(name)
        if it is None or name == it.name or name not in it.columns or not it.options:
            return None
        return it, str(it.options[it.columns.index(name)][1])

    def subject(self, name: str) -> str:
        opt = self.option(name)
        if opt is not None:
            it, label = opt
            return f"'{(it.label or it.name).strip()}: {label}'"
        it = self.item(name)
        label = (it.label or "").strip() if it is not None else ""
        text = f"'{label}'" if label else f"'{name}'"
        if it is not None and it.member is not None:
            text += f" (member {it.member})"
        return text

    def skippable(self, name: str) -> bool:
        """True for an item with its own routing: a comparison with it is false when it was skipped."""
        it = self.item(name)
        return it is not None and it.rule is not None

    def value(self, v: float | str, name: str | None) -> str:
        it = self.item(name) if name else None
        labels: Mapping = (it.values or {}) if it is not None else {}
        if isinstance(v, str):
            lab = labels.get(v)
            return f"'{lab}'" if lab else f'"{v}"'
        for key in (v, int(v) if float(v).is_integer() else None, str(_number(v))):
            if key is not None and key in labels:
                return f"'{labels[key]}'"
        return _number(v)

    def operand(self, node: ast.ValueNode, name_hint: str | None = None) -> str:
        if isinstance(node, ast.Name):
            return self.subject(node.name)
        if isinstance(node, ast.Number):
            return self.value(node.value, name_hint)
        if isinstance(node, ast.String):
            return self.value(node.value, name_hint)
        if isinstance(node, ast.Neg):
            return "minus " + self.operand(node.operand)
        if isinstance(node, ast.Arith):
            return f"({self.operand(node.left)} {_ARITH[node.op]} {self.operand(node.right)})"
        raise TypeError(f"not a value node: {node!r}")

    # -- conditions ---------------------------------------------------------------
    def compare(self, node: ast.Compare) -> str:
        left, right, op = node.left, node.right, node.op
        if not isinstance(left, ast.Name) and isinstance(right, ast.Name):
            left, right, op = right, left, _CMP_REVERSED[op]
        hint = left.name if isinstance(left, ast.Name) else None
        opt = self.option(hint) if hint else None
        if opt is not None and op in ("==", "!=") and isinstance(right, (ast.Number, ast.String)):
            it, _ = opt
            chosen = right.value == it.selected
            if chosen or (it.unselected is not None and right.value == it.unselected):
                return f"{self.operand(left)} was {'' if chosen == (op == '==') else 'not '}selected"
        text = f"{self.operand(left)} {_CMP[op]} {self.operand(right, hint)}"
        if op == "!=":
            skippable = [n for n, _ in ast.names(node) if self.skippable(n)]
            if skippable:
                text = f"{self.operand(left)} was asked and {_CMP[op]} {self.operand(right, hint)}"
        return text

    def in_list(self, node: ast.InList) -> str:
        hint = node.operand.name if isinstance(node.operand, ast.Name) else None
        opts = [self.value(o, hint) for o in node.options]
        listed = opts[0] if len(opts) == 1 else ", ".join(opts[:-1]) + " or " + opts[-1]
        subject = self.operand(node.operand)
        if not node.negated:
            return f"{subject} is {'one of ' if len(opts) > 1 else ''}{listed}"
        asked = any(self.skippable(n) for n, _ in ast.names(node))
        return f"{subject} {'was asked and ' if asked else ''}is {'none of' if len(opts) > 1 else 'not'} {listed}"

    def negation(self, node: ast.Not) -> str:
        inner = node.operand
        if isinstance(inner, ast.Answered):
            return f"{self.subject(inner.name)} was not answered"
        if isinstance(inner, ast.HasCode):
            return f"{self.subject(inner.name)} does not carry the code {self.reason(inner)}"
        if isinstance(inner, ast.Compare) and inner.op == "==" and isinstance(inner.left, ast.Name):
            hint = inner.left.name
            text = f"{self.subject(hint)} is not {self.operand(inner.right, hint)}"
            return text + (" or was not asked" if self.skippable(hint) else "")
        if isinstance(inner, ast.InList) and not inner.negated and isinstance(inner.operand, ast.Name):
            hint = inner.operand.name
            opts = [self.value(o, hint) for o in inner.options]
            listed = opts[0] if len(opts) == 1 else ", ".join(opts[:-1]) + " or " + opts[-1]
            text = f"{self.subject(hint)} is {'none of' if len(opts) > 1 else 'not'} {listed}"
            return text + (" or was not asked" if self.skippable(hint) else "")
        return f"it is not the case that {self.bool(inner)}"

    def reason(self, node: ast.HasCode) -> str:
        it = self.item(node.name)
        code = it.code_for(node.reason) if it is not None else None
        if code is None:
            code = next((c for c in self.q.codes if c.reason == node.reason), None)
        label = code.label if code is not None and code.label else node.reason.replace("_", " ")
        return f"'{label}'"

    def bool(self, node: ast.BoolNode, top: bool = False) -> str:
        if isinstance(node, ast.Compare):
            return self.compare(node)
        if isinstance(node, ast.InList):
            return self.in_list(node)
        if isinstance(node, ast.Answered):
            return f"{self.subject(node.name)} was answered"
        if isinstance(node, ast.HasCode):
            return f"{self.subject(node.name)} carries the code {self.reason(node)}"
        if isinstance(node, ast.Not):
            return self.negation(node)
        if isinstance(node, ast.BoolOp):
            parts = []
            for sub in node.operands:
                text = self.bool(sub)
                if isinstance(sub, ast.BoolOp) and sub.op != node.op:
                    text = f"({text})"
                parts.append(text)
            return f" {node.op} ".join(parts)
        raise TypeError(f"not a condition node: {node!r}")
