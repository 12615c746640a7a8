"""The weighting chain: base weights → unknown eligibility → nonresponse → calibration → trimming.

:func:`prepare` does the checking and encoding once; :func:`run_chain` is the
pure function ``(prepared frame and plan, base weights) → weights`` that the
full sample and every replicate run.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError
from skipwise.weighting import calibrate as cal
from skipwise.weighting.adjust import ClassAdjustment, CollapseRecord, class_adjust, class_codes
from skipwise.weighting.base import base_weights
from skipwise.weighting.margins import EncodedMargin, category_label, encode_margins, margin_table
from skipwise.weighting.outcomes import interview_outcome
from skipwise.weighting.plan import WeightingPlan
from skipwise.weighting.propensity import PropensityFit, fit_propensity, propensity_classes, propensity_design
from skipwise.weighting.trim import TrimResult, trim_weights

__all__ = ["disposition_outcomes", "disposition_problems", "respondent_categories", "Prepared", "ChainResult", "Structure", "prepare", "run_chain", "chain_weights", "outcome_categories",
           "STAGES", "no_share_problem", "split_interviews"]

ELIGIBLE = ("I", "P", "R", "NC", "O")
UNKNOWN = ("UH", "UO")
#: Weight stages in chain order (column suffixes of the output).
STAGES = ("base", "eligibility", "nonresponse", "calibrated", "final")


@dataclass(frozen=True, kw_only=True)
class Prepared:
    """Everything the chain needs that does not depend on the weights."""

    frame: pd.DataFrame
    plan: WeightingPlan
    outcome: pd.Series
    respondent: np.ndarray
    eligible: np.ndarray
    known: np.ndarray
    unknown: np.ndarray
    elig_codes: np.ndarray | None
    elig_labels: list[str]
    nr_codes: np.ndarray | None
    nr_labels: list[str]
    prop_x: pd.DataFrame | None
    margins: list[EncodedMargin]
    x: np.ndarray | None
    t: np.ndarray | None
    base: np.ndarray


@dataclass(frozen=True, kw_only=True)
class Structure:
    """Collapsed classes of the full sample, kept fixed in replicates."""

    elig_groups: np.ndarray | None = None
    nr_groups: np.ndarray | None = None


@dataclass(frozen=True, kw_only=True)
class ChainResult:
    stages: dict[str, np.ndarray]
    class_tables: tuple[pd.DataFrame, ...] = ()
    collapses: tuple[CollapseRecord, ...] = ()
    margins: pd.DataFrame | None = None
    trimming: TrimResult | None = None
    propensity: PropensityFit | None = None
    structure: Structure = field(default_factory=Structure)
    notes: tuple[str, ...] = ()

    @property
    def final(self) -> np.ndarray:
        return self.stages["final"]


def outcome_categories(frame: pd.DataFrame, plan: WeightingPlan, share_answered: pd.Series | None = None) -> pd.Series:
    """Each case's outcome category (I, P, R, NC, O, UH, UO, NE) from its disposition."""
    spec = plan.dispositions
    loc = {"file": plan.file, "line": plan.line("dispositions", "column")}
    if spec.column not in frame.columns:
        from skipwise.errors import did_you_mean
        raise SkipwiseError(Problem(code=ProblemCode.MISSING_COLUMN, item=spec.column,
                                    message=f"disposition column '{spec.column}' is not in the data",
                                    hint=did_you_mean(spec.column, map(str, frame.columns)), **loc))
    outcomes, no_disposition, unmapped = disposition_outcomes(frame[spec.column], plan)
    problems = disposition_problems(plan, no_disposition, unmapped)
    if problems:
        raise SkipwiseError(problems)
    out = pd.Series(outcomes, index=frame.index, dtype=object, name="outcome")
    if spec.split is not None:
        if share_answered is None:
            raise SkipwiseError(no_share_problem(plan))
        share = share_answered if share_answered.index.equals(frame.index) else share_answered.reindex(frame.index)
        out[:] = split_interviews(out.to_numpy(), share, plan)
    return out


def no_share_problem(plan: WeightingPlan) -> Problem:
    """The plan splits interviews, but no share answered (no questionnaire) was given."""
    return Problem(code=ProblemCode.MISSING_KEY, category=Category.USAGE, item="interview_split", file=plan.file,
                   line=plan.line("dispositions", "interview_split"),
                   message="the plan splits interviews by share of items answered, "
                           "but no questionnaire (share answered) was given",
                   hint="pass -q QUESTIONNAIRE or remove interview_split")


def split_interviews(outcome: np.ndarray, share: pd.Series, plan: WeightingPlan) -> np.ndarray:
    """Row-local: the plan's interview split applied to the outcome categories (``share`` aligned with them).

    The cases of the categories the split applies to become complete, partial or the
    category a break-off counts as (``breakoff_to``); every other case is kept.
    """
    split = plan.dispositions.split
    out = np.array(outcome, dtype=object)
    sel = pd.Series(out).isin(split.applies_to).to_numpy()  # (an unmapped disposition: None)
    parts = interview_outcome(share[sel], breakoff_below=split.breakoff_below, complete_above=split.complete_above)
    out[sel] = parts.replace({"breakoff": split.breakoff_to}).to_numpy()
    return out


