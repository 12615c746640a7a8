"""Weight trimming: cap large weights, then re-calibrate, until cap and margins both hold."""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import Callable

import numpy as np

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError

__all__ = ["TrimResult", "TrimStart", "trim_cap", "trim_weights", "trim_start", "merge_starts", "check_cap",
           "trim_loop", "spread_factor"]


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


def spread_factor(total: float, cap: float, n_at_cap: int, free: float) -> float | None:
    """Factor of the cases below the cap that gives them the weight cut off the capped cases
    (None when every positive case is at the cap: nothing is left to carry the excess)."""
    if free <= 0:
        return None
    return (total - cap * n_at_cap) / free


def _spread_excess(total: float, cap: float) -> Callable[[np.ndarray], np.ndarray]:
    """Give the weight cut off the capped cases to the cases below the cap, pro rata."""
    def spread(v: np.ndarray) -> np.ndarray:
        at_cap = v >= cap
        f = spread_factor(total, cap, int(at_cap.sum()), float(v[~at_cap].sum()))
        return v if f is None else np.where(at_cap, v, v * f)
    return spread


@dataclass(frozen=True, kw_only=True)
class TrimStart:
    """What trimming needs to know of the weights entering it (mergeable sums and a maximum)."""

    total: float
    positive: int
    max_before: float
    capped: int
    removed: float


def trim_start(w: np.ndarray, cap: float) -> TrimStart:
    """Row-local :class:`TrimStart` of ``w`` under ``cap`` (partitions add them up with :func:`merge_starts`)."""
    return TrimStart(total=float(w.sum()), positive=int((w > 0).sum()), max_before=float(w.max()) if len(w) else 0.0,
                     capped=int((w > cap).sum()), removed=float(np.sum(np.maximum(w - cap, 0.0))))


def merge_starts(parts: list[TrimStart]) -> TrimStart:
    return TrimStart(total=sum(p.total for p in parts), positive=sum(p.positive for p in parts),
                     max_before=max(p.max_before for p in parts), capped=sum(p.capped for p in parts),
                     removed=sum(p.removed for p in parts))


def check_cap(start: TrimStart, cap: float) -> None:
    """Refuse a cap that cannot carry the total weight."""
    if cap * start.positive < start.total * (1 - 1e-12):
        raise SkipwiseError(Problem(code=ProblemCode.INFEASIBLE, category=Category.DATA, item="trimming",
                                    message=f"a cap of {cap:,.6g} on {start.positive} case(s) cannot carry the "
                                            f"total weight {start.total:,.6g}", hint="raise the cap"))


def trim_loop(start: TrimStart, cap: float, rule: str, trim_round: Callable[[], float], *, tol: float = 1e-6,
              max_iter: int = 50) -> TrimResult:
    """The trimming iteration: ``trim_round()`` caps the weights, re-calibrates or spreads the excess,
    and returns the largest weight; done when it is at most ``cap (1 + tol)``.  Both engines run
    this loop; the weights live wherever ``trim_round`` keeps them (``weights`` of the result is
    left empty here)."""
    largest = start.max_before
    for it in range(1, max_iter + 1):
        largest = trim_round()
        if largest <= cap * (1 + tol):
            return TrimResult(weights=np.zeros(0), cap=cap, rule=rule, iterations=it, cases_capped=start.capped,
                              weight_removed_first_pass=start.removed, max_before=start.max_before,
                              max_after=float(largest))
    raise SkipwiseError(Problem(code=ProblemCode.NOT_CONVERGED, category=Category.DATA, item="trimming",
                                message=f"trimming and re-calibration did not settle after {max_iter} rounds: "
                                        f"largest weight {largest:,.6g} vs cap {cap:,.6g}",
                                hint="raise the cap, loosen the tolerance or raise max_iter"))


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
    start = trim_start(w, cap)
    check_cap(start, cap)
    fix = recalibrate or _spread_excess(start.total, cap)
    cur = w

    def trim_round() -> float:
        nonlocal cur
        cur = fix(np.minimum(cur, cap))
        return float(cur.max())

    res = trim_loop(start, cap, rule, trim_round, tol=tol, max_iter=max_iter)
    return dataclasses.replace(res, weights=cur)
