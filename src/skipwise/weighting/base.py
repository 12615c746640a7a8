"""Base (design) weights: inverse selection probabilities or a given weight column."""

from __future__ import annotations

import numpy as np
import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError, did_you_mean

__all__ = ["starting_weights", "base_weights", "bad_weight_mask", "bad_weights_problem", "base_source",
           "base_values"]


def _ids(data: pd.DataFrame, mask: np.ndarray, case_id: str | None, k: int = 5) -> list[object]:
    source = data[case_id] if case_id and case_id in data.columns else data.index.to_series()
    return [v.item() if hasattr(v, "item") else v for v in source[mask].iloc[:k]]


def _column(data: pd.DataFrame, column: str, what: str) -> np.ndarray:
    if column not in data.columns:
        raise SkipwiseError(Problem(code=ProblemCode.MISSING_COLUMN, category=Category.DATA, item=column,
                                    message=f"{what} column '{column}' is not in the data",
                                    hint=did_you_mean(column, map(str, data.columns))))
    return pd.to_numeric(data[column], errors="coerce").to_numpy(dtype=float)


def bad_weight_mask(values: np.ndarray, upper: float | None = None) -> np.ndarray:
    """Row-local: cases whose weight (or probability) is missing, not positive or above ``upper``."""
    bad = ~np.isfinite(values) | (values <= 0)
    if upper is not None:
        bad |= values > upper
    return bad


def bad_weights_problem(n_bad: int, ids: list[object], column: str, what: str, upper: float | None) -> Problem:
    """The problem record of ``n_bad`` bad weights (``ids``: the first case ids)."""
    rng = f"in (0, {upper:g}]" if upper is not None else "positive"
    return Problem(code=ProblemCode.BAD_WEIGHTS, category=Category.DATA, item=column,
                   message=f"{n_bad} case(s) have a missing, non-numeric or out-of-range {what} "
                           f"(must be {rng}); first case ids: {ids}",
                   hint=f"fix the {what} of these cases or leave them out of the frame")


def _check_positive(data: pd.DataFrame, values: np.ndarray, column: str, what: str,
                    case_id: str | None, upper: float | None = None) -> None:
    bad = bad_weight_mask(values, upper)
    if bad.any():
        raise SkipwiseError(bad_weights_problem(int(bad.sum()), _ids(data, bad, case_id), column, what, upper))


def base_source(probability: str | None, weight: str | None) -> tuple[str | None, str, float | None]:
    """The column base weights come from, what it holds (for messages) and its upper bound."""
    if probability is not None and weight is not None:
        raise SkipwiseError(Problem(code=ProblemCode.BAD_VALUE, item="base",
                                    message="give either a selection-probability column or a weight column, not both"))
    if probability is not None:
        return probability, "selection probability", 1.0
    return weight, "weight", None


def base_values(data: pd.DataFrame, column: str | None, what: str, *, probability: bool) -> np.ndarray:
    """Row-local, unchecked base weights: ``1/π``, the weight column, or ones (no column)."""
    if column is None:
        return np.ones(len(data))
    v = _column(data, column, what)
    if not probability:
        return v
    with np.errstate(divide="ignore", invalid="ignore"):
        return 1.0 / v


def starting_weights(data: pd.DataFrame, weight: str | None, *, case_id: str | None = None) -> np.ndarray:
    """Starting weights as a float array: the named column (checked positive) or all ones."""
    if weight is None:
        return np.ones(len(data))
    values = _column(data, weight, "weight")
    _check_positive(data, values, weight, "weight", case_id)
    return values


def base_weights(data: pd.DataFrame, *, probability: str | None = None, weight: str | None = None,
                 case_id: str | None = None) -> np.ndarray:
    """Base weights ``1/π`` from a selection-probability column, or a given weight column.

    Exactly one of ``probability`` and ``weight`` may be given; with neither,
    every case gets weight 1.

    Raises
    ------
    SkipwiseError
        ``missing-column`` or ``bad-weights`` (missing, zero, negative weights,
        probabilities outside (0, 1]) naming the count and the first case ids.

    References
    ----------
    Horvitz, D. G. & Thompson, D. J. (1952). A generalization of sampling without
    replacement from a finite universe. *JASA* 47(260), 663–685.
    """
    if probability is not None and weight is not None:
        raise SkipwiseError(Problem(code=ProblemCode.BAD_VALUE, item="base",
                                    message="give either a selection-probability column or a weight column, not both"))
    if probability is not None:
        p = _column(data, probability, "selection probability")
        _check_positive(data, p, probability, "selection probability", case_id, upper=1.0)
        return 1.0 / p
    return starting_weights(data, weight, case_id=case_id)
