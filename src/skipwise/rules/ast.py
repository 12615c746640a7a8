"""The routing-rule syntax tree: small frozen nodes, nothing executable."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Iterator, Union

__all__ = [
    "Number", "String", "Name", "Neg", "Arith", "Compare", "InList", "Not", "BoolOp",
    "Answered", "HasCode", "Node", "ValueNode", "BoolNode", "names", "to_text", "rename",
]


@dataclass(frozen=True)
class Number:
    value: float
    col: int = field(default=0, compare=False)  # position in the rule text; not part of the meaning


@dataclass(frozen=True)
class String:
    value: str
    col: int = field(default=0, compare=False)  # position in the rule text; not part of the meaning


@dataclass(frozen=True)
class Name:
    name: str
    col: int = field(default=0, compare=False)  # position in the rule text; not part of the meaning


@dataclass(frozen=True)
class Neg:
    operand: "ValueNode"
    col: int = field(default=0, compare=False)  # position in the rule text; not part of the meaning


@dataclass(frozen=True)
class Arith:
    op: str  # one of + - * /
    left: "ValueNode"
    right: "ValueNode"
    col: int = field(default=0, compare=False)  # position in the rule text; not part of the meaning


@dataclass(frozen=True)
class Compare:
    op: str  # one of == != < <= > >=
    left: "ValueNode"
    right: "ValueNode"
    col: int = field(default=0, compare=False)  # position in the rule text; not part of the meaning


@dataclass(frozen=True)
class InList:
    operand: "ValueNode"
    options: tuple[float | str, ...]
    negated: bool = False
    col: int = field(default=0, compare=False)  # position in the rule text; not part of the meaning


@dataclass(frozen=True)
class Not:
    operand: "BoolNode"
    col: int = field(default=0, compare=False)  # position in the rule text; not part of the meaning


@dataclass(frozen=True)
class BoolOp:
    op: str  # "and" | "or"
    operands: tuple["BoolNode", ...]
    col: int = field(default=0, compare=False)  # position in the rule text; not part of the meaning


@dataclass(frozen=True)
class Answered:
    name: str
    col: int = field(default=0, compare=False)  # position in the rule text; not part of the meaning


@dataclass(frozen=True)
class HasCode:
    name: str
    reason: str
    col: int = field(default=0, compare=False)  # position in the rule text; not part of the meaning


ValueNode = Union[Number, String, Name, Neg, Arith]
BoolNode = Union[Compare, InList, Not, BoolOp, Answered, HasCode]
Node = Union[ValueNode, BoolNode]


def walk(node: Node) -> Iterator[Node]:
    """Every node of the tree, depth first."""
    yield node
    if isinstance(node, (Neg, Not)):
        yield from walk(node.operand)
    elif isinstance(node, InList):
        yield from walk(node.operand)
    elif isinstance(node, (Arith, Compare)):
        yield from walk(node.left)
        yield from walk(node.right)
    elif isinstance(node, BoolOp):
        for sub in node.operands:
            yield from walk(sub)


def names(node: Node) -> list[tuple[str, int]]:
    """Names the rule reads, with their columns, in order of appearance."""
    out: list[tuple[str, int]] = []
    for n in walk(node):
        if isinstance(n, (Name, Answered, HasCode)):
            out.append((n.name, n.col))
    return out


def _literal(v: float | str) -> str:
    if isinstance(v, str):
        return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
    return repr(int(v)) if float(v).is_integer() else repr(float(v))


_PREC = {"or": 1, "and": 2, "not": 3, "cmp": 4, "+": 5, "-": 5, "*": 6, "/": 6, "neg": 7, "atom": 8}


def to_text(node: Node) -> str:
    """Canonical text of a tree; parsing it gives back an equal tree (columns aside)."""
    return _text(node)[0]


def _text(node: Node) -> tuple[str, int]:
    if isinstance(node, Number):
        s = _literal(node.value)
        return (f"({s})" if s.startswith("-") else s), _PREC["atom"]
    if isinstance(node, String):
        return _literal(node.value), _PREC["atom"]
    if isinstance(node, Name):
        return node.name, _PREC["atom"]
    if isinstance(node, Answered):
        return f"answered({node.name})", _PREC["atom"]
    if isinstance(node, HasCode):
        return f"has_code({node.name}, {_literal(node.reason)})", _PREC["atom"]
    if isinstance(node, Neg):
        s, p = _text(node.operand)
        return "-" + (s if p >= _PREC["neg"] else f"({s})"), _PREC["neg"]
    if isinstance(node, Arith):
        p = _PREC[node.op]
        ls, lp = _text(node.left)
        rs, rp = _text(node.right)
        ls = ls if lp >= p else f"({ls})"
        rs = rs if rp > p else f"({rs})"  # left-associative
        return f"{ls} {node.op} {rs}", p
    if isinstance(node, Compare):
        ls, lp = _text(node.left)
        rs, rp = _text(node.right)
        ls = ls if lp > _PREC["cmp"] else f"({ls})"
        rs = rs if rp > _PREC["cmp"] else f"({rs})"
        return f"{ls} {node.op} {rs}", _PREC["cmp"]
    if isinstance(node, InList):
        s, p = _text(node.operand)
        s = s if p > _PREC["cmp"] else f"({s})"
        opts = ", ".join(_literal(o) for o in node.options)
        return f"{s} {'not in' if node.negated else 'in'} [{opts}]", _PREC["cmp"]
    if isinstance(node, Not):
        s, p = _text(node.operand)
        return "not " + (s if p >= _PREC["not"] else f"({s})"), _PREC["not"]
    if isinstance(node, BoolOp):
        p = _PREC[node.op]
        parts = []
        for sub in node.operands:
            s, sp = _text(sub)
            parts.append(s if sp > p else f"({s})")
        return f" {node.op} ".join(parts), p
    raise TypeError(f"not a rule node: {node!r}")


def rename(node: Node, mapping: dict[str, str]) -> Node:
    """A copy of the tree with names replaced (used to expand roster members)."""
    if isinstance(node, Name):
        return Name(mapping.get(node.name, node.name), node.col)
    if isinstance(node, Answered):
        return Answered(mapping.get(node.name, node.name), node.col)
    if isinstance(node, HasCode):
        return HasCode(mapping.get(node.name, node.name), node.reason, node.col)
    if isinstance(node, Neg):
        return Neg(rename(node.operand, mapping), node.col)
    if isinstance(node, Not):
        return Not(rename(node.operand, mapping), node.col)
    if isinstance(node, InList):
        return InList(rename(node.operand, mapping), node.options, node.negated, node.col)
    if isinstance(node, Arith):
        return Arith(node.op, rename(node.left, mapping), rename(node.right, mapping), node.col)
    if isinstance(node, Compare):
        return Compare(node.op, rename(node.left, mapping), rename(node.right, mapping), node.col)
    if isinstance(node, BoolOp):
        return BoolOp(node.op, tuple(rename(s, mapping) for s in node.operands), node.col)
    return node
