"""Advice the command line gives after classifying (library code returns text, never prints)."""

from __future__ import annotations

import numpy as np

from skipwise.classify import statuses as S
from skipwise.classify.result import Classification

__all__ = ["INVALID_HINT_SHARE", "invalid_hint", "invalid_hint_of_counts"]

#: Share of all cells holding ``invalid`` above which classify suggests ``skipwise check``
#: (common practice, no source: a few stray values are data errors, more usually mean the
#: questionnaire's ranges, categories or codes do not match the file).
INVALID_HINT_SHARE = 0.01


def invalid_hint(cl: Classification, *, data: str = "DATA", questionnaire: str = "Q") -> str | None:
    """A one-paragraph hint when more than 1 % of all cells are ``invalid``, else None."""
    per_item = np.count_nonzero(cl.codes == cl.code(S.INVALID), axis=0)
    return _hint(per_item, list(cl.items), cl.codes.size, data, questionnaire)


def invalid_hint_of_counts(counts, *, data: str = "DATA", questionnaire: str = "Q") -> str | None:
    """:func:`invalid_hint` from status counts (items x statuses, as ``Classification.counts()``).

    The dask engine adds up its partitions' counts and calls this: the same text as for the whole file.
    """
    per_item = counts[S.INVALID].to_numpy() if S.INVALID in counts.columns else np.zeros(len(counts), np.int64)
    return _hint(per_item, [str(i) for i in counts.index], int(counts.to_numpy().sum()), data, questionnaire)


def _hint(per_item: np.ndarray, items: list[str], total: int, data: str, questionnaire: str) -> str | None:
    if total == 0:
        return None
    invalid = int(per_item.sum())
    if invalid <= INVALID_HINT_SHARE * total:
        return None
    worst = [items[j] for j in np.argsort(-per_item, kind="stable")[:3] if per_item[j]]
    return (f"{invalid:,} of {total:,} cells ({100 * invalid / total:.1f}%) are invalid: values that are "
            f"neither a declared code nor within the item's values or range (most in {', '.join(worst)}). "
            f"That often means the questionnaire does not match the file (a missing code, a range too "
            f"narrow, other category numbers). Run 'skipwise check {data} -q {questionnaire}': it lists "
            "each item's undeclared values, most frequent first.")
