"""Weight trimming: cap large weights, then re-calibrate, until cap and margins both hold."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError

__all__ = ["TrimResult", "trim_cap", "trim_weights"]


@dataclass(frozen=True, kw_only=True)
class TrimResult:
    """Trimmed weights and what trimming did."""

    weights: np.ndarray
    cap: float
    rule: str
    iterations: int
    cases_capped: int
    weight_removed_first_pass: float
    max_before: float
    max_after: float


def trim_cap(w: np.ndarray, *, median_multiple: float | None = None, percentile: float | None = None) -> tuple[float, str]:
    """The cap: ``k × median`` of the positive weights, or their ``p``-th percentile.

    A cap of 3.5 to 4.5 times the median has been used in a large U.S. federal
    assessment's weighting [seen: its technical documentation].
    """
    pos = w[w > 0]
    if (median_multiple is None) == (percentile is None):
        raise SkipwiseError(Problem(code=ProblemCode.BAD_VALUE, item="trimming",
                                    message="give exactly one of median_multiple and percentile"))
    if median_multiple is not None:
        if median_multiple <= 1:
            raise SkipwiseError(Problem(code=ProblemCode.BAD_VALUE, item="trimming",
                                        message=f"median_multiple must exceed 1, got {median_multiple}"))
        return float(median_multiple * np.median(pos)), f"{median_multiple:g} × median"
    if not (0 < float(percentile) < 100):
        raise SkipwiseError(Problem(code=ProblemCode.BAD_VALUE, item="trimming",
                                    message=f"percentile must lie strictly between 0 and 100, got {percentile}"))
    return float(np.percentile(pos, percentile)), f"{percentile:g}th percentile"


def _spread_excess(total: float, cap: float) -> Callable[[np.ndarray], np.ndarray]:
    """Give the weight cut off the capped cases to the cases below the cap, pro rata."""
    def spread(v: np.ndarray) -> np.ndarray:
        at_cap = v >= cap
        free = float(v[~at_cap].sum())
        if free <= 0:  # every positive case is at the cap: nothing left to carry the excess
            return v
        return np.where(at_cap, v, v * ((total - cap * int(at_cap.sum())) / free))
    return spread


def trim_weights(w: np.ndarray, *, median_multiple: float | None = None, percentile: float | None = None,
                 recalibrate: Callable[[np.ndarray], np.ndarray] | None = None, cap: float | None = None,
                 tol: float = 1e-6, max_iter: int = 50) -> TrimResult:
    """Trim weights at a cap, then re-calibrate; repeat until the cap and the margins hold.

    The cap is computed once from the weights entering trimming (or given as
    ``cap``), so the iteration aims at a fixed target.  Replicates apply the
    plan's *rule*, not the full sample's cap: each replicate's cap is its own
    ``k × median`` (or percentile) of its weights.  Trimming is part of the
    estimator, so each replicate repeats it as the full sample did, like every
    other weighting step (Wolter 2007, ch. 4 [memory]); and a jackknife or bootstrap
    replicate's weights are rescaled by n_h/(n_h − 1), so a fixed full-sample cap
    would trim the replicates harder than the full sample did and understate
    the variance.  With no
    calibration step, the weight cut off the capped cases is spread over the
    cases below the cap in proportion to their weights; the capped cases stay
    exactly at the cap and the total is kept.  A case pushed over the cap by
    that share is capped in the next round (Potter 1990's iterative trimming).

    Parameters
    ----------
    recalibrate
        Function taking trimmed weights and returning weights that meet the
        margins again (e.g. raking started from the trimmed weights).
    tol
        Relative tolerance on the cap: done when ``max(w) <= cap (1 + tol)``.

    Raises
    ------
    SkipwiseError
        ``infeasible`` when the cap times the number of cases is below the total,
        ``not-converged`` when cap and margins cannot both be met.

    References
    ----------
    Potter, F. J. (1990). A study of procedures to identify and trim extreme
    sampling weights. *Proceedings of the Section on Survey Research Methods*,
    American Statistical Association, 225–230.
    """
    w = np.asarray(w, dtype=float)
    rule = "given cap"
    if cap is None:
        cap, rule = trim_cap(w, median_multiple=median_multiple, percentile=percentile)
    pos = w > 0
    total = float(w.sum())
    if cap * pos.sum() < total * (1 - 1e-12):
        raise SkipwiseError(Problem(code=ProblemCode.INFEASIBLE, category=Category.DATA, item="trimming",
                                    message=f"a cap of {cap:,.6g} on {int(pos.sum())} case(s) cannot carry the "
                                            f"total weight {total:,.6g}", hint="raise the cap"))
    fix = recalibrate or _spread_excess(total, cap)
    max_before = float(w.max())
    capped_first = int((w > cap).sum())
    removed = float(np.sum(np.maximum(w - cap, 0.0)))
    cur = w
    for it in range(1, max_iter + 1):
        cur = fix(np.minimum(cur, cap))
        if cur.max() <= cap * (1 + tol):
            return TrimResult(weights=cur, cap=cap, rule=rule, iterations=it, cases_capped=capped_first,
                              weight_removed_first_pass=removed, max_before=max_before,
                              max_after=float(cur.max()))
    raise SkipwiseError(Problem(code=ProblemCode.NOT_CONVERGED, category=Category.DATA, item="trimming",
                                message=f"trimming and re-calibration did not settle after {max_iter} rounds: "
                                        f"largest weight {cur.max():,.6g} vs cap {cap:,.6g}",
                                hint="raise the cap, loosen the tolerance or raise max_iter"))
