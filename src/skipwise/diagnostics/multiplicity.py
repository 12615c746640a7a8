"""Adjusting p-values for testing many items at once."""

from __future__ import annotations

import numpy as np
import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError

__all__ = ["ADJUSTMENTS", "adjust_pvalues"]

#: Accepted adjustment methods.
ADJUSTMENTS = ("holm", "bh", "none")


def adjust_pvalues(p: pd.Series, method: str = "holm") -> pd.Series:
    """Adjusted p-values over a family of tests (NaN entries are not in the family).

    Parameters
    ----------
    p
        Raw p-values, one per test.
    method
        ``"holm"``: Holm's step-down adjustment, which controls the family-wise
        error rate under any dependence between the tests; ``"bh"``: the
        Benjamini–Hochberg step-up adjustment, which controls the false
        discovery rate (independent or positively dependent tests);
        ``"none"``: the raw p-values.

    Returns
    -------
    pandas.Series
        Adjusted p-values, same index; an item is significant at level α when
        its adjusted p-value is below α.

    Notes
    -----
    With the m non-missing p-values sorted, p₍₁₎ ≤ … ≤ p₍ₘ₎: Holm gives
    p̃₍ᵢ₎ = maxⱼ≤ᵢ min(1, (m − j + 1) p₍ⱼ₎); Benjamini–Hochberg gives
    p̃₍ᵢ₎ = minⱼ≥ᵢ min(1, m p₍ⱼ₎ / j).

    References
    ----------
    Holm, S. (1979). A simple sequentially rejective multiple test procedure.
    *Scandinavian Journal of Statistics*, 6(2), 65–70.
    Benjamini, Y., & Hochberg, Y. (1995). Controlling the false discovery rate: a
    practical and powerful approach to multiple testing. *JRSS B*, 57(1), 289–300.
    """
    if method not in ADJUSTMENTS:
        raise SkipwiseError(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE, item=str(method),
                                    message="unknown p-value adjustment",
                                    hint="use one of: " + ", ".join(ADJUSTMENTS)))
    s = pd.Series(p, dtype=float)
    out = pd.Series(np.nan, index=s.index, dtype=float)
    ok = s.notna().to_numpy()
    v = s.to_numpy()[ok]
    m = len(v)
    if m == 0 or method == "none":
        out[ok] = v
        return out
    order = np.argsort(v, kind="stable")
    sv = v[order]
    rank = np.arange(1, m + 1)
    if method == "holm":
        adj = np.maximum.accumulate(np.minimum(1.0, (m - rank + 1) * sv))
    else:
        adj = np.minimum.accumulate(np.minimum(1.0, m * sv / rank)[::-1])[::-1]
    res = np.empty(m)
    res[order] = adj
    out[ok] = res
    return out
