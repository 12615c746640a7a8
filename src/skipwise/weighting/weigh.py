"""One call for the whole job: chain, replicates, outcome rates, estimates, output columns."""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Callable, Iterable

import numpy as np
import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError, did_you_mean
from skipwise.generated import Generated, check_generated
from skipwise.weighting.diagnostics import weight_summary
from skipwise.weighting.outcomes import OUTCOME_NUMBERS, count_outcomes, outcome_rates
from skipwise.weighting.pipeline import STAGES, ChainResult, Prepared, prepare, run_chain
from skipwise.weighting.plan import WeightingPlan
from skipwise.weighting.replicates import (
    ReplicateDesign, bootstrap_design, jackknife_design, replicate_standard_errors, run_replicates,
)

__all__ = ["WeighFigures", "WeighResult", "weigh", "CAUTIONS", "planned_weight_columns"]

#: Shown in reports, the workbook and the command's help.
CAUTIONS: tuple[str, ...] = (
    "Nonresponse weighting and calibration correct only for differences explained by the weighting "
    "variables; they do not repair data missing not at random (MNAR).",
    "The output files hold respondents' data: store, share and delete them under your organization's "
    "data protection rules.",
    "Defer to your organization's methodology standards for thresholds such as minimum class sizes, "
    "maximum adjustment factors and trimming caps; the defaults here are common practice, not a standard.",
)


@dataclass(frozen=True, kw_only=True)
class WeighFigures:
    """What both engines' weighting runs report: the plan, the chain, outcome counts and rates."""

    plan: WeightingPlan
    chain: ChainResult
    counts: dict[str, float]
    counts_weighted: dict[str, float]
    rates: dict[str, object]
    rates_weighted: dict[str, object]
    stage_summary: pd.DataFrame
    design: ReplicateDesign | None
    weight_columns: tuple[str, ...]


@dataclass(frozen=True, kw_only=True)
class WeighResult(WeighFigures):
    """Everything ``skipwise weigh`` reports and writes."""

    prepared: Prepared
    replicates: np.ndarray | None
    estimates: pd.DataFrame
    data: pd.DataFrame

    @property
    def final(self) -> np.ndarray:
        return self.chain.final

    @property
    def totals(self) -> dict[str, float]:
        """Cases by role and the sums of base and final weights (what the summary shows)."""
        prep = self.prepared
        return {"cases": len(prep.frame), "eligible": int(prep.eligible.sum()), "unknown": int(prep.unknown.sum()),
                "respondents": int(prep.respondent.sum()), "base_sum": float(prep.base.sum()),
                "final_sum": float(self.final.sum())}


def _stage_summary(chain: ChainResult) -> pd.DataFrame:
    rows = []
    for stage in STAGES:
        if stage in chain.stages and (chain.stages[stage] > 0).any():
            rows.append({"stage": stage, **weight_summary(chain.stages[stage])})
    return pd.DataFrame(rows)


def replicate_design_of(frame: pd.DataFrame, plan: WeightingPlan) -> ReplicateDesign | None:
    """The replicate design the plan makes on ``frame`` (None without replicates)."""
    return _design(frame, plan)


def _design(frame: pd.DataFrame, plan: WeightingPlan) -> ReplicateDesign | None:
    spec = plan.replicates
    if spec is None:
        return None
    fraction = None
    if spec.fpc:
        col = spec.fraction or plan.base_probability
        if col not in frame.columns:
            raise SkipwiseError(Problem(code=ProblemCode.MISSING_COLUMN, category=Category.DATA, item=col,
                                        message=f"sampling-fraction column '{col}' (replicates.fpc) is not in the data",
                                        hint=did_you_mean(col, map(str, frame.columns))))
        fraction = pd.to_numeric(frame[col], errors="coerce").to_numpy(dtype=float)
    if spec.method == "jackknife":
        return jackknife_design(frame, spec.psu, spec.strata, fraction=fraction)
    return bootstrap_design(frame, spec.psu, spec.strata, count=spec.count, seed=spec.seed, fraction=fraction)


