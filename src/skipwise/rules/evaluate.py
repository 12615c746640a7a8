"""Vectorized three-valued evaluation of routing rules over whole columns.

Every operand is a pair of arrays: its values and a *state* per case —
``KNOWN`` (a substantive answer or a context value), ``UNKNOWN`` (the item
was in universe but has no usable answer: nonresponse, break-off, invalid,
gate unknown) or ``ABSENT`` (the item was legitimately not asked).

- Arithmetic: ``ABSENT`` if any operand is absent, else ``UNKNOWN`` if any is
  unknown; division by zero gives ``UNKNOWN``.
- Comparisons (``== != < <= > >= in``, ``not in``): *false* when an operand is
  absent, *unknown* when it is unknown.  So ``x != 1`` is false for a skipped
  ``x`` while ``not x == 1`` is true.
- ``and`` / ``or`` / ``not`` follow Kleene's strong three-valued logic
  (Kleene 1952), encoded as ``FALSE=0 < UNK=1 < TRUE=2`` so that *and* is the
  minimum, *or* the maximum and *not* is ``2 - x``.
- ``answered(x)`` and ``has_code(x, "reason")`` are plain facts about the
  stored cell, never unknown.

No Python loop runs over cases; numpy does all the work.

References
----------
Kleene, S. C. (1952). *Introduction to Metamathematics*. North-Holland. §64.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Protocol

import numpy as np

from skipwise.rules import ast

__all__ = ["KNOWN", "UNKNOWN", "ABSENT", "FALSE", "UNK", "TRUE", "Operand", "Environment", "evaluate", "isin_small"]

KNOWN, UNKNOWN, ABSENT = 0, 1, 2
FALSE, UNK, TRUE = 0, 1, 2


@dataclass(frozen=True)
class Operand:
    """Values of one name for every case, with their three-valued state.

    ``values`` is float64 for numbers or an object array of ``str`` for text;
    ``state`` is an int8 array (or a scalar for constants).
    """

    values: np.ndarray
    state: np.ndarray | int

    @property
    def is_text(self) -> bool:
        return self.values.dtype == object


class Environment(Protocol):
    """What a rule may read: operands, and the two facts about stored cells."""

    n: int

    def operand(self, name: str) -> Operand: ...

    def answered(self, name: str) -> np.ndarray: ...

    def has_code(self, name: str, reason: str) -> np.ndarray: ...


def evaluate(node: ast.BoolNode, env: Environment) -> np.ndarray:
    """Truth of a rule for every case: an int8 array of ``FALSE``, ``UNK``, ``TRUE``."""
    out = _truth(node, env)
    if isinstance(out, np.ndarray) and out.shape == (env.n,) and out.dtype == np.int8:
        return out  # every node gives a new array, never one the environment holds
    return np.broadcast_to(np.asarray(out, dtype=np.int8), (env.n,)).copy()


def _truth(node: ast.Node, env: Environment) -> np.ndarray:
    if isinstance(node, ast.BoolOp):
        vals = [_truth(sub, env) for sub in node.operands]
        combine = np.minimum if node.op == "and" else np.maximum
        out = vals[0]
        for v in vals[1:]:
            # in place where the running value is an array of its own (every node gives a new one)
            out = combine(out, v, out=out) if isinstance(out, np.ndarray) and out.shape == np.shape(
                np.broadcast(out, v)) else combine(out, v)
        return out
    if isinstance(node, ast.Not):
        return (TRUE - _truth(node.operand, env)).astype(np.int8)
    if isinstance(node, ast.Answered):
        return _bool_truth(env.answered(node.name))
    if isinstance(node, ast.HasCode):
        return _bool_truth(env.has_code(node.name, node.reason))
    if isinstance(node, ast.Compare):
        left, right = _value(node.left, env), _value(node.right, env)
        return _from_state(_compare(node.op, left, right), _worse(left.state, right.state))
    if isinstance(node, ast.InList):
        opnd = _value(node.operand, env)
        hit = _isin(opnd, node.options)
        return _from_state(~hit if node.negated else hit, opnd.state)
    raise TypeError(f"not a condition: {node!r}")


def _bool_truth(flags: np.ndarray) -> np.ndarray:
    """TRUE where set, FALSE elsewhere (bool viewed as int8: 0/1, times 2)."""
    return np.ascontiguousarray(flags, dtype=bool).view(np.int8) * np.int8(TRUE)


def _worse(a: np.ndarray | int, b: np.ndarray | int) -> np.ndarray | int:
    """The state of a combination: the larger (KNOWN < UNKNOWN < ABSENT); a known constant changes nothing."""
    if np.ndim(b) == 0 and b == KNOWN:
        return a
    if np.ndim(a) == 0 and a == KNOWN:
        return b
    return np.maximum(a, b)


def _from_state(result: np.ndarray, state: np.ndarray | int) -> np.ndarray:
    """Known cases take the comparison; unknown ones UNK; absent ones FALSE."""
    result = np.asarray(result, dtype=bool)
    state = np.asarray(state)
    if state.ndim == 0:
        if state == KNOWN:
            return _bool_truth(result)
        return np.int8(UNK if state == UNKNOWN else FALSE)
    # With KNOWN=0, UNKNOWN=1, ABSENT=2: min(2 * hit + state, 2 - state) is 2 * hit when known,
    # 1 (UNK) when unknown and 0 (FALSE) when absent.  Arithmetic on int8, no masks.
    state = state.astype(np.int8, copy=False)
    if result.shape != state.shape:
        result, state = np.broadcast_arrays(result, state)
    truth = np.left_shift(np.ascontiguousarray(result).view(np.int8), 1)
    truth += state
    return np.minimum(truth, np.int8(TRUE) - state, out=truth)


def _value(node: ast.Node, env: Environment) -> Operand:
    if isinstance(node, ast.Number):
        return Operand(np.asarray(node.value, dtype=np.float64), KNOWN)
    if isinstance(node, ast.String):
        return Operand(np.asarray(node.value, dtype=object), KNOWN)
    if isinstance(node, ast.Name):
        return env.operand(node.name)
    if isinstance(node, ast.Neg):
        inner = _value(node.operand, env)
        return Operand(-_numeric(inner), inner.state)
    if isinstance(node, ast.Arith):
        left, right = _value(node.left, env), _value(node.right, env)
        a, b = _numeric(left), _numeric(right)
        state = np.maximum(left.state, right.state)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            if node.op == "+":
                vals = a + b
            elif node.op == "-":
                vals = a - b
            elif node.op == "*":
                vals = a * b
            else:
                vals = a / b
                zero = np.asarray(b == 0)
                if zero.any():
                    # x / 0 cannot be known; an absent operand stays absent.
                    state = np.where(zero & (state == KNOWN), UNKNOWN, state)
        return Operand(np.asarray(vals, dtype=np.float64), state)
    raise TypeError(f"not a value: {node!r}")


def _numeric(op: Operand) -> np.ndarray:
    if not op.is_text:
        return op.values
    # Text in arithmetic has no number: NaN, which then compares false.
    return np.full(np.shape(op.values), np.nan)


def _compare(op: str, left: Operand, right: Operand) -> np.ndarray:
    if left.is_text or right.is_text:
        if left.is_text != right.is_text:
            # Text never equals a number; no order between them.
            shape = np.broadcast_shapes(np.shape(left.values), np.shape(right.values))
            return np.full(shape, op == "!=")
        a, b = _text(left.values), _text(right.values)
    else:
        a, b = left.values, right.values
    with np.errstate(invalid="ignore"):
        if op == "==":
            return np.asarray(a == b)
        if op == "!=":
            return np.asarray(a != b)
        if op == "<":
            return np.asarray(a < b)
        if op == "<=":
            return np.asarray(a <= b)
        if op == ">":
            return np.asarray(a > b)
        return np.asarray(a >= b)


def _text(values: np.ndarray) -> np.ndarray:
    """Object array of str as a numpy unicode array (non-known cells hold '')."""
    return np.asarray(values, dtype=str)


def _isin(op: Operand, options: tuple[float | str, ...]) -> np.ndarray:
    if op.is_text:
        texts = [o for o in options if isinstance(o, str)]
        return np.isin(_text(op.values), np.asarray(texts, dtype=str)) if texts else np.zeros(np.shape(op.values), bool)
    nums = [o for o in options if not isinstance(o, str)]
    return isin_small(op.values, nums)


def isin_small(values: np.ndarray, options: list) -> np.ndarray:
    """``np.isin`` for a short list of options: ORed equalities are far faster than sorting."""
    if len(options) > 16:
        return np.isin(values, np.asarray(options))
    if not options:
        return np.zeros(np.shape(values), bool)
    out = np.asarray(values == options[0])
    if len(options) > 1:
        hit = np.empty(out.shape, bool)
        for o in options[1:]:
            out |= np.equal(values, o, out=hit)
    return out
