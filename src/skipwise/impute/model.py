"""Model-based single imputation: regression with residual draws, predictive mean
matching, logistic and multinomial logistic models.

References
----------
Little, R. J. A. (1988). Missing-data adjustments in large surveys. *Journal of Business
& Economic Statistics* 6(3), 287–296.
Morris, T. P., White, I. R. and Royston, P. (2014). Tuning multiple imputation by
predictive mean matching and local residual draws. *BMC Medical Research Methodology* 14, 75.
Rubin, D. B. (1987). *Multiple Imputation for Nonresponse in Surveys*. Wiley.
"""

from __future__ import annotations

from typing import Collection, Literal, Mapping, Sequence

import numpy as np
import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError, did_you_mean
from skipwise.impute.draws import METHODS, draw_values
from skipwise.impute.hotdeck import make_rng
from skipwise.impute.result import MNAR_CAUTION, ImputationResult, check_columns

__all__ = ["model_impute", "design_matrix", "put_values", "check_method"]


def check_method(method: str, item: str | None = None, allowed: Sequence[str] = METHODS) -> Problem | None:
    """A problem record if ``method`` is not one of ``allowed``."""
    if method in allowed:
        return None
    return Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE, item=item,
                   message=f"unknown imputation method '{method}'",
                   hint=did_you_mean(method, allowed) or f"use one of {', '.join(allowed)}")


def design_matrix(frame: pd.DataFrame, columns: Sequence[str],
                  categorical: Collection[str] = ()) -> tuple[np.ndarray, int]:
    """Predictor matrix without constant: numeric columns as they are, categorical
    columns as 0/1 indicators (first category left out). Missing numeric values
    are set to the column mean; constant columns are dropped.

    Returns (matrix, number of cells that were set to a mean).
    """
    parts: list[np.ndarray] = []
    n_filled = 0
    for col in columns:
        if col in categorical:
            codes, _ = pd.factorize(frame[col], sort=True, use_na_sentinel=False)
            if codes.max(initial=0) >= 1:
                parts.append((codes[:, None] == np.arange(1, codes.max() + 1)[None, :]).astype(float))
            continue
        x = frame[col].astype("float64").to_numpy(copy=True)
        bad = np.isnan(x)
        if bad.any():
            n_filled += int(bad.sum())
            x[bad] = np.nanmean(x) if (~bad).any() else 0.0
        parts.append(x[:, None])
    if not parts:
        return np.empty((len(frame), 0)), n_filled
    mat = np.hstack(parts)
    keep = np.ptp(mat, axis=0) > 0 if mat.shape[0] else np.zeros(mat.shape[1], bool)
    return mat[:, keep], n_filled


def put_values(out: pd.DataFrame, item: str, rows: np.ndarray, values: np.ndarray) -> None:
    """Write ``values`` into ``out[item]`` at row positions ``rows`` (in place on ``out``,
    a frame the caller owns); an integer column receiving fractions becomes float."""
    col = out[item]
    if (pd.api.types.is_integer_dtype(col) and np.asarray(values).dtype.kind == "f"
            and not np.all(np.mod(values, 1) == 0)):
        out[item] = col.astype("float64")
    out.iloc[rows, out.columns.get_loc(item)] = values


def model_impute(data: pd.DataFrame, items: Sequence[str], *, predictors: Sequence[str],
                 method: str = "pmm", methods: Mapping[str, str] | None = None,
                 categorical: Collection[str] = (), k: int = 5,
                 residuals: Literal["normal", "observed"] = "normal", proper: bool = False,
                 seed: int | np.random.Generator | None = None) -> ImputationResult:
    """Fill each item from a model on ``predictors`` fitted to its observed cases.

    Parameters
    ----------
    data
        Survey frame, missing = NaN / NA.
    items
        Items to fill, in order (an item never predicts itself; filled items do
        not feed later models — use :func:`skipwise.impute.chained.chained_impute` for that).
    predictors
        Predictor columns; missing predictor values are set to the mean (and noted).
    method, methods
        Default method and per-item overrides: ``regression`` (linear model plus a
        residual draw), ``pmm`` (predictive mean matching, k donors), ``logistic``
        (binary), ``multinomial`` (categorical). A model that cannot be fitted
        falls back to PMM, then to a random observed value, with a note.
    categorical
        Predictors to enter as indicator columns.
    k
        Donor pool size of PMM (default 5; Morris et al. 2014).
    residuals
        ``normal``: N(0, σ̂²) residuals; ``observed``: resampled observed residuals.
    proper
        Draw the model parameters from their posterior first (for multiple imputation).
    seed
        Seed or numpy Generator.

    Returns
    -------
    ImputationResult

    References
    ----------
    Little, R. J. A. (1988). Missing-data adjustments in large surveys. *JBES* 6(3), 287–296.
    Morris, T. P., White, I. R. and Royston, P. (2014). *BMC Med. Res. Methodol.* 14, 75.
    """
    rng = make_rng(seed)
    items, predictors = list(items), list(predictors)
    methods = dict(methods or {})
    check_columns(data, items)
    check_columns(data, predictors, role="predictor")
    problems = [p for p in (check_method(methods.get(i, method), i) for i in items) if p]
    problems += [Problem(code=ProblemCode.UNKNOWN_NAME, category=Category.USAGE, item=i,
                         message=f"method given for '{i}', which is not an imputed item")
                 for i in methods if i not in items]
    for item in items:
        if methods.get(item, method) == "regression":
            check_columns(data, [item], numeric=True)
    if problems:
        raise SkipwiseError(problems)
    out = data.copy()
    imputed = data.loc[:, items].isna()
    notes: list[str] = []
    unfilled: dict[str, int] = {}
    for item in items:
        how = methods.get(item, method)
        miss = imputed[item].to_numpy()
        unfilled[item] = 0
        if not miss.any():
            continue
        if miss.all():
            unfilled[item] = int(miss.sum())
            imputed[item] = False
            notes.append(f"{item}: no observed value, nothing imputed")
            continue
        x, n_filled = design_matrix(data, [p for p in predictors if p != item], categorical)
        if n_filled:
            notes.append(f"{item}: {n_filled:,} missing predictor value(s) set to the mean")
        y = data[item].to_numpy()
        y_obs = y[~miss].astype("float64") if how == "regression" else y[~miss]
        values, note = draw_values(how, y_obs, x[~miss], x[miss], rng, proper=proper, k=k,
                                   residuals=residuals)
        if note:
            notes.append(f"{item}: {note}")
        put_values(out, item, np.flatnonzero(miss), values)
    notes.insert(0, f"model-based imputation ({method} by default) on {', '.join(predictors) or 'no predictors'}")
    return ImputationResult(data=out, imputed=imputed, method=method,
                            unfilled=pd.Series(unfilled, dtype="int64"), notes=tuple(notes),
                            cautions=(MNAR_CAUTION,))