def weigh(frame: pd.DataFrame, plan: WeightingPlan, *, share_answered: pd.Series | None = None,
          progress: Callable[[int], None] | None = None, on_design: Callable[[int], None] | None = None,
          estimate_values: pd.DataFrame | None = None) -> WeighResult:
    """Run the plan on ``frame``: weights of every stage, replicates, rates and estimates.

    Parameters
    ----------
    share_answered
        Per-case share of applicable items answered, needed when the plan
        splits interviews into complete / partial / break-off.
    estimate_values
        Values of the estimate items aligned with ``frame`` (e.g. the classifier's
        answered values, NaN for every other status), used instead of the stored
        cells, so invalid values and off-route answers never enter an estimate.
    progress
        Called with the number of replicates done.
    on_design
        Called once with the number of replicates before they run.
    """
    check_generated(planned_weight_columns(plan, frame.columns), frame.columns)
    prep = prepare(frame, plan, share_answered=share_answered)
    chain = run_chain(prep, prep.base)
    counts = count_outcomes(prep.outcome)
    counts_w = count_outcomes(prep.outcome, prep.base)
    design = _design(frame, plan)
    reps = None
    estimates = pd.DataFrame()
    if design is not None:
        if on_design is not None:
            on_design(design.count)
        reps = run_replicates(prep, design, structure=chain.structure, progress=progress)
        est = plan.estimates
        if est is not None:
            source = frame if estimate_values is None else frame.assign(**{
                c: estimate_values[c] for c in estimate_values.columns if c in frame.columns})
            estimates = replicate_standard_errors(source, prep.respondent, chain.final, reps, design,
                                                  means=est.means, proportions=est.proportions,
                                                  exclude_values=est.exclude_values)
    data, cols = _output_frame(frame, plan, prep, chain, reps)
    return WeighResult(plan=plan, prepared=prep, chain=chain, counts=counts, counts_weighted=counts_w,
                       rates=outcome_rates(counts, e=plan.e), rates_weighted=outcome_rates(counts_w, e=plan.e),
                       stage_summary=_stage_summary(chain), design=design, replicates=reps, estimates=estimates,
                       data=data, weight_columns=cols)


def _output_frame(frame: pd.DataFrame, plan: WeightingPlan, prep: Prepared, chain: ChainResult,
                  reps: np.ndarray | None) -> tuple[pd.DataFrame, tuple[str, ...]]:
    p = plan.prefix
    # the category as its labelled number 1-8 (OUTCOME_NUMBERS), as every format can carry it
    new: dict[str, object] = {f"{p}outcome": prep.outcome.map(OUTCOME_NUMBERS).to_numpy(dtype=np.int64)}
    for stage in STAGES:
        new[f"{p}{stage}"] = chain.stages[stage]
    if reps is not None:
        width = max(3, len(str(reps.shape[1])))
        for r in range(reps.shape[1]):
            new[f"{p}rep{r + 1:0{width}d}"] = reps[:, r]
    check_generated([_generated(plan, c, "weight column") for c in new], frame.columns)
    added = pd.DataFrame(new, index=frame.index)
    out = pd.concat([frame, added], axis=1)
    out.attrs = dict(frame.attrs)
    return out, tuple(new)


def _generated(plan: WeightingPlan, name: str, role: str) -> Generated:
    return Generated(name=name, role=role, file=plan.file, line=plan.line("output", "prefix"),
                     hint="set output.prefix in the weighting plan to another prefix")


def planned_weight_columns(plan: WeightingPlan, columns: Iterable[object] = ()) -> list[Generated]:
    """The weight columns the plan adds (``<prefix>outcome``, one per stage), for the name guard.

    The number of replicate columns is known only once the design is built, so every existing
    column that has the form of one (``<prefix>rep`` and digits) is listed as a clash too.
    """
    p = plan.prefix
    names = [_generated(plan, f"{p}outcome", "outcome column")]
    names += [_generated(plan, f"{p}{stage}", f"{stage} weight column") for stage in STAGES]
    if plan.replicates is not None:
        form = re.compile(re.escape(p) + r"rep[0-9]+")
        names += [_generated(plan, str(c), "replicate weight column") for c in columns if form.fullmatch(str(c))]
    return names
