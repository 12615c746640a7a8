"""One guard for every column name skipwise generates.

Status columns, imputation flags, the imputation number, weight and replicate
columns are added beside the data's own columns.  A generated name that equals
one of the data's names would silently replace respondents' answers (an
imputation column called ``age`` overwrites every age), and two generated
names that are equal would overwrite each other.  :func:`check_generated`
compares a list of (name, role) pairs with the existing names and with each
other *before anything is written*, and reports every clash at once, each with
its role, so the user knows which setting to change.

Names are compared as text, as the written file stores them (a data column
``1`` read from Excel and a generated ``"1"`` are the same name).  With
``fold_case`` they are also compared ignoring case, as SPSS does for variable
names.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Iterable

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError

__all__ = ["Generated", "check_generated", "generated_problems"]


@dataclass(frozen=True, kw_only=True)
class Generated:
    """A column name the program will add, what it is, and where its name was set."""

    name: str
    role: str                   # e.g. "imputation column", "status column of 'age'"
    file: str | None = None     # the definition file that set the name (plan, questionnaire)
    line: int | None = None
    hint: str | None = None     # how to choose another name


def _as_generated(entry: Generated | tuple) -> Generated:
    if isinstance(entry, Generated):
        return entry
    name, role, *rest = entry
    return Generated(name=name, role=role, **(rest[0] if rest else {}))


def generated_problems(names: Iterable[Generated | tuple], existing: Iterable[object], *,
                       what: str = "the data", fold_case: bool = False) -> list[Problem]:
    """Every clash of ``names`` with ``existing`` and with each other, as problems.

    Parameters
    ----------
    names
        :class:`Generated` records, or ``(name, role)`` / ``(name, role, {"file": ..., "line": ...,
        "hint": ...})`` tuples.
    existing
        The names already in the frame the columns are added to.
    what
        How the existing names are spoken of in messages ("the data", "the weighting file").
    fold_case
        Also treat names equal ignoring case as the same (SPSS variable names).
    """
    def key(name: object) -> str:
        text = str(name)
        return text.casefold() if fold_case else text

    have = {key(c): str(c) for c in existing}
    seen: dict[str, Generated] = {}
    problems: list[Problem] = []
    for entry in map(_as_generated, names):
        where = {"file": entry.file, "line": entry.line}
        if not isinstance(entry.name, str) or not entry.name.strip():
            problems.append(Problem(code=ProblemCode.BAD_VALUE, message=f"the {entry.role} would have an empty name",
                                    hint=entry.hint, **where))
            continue
        k = key(entry.name)
        if k in have:
            same = "" if have[k] == entry.name else f" ('{have[k]}', the same name ignoring case)"
            problems.append(Problem(
                code=ProblemCode.DUPLICATE_NAME, item=entry.name, category=Category.DEFINITION if entry.file
                else Category.DATA, hint=entry.hint or "rename the column in the data, or choose another name",
                message=f"'{entry.name}' (the {entry.role}) would replace {what}'s own column{same}", **where))
        elif k in seen:
            first = seen[k]
            problems.append(Problem(
                code=ProblemCode.DUPLICATE_NAME, item=entry.name, hint=entry.hint or first.hint,
                message=f"'{entry.name}' would name both the {first.role} and the {entry.role}", **where))
        else:
            seen[k] = entry
    return problems


def check_generated(names: Iterable[Generated | tuple], existing: Iterable[object], *,
                    what: str = "the data", fold_case: bool = False) -> None:
    """Raise one :class:`SkipwiseError` listing every clash found by :func:`generated_problems`.

    Call it before anything is written: nothing is half-done when it raises.
    """
    problems = generated_problems(names, existing, what=what, fold_case=fold_case)
    if problems:
        raise SkipwiseError(problems, headline=f"{len(problems)} generated column name(s) clash "
                            "(nothing was written)")
