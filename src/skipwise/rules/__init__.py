"""The routing-rule language: tokenizer, parser, syntax tree and vectorized evaluation."""

from skipwise.rules import ast
from skipwise.rules.evaluate import ABSENT, FALSE, KNOWN, TRUE, UNK, UNKNOWN, Environment, Operand, evaluate
from skipwise.rules.parser import RuleSyntaxError, parse_rule, tokenize

__all__ = [
    "ast", "parse_rule", "tokenize", "RuleSyntaxError", "evaluate", "Operand", "Environment",
    "KNOWN", "UNKNOWN", "ABSENT", "FALSE", "UNK", "TRUE",
]
