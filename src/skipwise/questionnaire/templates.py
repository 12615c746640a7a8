"""Column templates: a tiny language of our own for naming expanded columns.

A roster's ``column`` (default ``{item}_{n}``) and a check-all-that-apply
set's ``column`` (default ``{item}_{option}``) are *templates*: text in which
the placeholders ``{item}``, ``{n}`` and ``{option}`` are replaced by the
item's name, the member number and the option's key, as plain text.  Nothing
else is interpreted: no attribute access, indexing, conversion or format
specification (Python's ``str.format`` is never applied to a file's text),
and a brace outside a placeholder is refused, so a template can neither reach
into the program nor blow up the length of a name.
"""

from __future__ import annotations

import re

__all__ = ["PLACEHOLDER", "template_problem", "expand"]

#: A placeholder: a brace, a lower-case name, a brace.
PLACEHOLDER = re.compile(r"\{([a-z]+)\}")


def template_problem(pattern: object, allowed: tuple[str, ...], required: tuple[str, ...] = ()) -> str | None:
    """Why ``pattern`` is not a valid column template, or None if it is.

    Parameters
    ----------
    pattern
        The template as read from the file.
    allowed
        The placeholder names this template may use (e.g. ``("item", "n")``).
    required
        The placeholder names it must use (so that every expanded column differs).
    """
    shown = ", ".join("{" + a + "}" for a in allowed)
    if not isinstance(pattern, str):
        return f"must be a text holding placeholders {shown}"
    found = PLACEHOLDER.findall(pattern)
    unknown = [f for f in found if f not in allowed]
    if unknown:
        return f"the placeholder {{{unknown[0]}}} is not known (the placeholders are {shown})"
    rest = PLACEHOLDER.sub("", pattern)
    if "{" in rest or "}" in rest:
        bad = _first_brace_group(pattern)
        return f"'{bad}' is not a placeholder (only {shown} are replaced, as plain text)"
    missing = [r for r in required if r not in found]
    if missing:
        return f"must contain {', '.join('{' + r + '}' for r in missing)} (the placeholders are {shown})"
    return None


def expand(pattern: str, **values: object) -> str:
    """``pattern`` with each known placeholder replaced by its value as text.

    Placeholders not given in ``values`` (and stray braces) are kept as written; call
    :func:`template_problem` first to refuse them.
    """
    return PLACEHOLDER.sub(lambda m: str(values[m.group(1)]) if m.group(1) in values else m.group(0), pattern)


def _first_brace_group(pattern: str) -> str:
    for m in re.finditer(r"\{[^{}]*\}?|\}", pattern):
        if not PLACEHOLDER.fullmatch(m.group(0)):
            return m.group(0)[:40]
    return pattern[:40]
