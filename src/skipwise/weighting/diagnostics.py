"""Weight diagnostics: Kish design effect, effective sample size, spread."""

from __future__ import annotations

import numpy as np
import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError

__all__ = ["kish_deff", "effective_n", "weight_cv", "weight_summary", "SUMMARY_PERCENTILES"]

#: Percentiles shown for every weight stage.
SUMMARY_PERCENTILES: tuple[float, ...] = (1.0, 5.0, 25.0, 75.0, 95.0, 99.0)


def _first_non_number(weights: object) -> object:
    """The first value that is not a number (for the message), found without a loop over cases."""
    try:
        values = pd.Series(np.asarray(weights, dtype=object).ravel(), dtype=object)
    except (TypeError, ValueError):
        return weights
    bad = values.notna() & pd.to_numeric(values, errors="coerce").isna()
    return values[bad].iloc[0] if bad.any() else weights


def _positive(weights: object) -> np.ndarray:
    try:
        w = np.asarray(weights, dtype=float).ravel()
    except (TypeError, ValueError):  # text such as ['a'], or objects that are no numbers
        raise SkipwiseError(Problem(code=ProblemCode.BAD_WEIGHTS, category=Category.DATA,
                                    message="weights must be numbers; got values that are not "
                                            f"(e.g. {_first_non_number(weights)!r})",
                                    hint="convert the weight column to numbers first")) from None
    if np.isnan(w).any() or (w < 0).any() or np.isinf(w).any():
        raise SkipwiseError(Problem(code=ProblemCode.BAD_WEIGHTS, category=Category.DATA,
                                    message="weights must be finite, non-negative numbers without missing values"))
    w = w[w > 0]
    if w.size == 0:
        raise SkipwiseError(Problem(code=ProblemCode.BAD_WEIGHTS, category=Category.DATA,
                                    message="no positive weight"))
    return w


def kish_deff(weights: object) -> float:
    """Kish's design effect due to unequal weighting, ``n Σw² / (Σw)²``.

    Zero weights (non-respondents or ineligible cases in a full-file weight
    column) are left out.  Equals ``1 + CV²`` with the divisor-n variance.

    References
    ----------
    Kish, L. (1992). Weighting for unequal P_i. *Journal of Official Statistics*
    8(2), 183–200.

    Examples
    --------
    >>> kish_deff([1.5] * 40 + [4.0] * 10)
    1.25
    """
    w = _positive(weights)
    return float(w.size * np.sum(w * w) / np.sum(w) ** 2)


def effective_n(weights: object) -> float:
    """Kish's effective sample size ``(Σw)² / Σw²`` (positive weights only)."""
    w = _positive(weights)
    return float(np.sum(w) ** 2 / np.sum(w * w))


def weight_cv(weights: object) -> float:
    """Coefficient of variation of the positive weights (divisor-n standard deviation)."""
    w = _positive(weights)
    return float(np.std(w) / np.mean(w))


def weight_summary(weights: object) -> dict[str, float]:
    """Count, sum, min, percentiles, median, max, CV, Kish deff and effective n."""
    w = _positive(weights)
    out: dict[str, float] = {"n": float(w.size), "sum": float(w.sum()), "min": float(w.min())}
    pct = np.percentile(w, SUMMARY_PERCENTILES)
    for p, v in zip(SUMMARY_PERCENTILES, pct):
        if p == 75.0:
            out["median"] = float(np.median(w))
        out[f"p{p:g}"] = float(v)
    out["max"] = float(w.max())
    out["max/median"] = float(w.max() / np.median(w))
    out["cv"] = weight_cv(w)
    out["kish_deff"] = kish_deff(w)
    out["effective_n"] = effective_n(w)
    return out
