"""Advice the command line gives after classifying (library code returns text, never prints)."""

from __future__ import annotations

import numpy as np

from skipwise.classify import statuses as S
from skipwise.classify.result import Classification

__all__ = ["INVALID_HINT_SHARE", "invalid_hint"]

#: Share of all cells holding ``invalid`` above which classify suggests ``skipwise check``
#: (common practice, no source: a few stray values are data errors, more usually mean the
#: questionnaire's ranges, categories or codes do not match the file).
INVALID_HINT_SHARE = 0.01


def invalid_hint(cl: Classification, *, data: str = "DATA", questionnaire: str = "Q") -> str | None:
    """A one-paragraph hint when more than 1 % of all cells are ``invalid``, else None."""
    total = cl.codes.size
    if total == 0:
        return None
    invalid = int(np.count_nonzero(cl.codes == cl.code(S.INVALID)))
    if invalid <= INVALID_HINT_SHARE * total:
        return None
    per_item = np.count_nonzero(cl.codes == cl.code(S.INVALID), axis=0)
    worst = [cl.items[j] for j in np.argsort(-per_item, kind="stable")[:3] if per_item[j]]
    return (f"{invalid:,} of {total:,} cells ({100 * invalid / total:.1f}%) are invalid: values that are "
            f"neither a declared code nor within the item's values or range (most in {', '.join(worst)}). "
            f"That often means the questionnaire does not match the file (a missing code, a range too "
            f"narrow, other category numbers). Run 'skipwise check {data} -q {questionnaire}': it lists "
            "each item's undeclared values, most frequent first.")
