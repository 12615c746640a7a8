"""Base (design) weights: inverse selection probabilities or a given weight column."""

from __future__ import annotations

import numpy as np
import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError, did_you_mean

__all__ = ["starting_weights", "base_weights"]


def _ids(data: pd.DataFrame, mask: np.ndarray, case_id: str | None, k: int = 5) -> list[object]:
    source = data[case_id] if case_id and case_id in data.columns else data.index.to_series()
    return [v.item() if hasattr(v, "item") else v for v in source[mask].iloc[:k]]


def _column(data: pd.DataFrame, column: str, what: str) -> np.ndarray:
    if column not in data.columns:
        raise SkipwiseError(Problem(code=ProblemCode.MISSING_COLUMN, category=Category.DATA, item=column,
                                    message=f"{what} column '{column}' is not in the data",
                                    hint=did_you_mean(column, map(str, data.columns))))
    return pd.to_numeric(data[column], errors="coerce").to_numpy(dtype=float)


def _check_positive(data: pd.DataFrame, values: np.ndarray, column: str, what: str,
                    case_id: str | None, upper: float | None = None) -> None:
    bad = ~np.isfinite(values) | (values <= 0)
    if upper is not None:
        bad |= values > upper
    if bad.any():
        rng = f"in (0, {upper:g}]" if upper is not None else "positive"
        raise SkipwiseError(Problem(
            code=ProblemCode.BAD_WEIGHTS, category=Category.DATA, item=column,
            message=f"{int(bad.sum())} case(s) have a missing, non-numeric or out-of-range {what} "
                    f"(must be {rng}); first case ids: {_ids(data, bad, case_id)}",
            hint=f"fix the {what} of these cases or leave them out of the frame"))


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
