"""Problems as data, and the one exception type a user ever sees.

Every user error in skipwise is a :class:`Problem`: a stable code, a category
(is the *definition* wrong — questionnaire or plan file — or the *data*?), a
location (file, line, column, item, case id), a message and a hint on how to
fix it.  Code collects all problems it can find and raises a single
:class:`SkipwiseError` carrying the whole list; the command line prints it
without a traceback and exits with status 1.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from enum import Enum
from typing import Iterable, Sequence

__all__ = ["Category", "ProblemCode", "Problem", "SkipwiseError", "nearest_name", "MAX_SHOWN"]

#: How many problems a rendered message lists before saying "and N more".
MAX_SHOWN = 50


class Category(str, Enum):
    """Whether a problem lies in a definition file or in the data."""

    DEFINITION = "definition"
    DATA = "data"
    USAGE = "usage"


class ProblemCode(str, Enum):
    """Stable identifiers of every kind of user error (used by tests and reports)."""

    # files
    FILE_NOT_FOUND = "file-not-found"
    FILE_UNREADABLE = "file-unreadable"
    FILE_FORMAT = "file-format"
    OUTPUT_EXISTS = "output-exists"
    OUTPUT_IS_INPUT = "output-is-input"
    # definition files (questionnaire, plans)
    YAML_SYNTAX = "yaml-syntax"
    FORMAT_VERSION = "format-version"
    UNKNOWN_KEY = "unknown-key"
    MISSING_KEY = "missing-key"
    BAD_VALUE = "bad-value"
    DUPLICATE_NAME = "duplicate-name"
    UNKNOWN_NAME = "unknown-name"
    FORWARD_REFERENCE = "forward-reference"
    CODE_COLLISION = "code-collision"
    RULE_SYNTAX = "rule-syntax"
    TYPE_CLASH = "type-clash"
    # data
    MISSING_COLUMN = "missing-column"
    UNDECLARED_COLUMN = "undeclared-column"
    UNDECLARED_VALUE = "undeclared-value"
    UNUSED_CODE = "unused-code"
    DUPLICATE_CASE_ID = "duplicate-case-id"
    BAD_DATA = "bad-data"
    # methods
    INFEASIBLE = "infeasible"
    NOT_CONVERGED = "not-converged"
    BAD_WEIGHTS = "bad-weights"
    SINGULAR = "singular"
    # the operating system and the publisher
    OS_ERROR = "os-error"
    OUT_OF_MEMORY = "out-of-memory"
    OUTPUT_LOCKED = "output-locked"
    # stable reason numbers (docs/statuses.md)
    UNNUMBERED_REASON = "unnumbered-reason"
    NO_STATA_LETTER = "no-stata-letter"


@dataclass(frozen=True, kw_only=True)
class Problem:
    """One thing that is wrong, where it is, and how to fix it."""

    code: ProblemCode
    message: str
    category: Category = Category.DEFINITION
    file: str | None = None
    line: int | None = None
    column: int | None = None
    item: str | None = None
    case_id: object | None = None
    hint: str | None = None

    def where(self) -> str:
        """Location as ``file:line:column`` followed by item and case, as far as known."""
        parts: list[str] = []
        if self.file:
            loc = str(self.file)
            if self.line is not None:
                loc += f":{self.line}"
                if self.column is not None:
                    loc += f":{self.column}"
            parts.append(loc)
        elif self.line is not None:
            parts.append(f"line {self.line}")
        if self.item:
            parts.append(f"item '{self.item}'")
        if self.case_id is not None:
            parts.append(f"case {self.case_id!r}")
        return ", ".join(parts)

    def render(self) -> str:
        """One readable line: location, message, hint."""
        where = self.where()
        text = f"{where}: {self.message}" if where else self.message
        if self.hint:
            text += f" — {self.hint}"
        return text

    def to_row(self) -> dict[str, object]:
        """A flat record, for tables, spreadsheets and tests."""
        return {
            "code": self.code.value,
            "category": self.category.value,
            "file": self.file,
            "line": self.line,
            "column": self.column,
            "item": self.item,
            "case_id": self.case_id,
            "message": self.message,
            "hint": self.hint,
        }


class SkipwiseError(Exception):
    """The single exception type for user errors; carries every problem found.

    Parameters
    ----------
    problems
        One or more :class:`Problem` records, or a plain message string (which
        becomes one problem of code ``bad-value``).
    """

    def __init__(self, problems: Problem | str | Iterable[Problem], *, headline: str | None = None):
        if isinstance(problems, str):
            problems = [Problem(code=ProblemCode.BAD_VALUE, message=problems, category=Category.USAGE)]
        elif isinstance(problems, Problem):
            problems = [problems]
        self.problems: list[Problem] = list(problems)
        self.headline = headline
        super().__init__(self.render())

    @property
    def codes(self) -> list[ProblemCode]:
        return [p.code for p in self.problems]

    def render(self, max_shown: int = MAX_SHOWN) -> str:
        lines = [p.render() for p in self.problems[:max_shown]]
        extra = len(self.problems) - max_shown
        if extra > 0:
            lines.append(f"... and {extra:,} more")
        if len(self.problems) > 1 or self.headline:
            head = self.headline or f"{len(self.problems)} problems found"
            return head + ":\n" + "\n".join("  " + ln for ln in lines)
        return lines[0] if lines else (self.headline or "unknown problem")

    def to_rows(self, fields: Sequence[str] | None = None) -> list[dict[str, object]] | list[tuple]:
        rows = [p.to_row() for p in self.problems]
        if fields is None:
            return rows
        return [tuple(r[f] for f in fields) for r in rows]


def nearest_name(name: str, candidates: Iterable[str]) -> str | None:
    """The candidate most like ``name`` (for "did you mean ...?" hints), or None."""
    import difflib

    found = difflib.get_close_matches(str(name), [str(c) for c in candidates], n=1, cutoff=0.6)
    return found[0] if found else None


def did_you_mean(name: str, candidates: Iterable[str]) -> str | None:
    """A hint sentence naming the nearest valid name, or None if nothing is close."""
    near = nearest_name(name, candidates)
    return f"did you mean '{near}'?" if near else None


@dataclass
class ProblemList:
    """Collects problems while a file is checked; raise them all at the end."""

    file: str | None = None
    problems: list[Problem] = field(default_factory=list)

    def add(self, code: ProblemCode, message: str, **where: object) -> None:
        where.setdefault("file", self.file)
        self.problems.append(Problem(code=code, message=message, **where))  # type: ignore[arg-type]

    def extend(self, problems: Iterable[Problem]) -> None:
        self.problems.extend(problems)

    def __bool__(self) -> bool:
        return bool(self.problems)

    def __len__(self) -> int:
        return len(self.problems)

    def raise_if_any(self, headline: str | None = None) -> None:
        if self.problems:
            ordered = sorted(self.problems, key=lambda p: (p.line is None, p.line or 0, p.column or 0))
            raise SkipwiseError(ordered, headline=headline)
