"""Delta adjustment: how far from the respondents must nonrespondents be to change a conclusion?"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np
import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError

__all__ = ["DeltaResult", "delta_adjustment", "GRID_POINTS"]

#: Points in the default δ grid.
GRID_POINTS = 21


@dataclass(frozen=True, kw_only=True, eq=False)
class DeltaResult:
    """Pattern-mixture delta adjustment of one item's mean.

    Attributes
    ----------
    item
        Item name.
    n_respondents, n_nonrespondents
        Cases (unweighted).
    weight_nonrespondents
        Share W_m / W of the (weighted) in-scope cases that are nonrespondents.
    respondent_mean, respondent_sd
        (Weighted) mean and standard deviation of the observed values.
    threshold
        Value the conclusion is stated against (None: no conclusion stated).
    conclusion
        At δ = 0: ``"above"``, ``"below"`` or ``"equal"`` (None without threshold).
    tipping_point
        δ* at which the adjusted mean equals the threshold (None if no
        threshold or no nonrespondents).
    tipping_point_sd
        δ* in respondent standard deviations.
    grid
        One row per δ: ``delta``, ``delta_sd``, ``estimate`` and ``conclusion``.
    """

    item: str
    n_respondents: int
    n_nonrespondents: int
    weight_nonrespondents: float
    respondent_mean: float
    respondent_sd: float
    threshold: float | None
    conclusion: str | None
    tipping_point: float | None
    tipping_point_sd: float | None
    grid: pd.DataFrame


def _side(est: np.ndarray, threshold: float) -> np.ndarray:
    return np.where(np.isclose(est, threshold, rtol=1e-12, atol=1e-12), "equal",
                    np.where(est > threshold, "above", "below"))


def delta_adjustment(values: pd.Series, *, deltas: Sequence[float] | None = None,
                     weights: pd.Series | None = None, threshold: float | None = None,
                     item: str | None = None) -> DeltaResult:
    """Mean of an item when nonrespondents differ from respondents by δ.

    Parameters
    ----------
    values
        The item over its in-scope cases; NaN = nonresponse.
    deltas
        Shifts to try.  Default: 21 points symmetric around 0, wide enough to
        cover one respondent standard deviation and 1.25 × the tipping point.
    weights
        Weights (default: all 1); rows with missing weights are an error.
    threshold
        State the conclusion "mean above (or below) threshold" and find where it flips.
    item
        Name used in results.

    Returns
    -------
    DeltaResult

    Notes
    -----
    Each nonrespondent is given the respondent mean plus δ (a pattern-mixture
    model): estimate(δ) = (n_r ȳ_r + n_m (ȳ_r + δ)) / n = ȳ_r + δ n_m/n, or with
    weights ȳ_r,w + δ W_m/W.  δ = 0 assumes nonrespondents resemble
    respondents.  The estimate is linear in δ, so the tipping point is
    δ* = (threshold − ȳ_r) · W / W_m.  Which δ is plausible is a matter of
    subject knowledge, not of the data.

    References
    ----------
    Rubin, D. B. (1977). Formalizing subjective notions about the effect of
    nonrespondents in sample surveys. *JASA*, 72, 538–543.
    Little, R. J. A. (1993). Pattern-mixture models for multivariate incomplete
    data. *JASA*, 88, 125–134.
    """
    name = str(item if item is not None else (values.name or "item"))
    y = pd.to_numeric(values, errors="coerce").astype(float)
    if weights is None:
        w = pd.Series(1.0, index=y.index)
    else:
        w = weights.reindex(y.index).astype(float)
        if w.isna().any() or (w < 0).any():
            raise SkipwiseError(Problem(
                code=ProblemCode.BAD_WEIGHTS, category=Category.DATA, item=name,
                message="weights must be present and non-negative for every in-scope case",
            ))
    obs = y.notna().to_numpy()
    wv, yv = w.to_numpy(), y.to_numpy()
    if obs.sum() < 1 or wv[obs].sum() <= 0:
        raise SkipwiseError(Problem(code=ProblemCode.BAD_DATA, category=Category.DATA, item=name,
                                    message="no respondents: the item's mean cannot be estimated"))
    w_r, w_m = wv[obs].sum(), wv[~obs].sum()
    share_m = w_m / (w_r + w_m)
    mean_r = float((wv[obs] * yv[obs]).sum() / w_r)
    sd_r = float(np.sqrt((wv[obs] * (yv[obs] - mean_r) ** 2).sum() / w_r)) if obs.sum() > 1 else float("nan")

    tip = None
    if threshold is not None and share_m > 0:
        tip = float((threshold - mean_r) / share_m)
    if deltas is None:
        half = max(sd_r if np.isfinite(sd_r) and sd_r > 0 else 1.0, 1.25 * abs(tip) if tip is not None else 0.0)
        grid = np.linspace(-half, half, GRID_POINTS)
        if tip is not None:
            grid = np.union1d(grid, [tip])
    else:
        grid = np.asarray(sorted(set(float(d) for d in deltas)), dtype=float)
    est = mean_r + grid * share_m
    table = pd.DataFrame({"delta": grid,
                          "delta_sd": grid / sd_r if np.isfinite(sd_r) and sd_r > 0 else np.nan,
                          "estimate": est})
    conclusion = None
    if threshold is not None:
        table["conclusion"] = _side(est, float(threshold))
        conclusion = str(_side(np.array([mean_r]), float(threshold))[0])
    else:
        table["conclusion"] = None
    return DeltaResult(
        item=name, n_respondents=int(obs.sum()), n_nonrespondents=int((~obs).sum()),
        weight_nonrespondents=float(share_m), respondent_mean=mean_r, respondent_sd=sd_r,
        threshold=None if threshold is None else float(threshold), conclusion=conclusion,
        tipping_point=tip,
        tipping_point_sd=(tip / sd_r) if tip is not None and np.isfinite(sd_r) and sd_r > 0 else None,
        grid=table,
    )
