"""Weight diagnostics: Kish design effect, effective sample size, spread."""

from __future__ import annotations

import numpy as np

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError

__all__ = ["kish_deff", "effective_n", "weight_cv", "weight_summary", "SUMMARY_PERCENTILES"]

#: Percentiles shown for every weight stage.
SUMMARY_PERCENTILES: tuple[float, ...] = (1.0, 5.0, 25.0, 75.0, 95.0, 99.0)


def _positive(weights: object) -> np.ndarray:
    w = np.asarray(weights, dtype=float).ravel()
    if np.isnan(w).any() or (w < 0).any():
        raise SkipwiseError(Problem(code=ProblemCode.BAD_WEIGHTS, category=Category.DATA,
                                    message="weights must be non-negative numbers without missing values"))
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
