"""Tokenizer and recursive-descent parser for routing rules (``asked_if``).

Grammar (lowest precedence first)::

    rule     := or
    or       := and ("or" and)*
    and      := not ("and" not)*
    not      := "not" not | compare
    compare  := sum [ CMP sum | "in" list | "not" "in" list ]
    sum      := product (("+" | "-") product)*
    product  := unary (("*" | "/") unary)*
    unary    := "-" unary | atom
    atom     := NUMBER | STRING | NAME | call | "(" or ")"
    call     := "answered" "(" NAME ")" | "has_code" "(" NAME "," STRING ")"
    list     := "[" literal ("," literal)* "]"      literal := ["-"] NUMBER | STRING

A rule must be a true/false expression: a bare name or number is not a rule.
Comparisons do not chain (``1 < x < 5`` is an error; write ``x > 1 and x < 5``).
Nothing is ever evaluated with Python's ``eval``.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from skipwise.errors import Problem, ProblemCode, SkipwiseError
from skipwise.rules import ast

__all__ = ["Token", "tokenize", "parse_rule", "RuleSyntaxError", "FUNCTIONS", "KEYWORDS"]

FUNCTIONS = ("answered", "has_code")
KEYWORDS = ("and", "or", "not", "in")
CMP_OPS = ("==", "!=", "<=", ">=", "<", ">")

_TOKEN_RE = re.compile(
    r"""
    (?P<ws>\s+)
  | (?P<number>(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)
  | (?P<string>"(?:[^"\\]|\\.)*"|'(?:[^'\\]|\\.)*')
  | (?P<name>[A-Za-z_][A-Za-z0-9_.]*)
  | (?P<op>==|!=|<=|>=|<|>|\+|-|\*|/|\(|\)|\[|\]|,)
    """,
    re.VERBOSE,
)


class RuleSyntaxError(SkipwiseError):
    """A rule that does not parse; ``col`` is the 1-based column in the rule text."""

    def __init__(self, message: str, col: int, text: str, hint: str | None = None):
        self.col = col
        self.text = text
        self.reason = message
        super().__init__(Problem(code=ProblemCode.RULE_SYNTAX, message=f"{message} in rule "
                                 f"{text!r} at column {col}", column=col, hint=hint))


@dataclass(frozen=True)
class Token:
    kind: str  # number | string | name | op | end
    text: str
    col: int  # 1-based


def tokenize(text: str) -> list[Token]:
    """Split rule text into tokens; raise :class:`RuleSyntaxError` on a stray character."""
    if not isinstance(text, str):
        raise RuleSyntaxError("a rule must be text", 1, str(text))
    tokens: list[Token] = []
    pos = 0
    while pos < len(text):
        m = _TOKEN_RE.match(text, pos)
        if m is None:
            ch = text[pos]
            if ch in "\"'":
                raise RuleSyntaxError("unterminated string", pos + 1, text, f"close it with {ch}")
            hint = "use == for equality" if ch == "=" else (
                "use 'and', 'or', 'not' for logic" if ch in "&|!" else None)
            raise RuleSyntaxError(f"unexpected character {ch!r}", pos + 1, text, hint)
        kind = m.lastgroup or ""
        if kind == "string" and m.group().count("\n"):
            raise RuleSyntaxError("a string may not span lines", pos + 1, text)
        if kind != "ws":
            tokens.append(Token(kind, m.group(), pos + 1))
        pos = m.end()
    # An unterminated string is not matched by the regex: report it clearly.
    tokens.append(Token("end", "", len(text) + 1))
    return tokens


def _unquote(tok: str) -> str:
    body = tok[1:-1]
    return re.sub(r"\\(.)", r"\1", body)


class _Parser:
    def __init__(self, text: str):
        self.text = text
        self.tokens = tokenize(text)
        self.i = 0

    # -- helpers -----------------------------------------------------------------------------
    @property
    def tok(self) -> Token:
        return self.tokens[self.i]

    def error(self, message: str, tok: Token | None = None, hint: str | None = None) -> RuleSyntaxError:
        tok = tok or self.tok
        return RuleSyntaxError(message, tok.col, self.text, hint)

    def describe(self, tok: Token) -> str:
        return "the end of the rule" if tok.kind == "end" else repr(tok.text)

    def is_op(self, *ops: str) -> bool:
        return self.tok.kind == "op" and self.tok.text in ops

    def is_kw(self, kw: str) -> bool:
        return self.tok.kind == "name" and self.tok.text == kw

    def expect_op(self, op: str) -> Token:
        if not self.is_op(op):
            raise self.error(f"expected '{op}' but found {self.describe(self.tok)}")
        tok = self.tok
        self.i += 1
        return tok

    # -- grammar -----------------------------------------------------------------------------
    def parse(self) -> ast.BoolNode:
        if self.tok.kind == "end":
            raise self.error("empty rule", hint="write a condition such as 'age >= 16'")
        node = self.or_()
        if self.tok.kind != "end":
            hint = "join conditions with 'and' or 'or'" if self.tok.kind in ("name", "number", "string") else None
            raise self.error(f"unexpected {self.describe(self.tok)}", hint=hint)
        return self.need_bool(node, self.tokens[0])

    def need_bool(self, node: ast.Node, tok: Token) -> ast.BoolNode:
        if isinstance(node, (ast.Compare, ast.InList, ast.Not, ast.BoolOp, ast.Answered, ast.HasCode)):
            return node
        raise RuleSyntaxError("expected a true/false condition, not a value", tok.col, self.text,
                              "compare it, e.g. 'x == 1', or use answered(x)")

    def need_value(self, node: ast.Node, tok: Token) -> ast.ValueNode:
        if isinstance(node, (ast.Number, ast.String, ast.Name, ast.Neg, ast.Arith)):
            return node
        raise RuleSyntaxError("expected a value, not a condition", tok.col, self.text)

    def or_(self) -> ast.Node:
        start = self.tok
        parts = [self.and_()]
        while self.is_kw("or"):
            self.i += 1
            tok = self.tok
            parts.append(self.need_bool(self.and_(), tok))
        if len(parts) == 1:
            return parts[0]
        parts[0] = self.need_bool(parts[0], start)
        return ast.BoolOp("or", tuple(parts), start.col)  # type: ignore[arg-type]

    def and_(self) -> ast.Node:
        start = self.tok
        parts = [self.not_()]
        while self.is_kw("and"):
            self.i += 1
            tok = self.tok
            parts.append(self.need_bool(self.not_(), tok))
        if len(parts) == 1:
            return parts[0]
        parts[0] = self.need_bool(parts[0], start)
        return ast.BoolOp("and", tuple(parts), start.col)  # type: ignore[arg-type]

    def not_(self) -> ast.Node:
        if self.is_kw("not"):
            tok = self.tok
            self.i += 1
            inner_tok = self.tok
            return ast.Not(self.need_bool(self.not_(), inner_tok), tok.col)
        return self.compare()

    def compare(self) -> ast.Node:
        start = self.tok
        left = self.sum_()
        if self.tok.kind == "op" and self.tok.text in CMP_OPS:
            op = self.tok.text
            self.i += 1
            right_tok = self.tok
            right = self.sum_()
            node = ast.Compare(op, self.need_value(left, start), self.need_value(right, right_tok), start.col)
            if self.tok.kind == "op" and self.tok.text in CMP_OPS:
                raise self.error("comparisons cannot be chained", hint="write 'x > 1 and x < 5'")
            return node
        negated = False
        if self.is_kw("not") and self.tokens[self.i + 1].kind == "name" and self.tokens[self.i + 1].text == "in":
            negated = True
            self.i += 1
        if self.is_kw("in"):
            self.i += 1
            options = self.literal_list()
            return ast.InList(self.need_value(left, start), options, negated, start.col)
        if negated:  # pragma: no cover - guarded above
            raise self.error("expected 'in' after 'not'")
        return left

    def literal_list(self) -> tuple[float | str, ...]:
        self.expect_op("[")
        options: list[float | str] = []
        if self.is_op("]"):
            raise self.error("an 'in' list needs at least one value")
        while True:
            sign = 1.0
            if self.is_op("-"):
                sign = -1.0
                self.i += 1
            tok = self.tok
            if tok.kind == "number":
                options.append(sign * float(tok.text))
            elif tok.kind == "string" and sign > 0:
                options.append(_unquote(tok.text))
            else:
                raise self.error(f"expected a number or a quoted string in the list, found {self.describe(tok)}")
            self.i += 1
            if self.is_op(","):
                self.i += 1
                continue
            if self.is_op("]"):
                self.i += 1
                return tuple(options)
            raise self.error(f"expected ',' or ']' but found {self.describe(self.tok)}")

    def sum_(self) -> ast.Node:
        start = self.tok
        node = self.product()
        while self.is_op("+", "-"):
            op = self.tok.text
            self.i += 1
            tok = self.tok
            node = ast.Arith(op, self.need_value(node, start), self.need_value(self.product(), tok), start.col)
        return node

    def product(self) -> ast.Node:
        start = self.tok
        node = self.unary()
        while self.is_op("*", "/"):
            op = self.tok.text
            self.i += 1
            tok = self.tok
            node = ast.Arith(op, self.need_value(node, start), self.need_value(self.unary(), tok), start.col)
        return node

    def unary(self) -> ast.Node:
        if self.is_op("-"):
            tok = self.tok
            self.i += 1
            inner = self.tok
            operand = self.need_value(self.unary(), inner)
            if isinstance(operand, ast.Number):
                return ast.Number(-operand.value, tok.col)
            return ast.Neg(operand, tok.col)
        return self.atom()

    def atom(self) -> ast.Node:
        tok = self.tok
        if tok.kind == "number":
            self.i += 1
            return ast.Number(float(tok.text), tok.col)
        if tok.kind == "string":
            self.i += 1
            return ast.String(_unquote(tok.text), tok.col)
        if tok.kind == "name":
            if tok.text in KEYWORDS:
                raise self.error(f"unexpected keyword '{tok.text}'")
            self.i += 1
            if self.is_op("("):
                return self.call(tok)
            if tok.text in FUNCTIONS:
                raise self.error(f"'{tok.text}' is a function: write {tok.text}(name)", tok)
            return ast.Name(tok.text, tok.col)
        if self.is_op("("):
            self.i += 1
            node = self.or_()
            self.expect_op(")")
            return node
        if tok.kind == "end":
            raise self.error("the rule ends too early")
        raise self.error(f"unexpected {self.describe(tok)}")

    def call(self, fn: Token) -> ast.Node:
        if fn.text not in FUNCTIONS:
            from skipwise.errors import did_you_mean
            raise self.error(f"unknown function '{fn.text}'", fn,
                             did_you_mean(fn.text, FUNCTIONS) or "the functions are answered(x) and has_code(x, \"reason\")")
        self.expect_op("(")
        arg = self.tok
        if arg.kind != "name" or arg.text in KEYWORDS:
            raise self.error(f"{fn.text}() takes an item name, found {self.describe(arg)}")
        self.i += 1
        if fn.text == "answered":
            self.expect_op(")")
            return ast.Answered(arg.text, fn.col)
        self.expect_op(",")
        reason = self.tok
        if reason.kind != "string":
            raise self.error(f"has_code() takes a quoted reason, found {self.describe(reason)}",
                             hint='e.g. has_code(x, "refused")')
        self.i += 1
        self.expect_op(")")
        return ast.HasCode(arg.text, _unquote(reason.text), fn.col)


def parse_rule(text: str) -> ast.BoolNode:
    """Parse rule text into a syntax tree.

    Raises
    ------
    RuleSyntaxError
        With the 1-based column of the fault (a :class:`~skipwise.errors.SkipwiseError`).

    Examples
    --------
    >>> from skipwise.rules.ast import to_text
    >>> to_text(parse_rule("age>=16 and not employed in [2,3]"))
    'age >= 16 and not employed in [2, 3]'
    """
    # Deeply nested input must fail as a rule error, not as Python's recursion limit.
    if text.count("(") > 200:
        raise RuleSyntaxError("the rule nests too deeply", 1, text)
    try:
        return _Parser(text).parse()
    except RecursionError:
        raise RuleSyntaxError("the rule nests too deeply", 1, text) from None
