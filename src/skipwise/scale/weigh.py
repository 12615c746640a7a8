"""``skipwise weigh --engine dask``: the weighting chain as passes over the partitions of a cluster.

Each case's encoded state (:mod:`skipwise.scale.weigh_parts`) stays on the
worker that read it, and so do the weights of every stage.  Every step is one
pass over the partitions per iteration: the workers return partial sums
(class sums, margin totals, ``Σ d x xᵀ``), the client adds them up and turns
them into factors with the same functions as the in-memory engine
(:mod:`skipwise.weighting.adjust`, :mod:`~skipwise.weighting.calibrate`,
:mod:`~skipwise.weighting.trim`), and the next pass applies them.  What comes
to the client: counts, sums and small tables; one weight column at a time for
trimming's exact median and for the stage summaries' percentiles; and, for
bounded logit calibration, the calibration matrix of the respondents when it
fits the memory budget.  Replicates take their PSU x replicate factor table
from the in-memory engine's builders (same random generator and seed) and
re-run the chain per replicate, with the full sample's collapsed classes.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from typing import Callable

import numpy as np
import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError
from skipwise.scale import weigh_parts as wp
from skipwise.scale.weigh_prepare import Dist, Encoded, prepare_on_cluster
from skipwise.weighting import calibrate as cal
from skipwise.weighting.adjust import class_factors
from skipwise.weighting.diagnostics import weight_summary
from skipwise.weighting.margins import EncodedMargin, margin_table_of_sums
from skipwise.weighting.outcomes import outcome_rates
from skipwise.weighting.pipeline import STAGES, ChainResult, Structure
from skipwise.weighting.plan import WeightingPlan
from skipwise.weighting.replicates import ReplicateDesign
from skipwise.weighting.trim import check_cap, merge_starts, spread_factor, trim_cap, trim_loop
from skipwise.weighting.weigh import WeighFigures

__all__ = ["DaskWeighResult", "GATHER_BUDGET_ENV", "gather_budget", "ClusterChain", "prepare_on_cluster", "Dist",
           "Encoded"]

#: Environment variable: bytes the client may gather for one model matrix or weight column.
GATHER_BUDGET_ENV = "SKIPWISE_GATHER_BUDGET"
DEFAULT_GATHER_BUDGET = 2 * 1024 ** 3


def gather_budget() -> int:
    """Bytes the client may hold of one gathered column or matrix (``SKIPWISE_GATHER_BUDGET``, default 2 GiB)."""
    text = os.environ.get(GATHER_BUDGET_ENV)
    return int(float(text)) if text else DEFAULT_GATHER_BUDGET


def refuse_gather(what: str, need: int, budget: int) -> SkipwiseError:
    return SkipwiseError(Problem(
        code=ProblemCode.BAD_VALUE, category=Category.USAGE, item=what,
        message=f"{what} needs {need / 1e6:,.1f} MB on the client, more than the memory budget of "
                f"{budget / 1e6:,.1f} MB of the dask engine",
        hint=f"raise {GATHER_BUDGET_ENV} (bytes) if the client has the memory, or use a method that runs on "
             "merged sums (classes, post-stratification, raking, linear calibration)"))


@dataclass(frozen=True, kw_only=True)
class DaskWeighResult(WeighFigures):
    """What the client keeps of a weighting run on a cluster: figures and tables, never the data."""

    totals: dict[str, float]
    estimates: pd.DataFrame = field(default_factory=pd.DataFrame)
    replicates: None = None


class ClusterChain:
    """:func:`skipwise.weighting.pipeline.run_chain` as passes over the partitions."""

    def __init__(self, dist: Dist, enc: Encoded, plan: WeightingPlan, *, note: Callable[[str], None] | None = None,
                 budget: int | None = None) -> None:
        self.d, self.enc, self.plan = dist, enc, plan
        self.note = note or (lambda _text: None)
        self.budget = gather_budget() if budget is None else budget
        self.base = dist.on(_base)

    # --- steps ------------------------------------------------------------------------------
    def _class_step(self, w: list, step: str, labels: list[str], *, min_kept: int = 1, max_factor: float = np.inf,
                    group_of_class: np.ndarray | None = None):
        sums = self.d.total(self.d.on(wp.step_sums, w, step=step, n_classes=len(labels)))
        cf = class_factors(sums, labels, step=step, min_kept=min_kept, max_factor=max_factor,
                           group_of_class=group_of_class)
        return self.d.on(wp.step_apply, w, step=step, factor_of_class=cf.factor_of_class), cf

    def _margin_sums(self, wr: list, which: list[int]) -> list[np.ndarray]:
        sizes = [len(m.labels) for m in self.enc.margins]
        return self.d.total(self.d.on(wp.margin_sums, wr, which=which, sizes=sizes))

    def calibrate(self, d: list) -> list:
        """Calibrated respondent weights from starting weights ``d`` (respondent vectors)."""
        c = self.plan.calibration
        enc = self.enc.margins
        if c.method == "poststratify":
            s = self._margin_sums(d, [0])
            cal.check_category_sums(s, enc[:1])
            return self.d.on(wp.margin_scale, d, j=0, f=cal.ratio_factors(s[0], enc[0].targets))
        if c.method == "rake":
            cal.check_category_sums(self._margin_sums(d, list(range(len(enc)))), enc)
            cur, pending = d, None

            def flush() -> None:
                nonlocal cur, pending
                if pending is not None:
                    cur = self.d.on(wp.margin_scale, cur, j=pending[0], f=pending[1])
                    pending = None

            def sums(j: int) -> np.ndarray:
                flush()
                return self._margin_sums(cur, [j])[0]

            def scale(j: int, f: np.ndarray) -> None:
                nonlocal pending
                flush()
                pending = (j, f)

            def all_sums() -> list[np.ndarray]:
                flush()
                return self._margin_sums(cur, list(range(len(enc))))

            cal.rake_loop(enc, sums, scale, all_sums, tol=c.tolerance, max_iter=c.max_iterations)
            flush()
            return cur
        if c.method == "linear":
            xdx, xd = self.d.total(self.d.on(wp.linear_part_sums, d))
            return self.d.on(wp.linear_apply, d, lam=cal.linear_lambda(xdx, xd, self.enc.t))
        return self._logit(d)

    def _logit(self, d: list) -> list:
        c = self.plan.calibration
        k = len(self.enc.t)
        need = self.enc.respondents * (k + 2) * 8
        if need > self.budget:
            raise refuse_gather("bounded logit calibration (its calibration matrix)", need, self.budget)
        if not getattr(self, "_logit_noted", False):
            self.note(f"logit calibration: the calibration matrix of the {self.enc.respondents:,} respondents "
                      f"({need / 1e6:,.1f} MB) is gathered to the client")
            self._logit_noted = True
        x = np.concatenate(self.d.gather(self.d.on(wp.x_of)))
        dd = np.concatenate(self.d.gather(d))
        if self.enc.margins:
            w = _logit_with_margins(dd, x, self.enc, c, self.d)
        else:
            w = cal.logit_weights(dd, x, self.enc.t, lower=c.bounds[0], upper=c.bounds[1], tol=c.tolerance,
                                  max_iter=min(c.max_iterations, 200), enc=None)[0]
        bounds = np.concatenate([[0], np.cumsum(self.enc.resp_rows)])
        scattered = self.d.client.scatter(w, hash=False)
        return [self.d.client.submit(wp.take, scattered, int(bounds[i]), int(bounds[i + 1]), pure=False)
                for i in range(len(self.d.states))]

    def _trim(self, w: list):
        t = self.plan.trimming
        need = self.enc.respondents * 8
        if need > self.budget:
            raise refuse_gather("trimming's exact median (the weight column)", need, self.budget)
        cap, rule = trim_cap(self.d.column(w), median_multiple=t.median_multiple, percentile=t.percentile)
        start = merge_starts(self.d.gather(self.d.each(_trim_start, w, cap=cap)))
        check_cap(start, cap)
        cur = w

        def trim_round() -> float:
            nonlocal cur
            v = self.d.each(wp.clipped, cur, cap=cap)
            if self.plan.calibration is not None:
                cur = self.calibrate(v)
            else:
                at = self.d.gather(self.d.each(wp.spread_sums, v, cap=cap))
                f = spread_factor(start.total, cap, sum(a for a, _ in at), sum(b for _, b in at))
                cur = v if f is None else self.d.each(wp.spread_apply, v, cap=cap, f=f)
            return max(self.d.gather(self.d.each(wp.largest, cur)))

        res = trim_loop(start, cap, rule, trim_round, tol=t.tolerance, max_iter=t.max_iterations)
        return cur, res

    # --- the chain ----------------------------------------------------------------------------
    def run(self, base: list | None = None, *, structure: Structure | None = None, detail: bool = True
            ) -> tuple[dict[str, list], ChainResult]:
        """Every configured step from ``base`` (default: the plan's base weights), like ``run_chain``."""
        plan, enc = self.plan, self.enc
        stages: dict[str, list] = {"base": self.base if base is None else base}
        w = stages["base"]
        tables, collapses, notes = [], [], []
        elig_groups = nr_groups = None
        if plan.eligibility_classes is not None:
            w, cf = self._class_step(w, "eligibility", enc.elig_labels,
                                     group_of_class=None if structure is None else structure.elig_groups)
            elig_groups = cf.group_of_class
            tables.append(cf.table)
            collapses.extend(cf.collapses)
        elif enc.unknown and detail:
            notes.append(f"{enc.unknown} unknown-eligibility case(s): their weight was dropped without "
                         f"redistribution (no 'eligibility' step in the plan)")
        w = self.d.on(wp.keep_only, w, mask="eligible")
        stages["eligibility"] = w
        nr = plan.nonresponse
        fit = None
        if nr is None:
            w = self.d.on(wp.keep_only, w, mask="respondent")
        elif nr.method == "classes":
            w, cf = self._class_step(w, "nonresponse", enc.nr_labels, min_kept=nr.min_respondents,
                                     max_factor=nr.max_factor,
                                     group_of_class=None if structure is None else structure.nr_groups)
            nr_groups = cf.group_of_class
            tables.append(cf.table)
            collapses.extend(cf.collapses)
        else:
            from skipwise.scale.weigh_replicates import propensity_step

            w, fit, more_tables, more, note = propensity_step(self, w, stages["base"], structure)
            tables.extend(more_tables)
            collapses.extend(more)
            if note and detail:
                notes.append(note)
        stages["nonresponse"] = w
        trim = None
        if plan.calibration is not None:
            w = self.d.on(wp.expand, self.calibrate(self.d.on(wp.respondents_of, w)))
        stages["calibrated"] = w
        if plan.trimming is not None:
            wr, trim = self._trim(self.d.on(wp.respondents_of, w))
            w = self.d.on(wp.expand, wr)
        stages["final"] = w
        margins = None
        if detail and enc.margins:
            n_m = list(range(len(enc.margins)))
            margins = margin_table_of_sums(self._margin_sums(self.d.on(wp.respondents_of, w), n_m), enc.margins,
                                           self._margin_sums(self.d.on(wp.respondents_of, stages["nonresponse"]),
                                                             n_m))
        chain = ChainResult(stages={}, class_tables=tuple(tables), collapses=tuple(collapses), margins=margins,
                            trimming=trim, propensity=fit,
                            structure=Structure(elig_groups=elig_groups, nr_groups=nr_groups), notes=tuple(notes))
        return stages, chain

    def summary(self, stages: dict[str, list]) -> tuple[pd.DataFrame, float, float]:
        """The stage summaries (one weight column gathered at a time) and the sums of base and final weights."""
        rows = []
        sums = {}
        for stage in STAGES:
            col = self.d.column(stages[stage])
            sums[stage] = float(np.sum(self.d.gather(self.d.each(_sum, stages[stage]))))
            if col.size:
                rows.append({"stage": stage, **weight_summary(col)})
        return pd.DataFrame(rows), sums["base"], sums["final"]

    def result(self, stages: dict[str, list], chain: ChainResult, design: ReplicateDesign | None,
               weight_columns: tuple[str, ...], estimates: pd.DataFrame | None = None) -> DaskWeighResult:
        enc, plan = self.enc, self.plan
        summary, base_sum, final_sum = self.summary(stages)
        totals = {"cases": enc.rows, "eligible": enc.eligible, "unknown": enc.unknown,
                  "respondents": enc.respondents, "base_sum": base_sum, "final_sum": final_sum}
        return DaskWeighResult(plan=plan, chain=chain, counts=enc.counts, counts_weighted=enc.counts_weighted,
                               rates=outcome_rates(enc.counts, e=plan.e),
                               rates_weighted=outcome_rates(enc.counts_weighted, e=plan.e), stage_summary=summary,
                               design=design, totals=totals, weight_columns=weight_columns,
                               estimates=pd.DataFrame() if estimates is None else estimates)


def _base(state) -> np.ndarray:
    return state.base


def _sum(w: np.ndarray) -> float:
    return float(w.sum())


def _trim_start(w: np.ndarray, cap: float):
    from skipwise.weighting.trim import trim_start

    return trim_start(w, cap)


def _logit_with_margins(dd: np.ndarray, x: np.ndarray, enc: Encoded, c, dist: Dist) -> np.ndarray:
    """Logit calibration with the margins' feasibility checks: the respondents' margin codes are gathered too."""
    codes = dist.gather(dist.on(_margin_code_columns))
    full = [EncodedMargin(variable=m.variable, labels=m.labels, targets=m.targets,
                          codes=np.concatenate([part[j] for part in codes]))
            for j, m in enumerate(enc.margins)]
    return cal.logit_weights(dd, x, enc.t, lower=c.bounds[0], upper=c.bounds[1], tol=c.tolerance,
                             max_iter=min(c.max_iterations, 200), enc=full)[0]


def _margin_code_columns(state) -> tuple[np.ndarray, ...]:
    return state.margin_codes