def disposition_outcomes(col: pd.Series, plan: WeightingPlan) -> tuple[np.ndarray, int, dict[str, int]]:
    """Row-local: each case's outcome category by the plan's mapping (None: unmapped or missing),
    the number of cases without a disposition and the cases of every unmapped disposition label."""
    codes, uniques = pd.factorize(col, use_na_sentinel=True)
    mapped = [plan.dispositions.codes.get(category_label(u)) for u in uniques]
    per_unique = np.bincount(codes[codes >= 0], minlength=len(uniques))
    unmapped: dict[str, int] = {}
    for u, m, n_u in zip(uniques, mapped, per_unique):
        if m is None:
            unmapped[category_label(u)] = unmapped.get(category_label(u), 0) + int(n_u)
    return np.asarray(mapped + [None], dtype=object)[codes], int((codes < 0).sum()), unmapped


def disposition_problems(plan: WeightingPlan, no_disposition: int, unmapped: dict[str, int]) -> list[Problem]:
    """Cases without a disposition and dispositions the plan does not map (from merged counts)."""
    spec = plan.dispositions
    loc = {"file": plan.file, "line": plan.line("dispositions", "column")}
    problems = []
    if no_disposition:
        problems.append(Problem(code=ProblemCode.BAD_DATA, category=Category.DATA, item=spec.column,
                                message=f"{no_disposition} case(s) have no disposition", **loc))
    for label, n_u in unmapped.items():
        problems.append(Problem(code=ProblemCode.UNDECLARED_VALUE, category=Category.DATA, item=spec.column,
                                message=f"disposition {label!r} ({n_u} case(s)) is not mapped to an outcome category",
                                hint="add it under dispositions.categories", file=plan.file,
                                line=plan.line("dispositions", "categories")))
    return problems


def respondent_categories(plan: WeightingPlan) -> tuple[str, ...]:
    """The outcome categories that count as respondents."""
    return ("I", "P") if plan.dispositions.partials_respond else ("I",)


def prepare(frame: pd.DataFrame, plan: WeightingPlan, *, share_answered: pd.Series | None = None) -> Prepared:
    """Check the data against the plan and encode classes and margins once."""
    outcome = outcome_categories(frame, plan, share_answered)
    o = outcome.to_numpy()
    resp_cats = respondent_categories(plan)
    respondent = np.isin(o, resp_cats)
    eligible = np.isin(o, ELIGIBLE)
    unknown = np.isin(o, UNKNOWN)
    known = eligible | (o == "NE")
    if not respondent.any():
        raise SkipwiseError(Problem(code=ProblemCode.BAD_DATA, category=Category.DATA,
                                    message="no respondent (no disposition maps to I or P)"))
    base = base_weights(frame, probability=plan.base_probability, weight=plan.base_weight, case_id=plan.case_id)
    elig_codes, elig_labels = (None, [])
    if plan.eligibility_classes is not None:
        elig_codes, elig_labels = class_codes(frame, plan.eligibility_classes, rows=known | unknown,
                                              step="eligibility")
    nr_codes, nr_labels, prop_x = None, [], None
    nr = plan.nonresponse
    if nr is not None and nr.method == "classes":
        nr_codes, nr_labels = class_codes(frame, nr.classes, rows=eligible, step="nonresponse")
    elif nr is not None:
        prop_x = propensity_design(frame.loc[eligible], list(nr.covariates), categorical=nr.categorical)
    margins: list[EncodedMargin] = []
    x = t = None
    c = plan.calibration
    if c is not None:
        resp_frame = frame.loc[respondent]
        margins = encode_margins(resp_frame, c.margins, locate=plan.locate) if c.margins else []
        if c.method in ("linear", "logit"):
            numeric = cal._numeric(resp_frame, c.totals)
            x, t, _ = cal.design_matrix(margins, numeric)
    return Prepared(frame=frame, plan=plan, outcome=outcome, respondent=respondent, eligible=eligible, known=known,
                    unknown=unknown, elig_codes=elig_codes, elig_labels=elig_labels, nr_codes=nr_codes,
                    nr_labels=nr_labels, prop_x=prop_x, margins=margins, x=x, t=t, base=base)


def _calibrate(prep: Prepared, d: np.ndarray) -> np.ndarray:
    c = prep.plan.calibration
    if c.method == "rake":
        return cal.rake_weights(d, prep.margins, tol=c.tolerance, max_iter=c.max_iterations)[0]
    if c.method == "poststratify":
        return cal.poststratify_weights(d, prep.margins[0])
    if c.method == "linear":
        return cal.linear_weights(d, prep.x, prep.t)
    return cal.logit_weights(d, prep.x, prep.t, lower=c.bounds[0], upper=c.bounds[1], tol=c.tolerance,
                             max_iter=min(c.max_iterations, 200), enc=prep.margins or None)[0]


def run_chain(prep: Prepared, base: np.ndarray, *, structure: Structure | None = None, detail: bool = True
              ) -> ChainResult:
    """Run every configured step from ``base`` weights; the same function serves replicates.

    Parameters
    ----------
    base
        Base weights of all cases (replicate base weights may hold zeros).
    structure
        Collapsed classes to reuse (replicates); None collapses afresh.
    detail
        Also build diagnostic tables (off for replicates, for speed).
    """
    plan = prep.plan
    stages: dict[str, np.ndarray] = {"base": np.asarray(base, dtype=float)}
    w = stages["base"].copy()
    tables: list[pd.DataFrame] = []
    collapses: list[CollapseRecord] = []
    notes: list[str] = []
    elig_groups = nr_groups = None
    if prep.elig_codes is not None:
        adj: ClassAdjustment = class_adjust(
            w, prep.elig_codes, prep.elig_labels, prep.known | prep.unknown, prep.known, step="eligibility",
            group_of_class=None if structure is None else structure.elig_groups)
        w, elig_groups = adj.weights, adj.group_of_class
        tables.append(adj.table)
        collapses.extend(adj.collapses)
    elif prep.unknown.any() and detail:
        notes.append(f"{int(prep.unknown.sum())} unknown-eligibility case(s): their weight was dropped without "
                     f"redistribution (no 'eligibility' step in the plan)")
    w = np.where(prep.eligible, w, 0.0)
    stages["eligibility"] = w
    nr = plan.nonresponse
    fit = None
    if nr is None:
        w = np.where(prep.respondent, w, 0.0)
    elif nr.method == "classes":
        adj = class_adjust(w, prep.nr_codes, prep.nr_labels, prep.eligible, prep.respondent, step="nonresponse",
                           min_kept=nr.min_respondents, max_factor=nr.max_factor,
                           group_of_class=None if structure is None else structure.nr_groups)
        w, nr_groups = adj.weights, adj.group_of_class
        tables.append(adj.table)
        collapses.extend(adj.collapses)
    else:
        # a replicate refits the model with its resampling factors (replicate base / full-sample base)
        fw = None if structure is None else stages["base"][prep.eligible] / prep.base[prep.eligible]
        fit = fit_propensity(prep.prop_x, prep.respondent[prep.eligible], fit_weights=fw)
        if fit.separation is not None and fit.separation.separated:
            notes.append("propensity model: " + fit.separation.describe("respondents", "nonrespondents")
                         + " (their propensity is 1 and their weight is kept as it is)")
        p = np.zeros(len(w))
        p[prep.eligible] = fit.propensity
        if nr.propensity_use == "inverse":
            w = np.where(prep.respondent, w / np.where(p > 0, p, 1.0), 0.0)
        else:
            codes = np.full(len(w), -1, dtype=np.intp)
            pc, labels = propensity_classes(fit.propensity, nr.propensity_classes)
            codes[prep.eligible] = pc
            adj = class_adjust(w, codes, labels, prep.eligible, prep.respondent, step="nonresponse",
                               min_kept=nr.min_respondents, max_factor=np.inf)
            w = adj.weights
            tables.append(adj.table)
            collapses.extend(adj.collapses)
    stages["nonresponse"] = w
    margins = None
    trim = None
    r = prep.respondent
    if plan.calibration is not None:
        wr = _calibrate(prep, w[r])
        w = np.zeros(len(w))
        w[r] = wr
        if detail and prep.margins:
            margins = margin_table(wr, prep.margins, start=stages["nonresponse"][r])
    stages["calibrated"] = w
    if plan.trimming is not None:
        t = plan.trimming
        recal = (lambda v: _calibrate(prep, v)) if plan.calibration is not None else None
        trim = trim_weights(w[r], median_multiple=t.median_multiple, percentile=t.percentile, recalibrate=recal,
                            tol=t.tolerance, max_iter=t.max_iterations)
        w = np.zeros(len(w))
        w[r] = trim.weights
        if detail and prep.margins:
            margins = margin_table(trim.weights, prep.margins, start=stages["nonresponse"][r])
    stages["final"] = w
    return ChainResult(stages=stages, class_tables=tuple(tables), collapses=tuple(collapses), margins=margins,
                       trimming=trim, propensity=fit, structure=Structure(elig_groups=elig_groups, nr_groups=nr_groups),
                       notes=tuple(notes))


def chain_weights(frame: pd.DataFrame, plan: WeightingPlan, base: np.ndarray | None = None, *,
                  share_answered: pd.Series | None = None) -> np.ndarray:
    """Final weights of ``frame`` under ``plan``, from ``base`` weights (default: the plan's)."""
    prep = prepare(frame, plan, share_answered=share_answered)
    return run_chain(prep, prep.base if base is None else np.asarray(base, dtype=float), detail=False).final
