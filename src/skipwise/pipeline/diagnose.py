"""The diagnose step of a run: the same analysis as ``skipwise diagnose``, from plan options.

It reuses the already computed classification instead of classifying again, and builds the
in-scope frame, auxiliaries and Little's variables with the same library function as the command
(:func:`skipwise.diagnostics.survey.survey_inputs`).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from skipwise.classify.result import Classification
from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError, did_you_mean
from skipwise.pipeline.plan import DiagnoseOptionsSpec, RunPlan
from skipwise.pipeline.reporting import Reporter
from skipwise.questionnaire import Questionnaire

__all__ = ["diagnose_step", "with_package_rates", "PACKAGE_COLUMNS"]

#: Columns :func:`with_package_rates` adds to the diagnostics summary.
PACKAGE_COLUMNS = ("package_D", "package_nonresponse_rate", "below_min_base")


def with_package_rates(rep, rates):
    """The diagnostics report with the package's rate of every item beside the model's own base.

    The models are fitted on answered + nonresponse cells (``in_scope``, of the cases
    diagnosed), so their rate ``nonresponse_rate`` has another base than the package's item
    nonresponse rate (:func:`skipwise.rates.item_rates`: of D, every cell in universe
    excluding breakoff and left_blank, over the whole file).  Both are kept, each with its
    base; ``below_min_base`` marks items whose D is under the minimum base ("too few to judge").
    """
    import dataclasses

    t = rates.table(False)
    s = rep.summary.copy()
    known = s["item"].isin(t.index)
    for col, src in zip(PACKAGE_COLUMNS, ("D", "nonresponse_rate", "below_min_base")):
        s[col] = s["item"].map(t[src]).where(known)
    s["below_min_base"] = s["below_min_base"].fillna(False).astype(bool)
    return dataclasses.replace(rep, summary=s)


def _unknown(names: list[str], valid: list[str], what: str, plan: RunPlan, key: str) -> list[Problem]:
    return [Problem(code=ProblemCode.UNKNOWN_NAME, category=Category.USAGE, item=n, message=what,
                    file=str(plan.file), line=plan.line("diagnose", key), hint=did_you_mean(n, valid))
            for n in names if n not in valid]


def diagnose_step(data: pd.DataFrame, q: Questionnaire, cl: Classification, plan: RunPlan, target: Path,
                  reporter: Reporter):
    """Run the diagnostics the plan asks for and write the workbook to ``target``.

    Returns the :class:`~skipwise.diagnostics.DiagnosticsReport`.

    References
    ----------
    Little, R. J. A. (1988). A test of missing completely at random for multivariate data with
    missing values. *JASA* 83(404), 1198-1202 (the test itself lives in ``skipwise.diagnostics``).
    """
    from skipwise.diagnostics import SuggestionThresholds
    from skipwise.diagnostics.report import DiagnoseOptions, run_diagnostics
    from skipwise.diagnostics.survey import check_unit_auxiliaries, sensitivity_problem, survey_inputs
    from skipwise.diagnostics.workbook import write_diagnostics_workbook

    o: DiagnoseOptionsSpec = plan.diagnose  # type: ignore[assignment]
    items = list(q.item_names)
    columns = [str(c) for c in data.columns]
    problems = (_unknown(list(o.items or ()), items, "not an item of the questionnaire", plan, "items")
                + _unknown(list(o.little_items or ()), items, "not an item of the questionnaire", plan, "little_items")
                + _unknown([o.sensitivity] if o.sensitivity else [], items, "not an item of the questionnaire",
                           plan, "sensitivity")
                + _unknown([o.weight] if o.weight else [], columns, "weight: not a column of the data", plan, "weight")
                + _unknown([o.response] if o.response else [], columns, "response: not a column of the data", plan,
                           "response")
                + _unknown(list(o.aux or ()), columns + items, "auxiliary is neither a data column nor an item",
                           plan, "aux")
                + _unknown(list(o.add_aux or ()), columns + items, "auxiliary is neither a data column nor an item",
                           plan, "add_aux"))
    if o.aux is not None and o.add_aux:
        problems.append(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE, file=str(plan.file),
                                line=plan.line("diagnose", "add_aux"),
                                message="'add_aux' adds to the default auxiliaries; with 'aux' there are none",
                                hint="list every auxiliary under 'aux', or use 'add_aux' alone"))
    if o.sensitivity and (bad := sensitivity_problem(q, o.sensitivity, file=str(plan.file),
                                                     line=plan.line("diagnose", "sensitivity"))):
        problems.append(bad)
    if o.threshold is not None and o.sensitivity is None:
        problems.append(Problem(code=ProblemCode.MISSING_KEY, category=Category.USAGE, file=str(plan.file),
                                line=plan.line("diagnose", "threshold"), message="'threshold' needs 'sensitivity'",
                                hint="name the item whose mean the threshold is about"))
    if problems:
        raise SkipwiseError(problems)

    rows = resp_ind = None
    if o.response is not None:
        wanted = [str(v) for v in (o.responded or ("1",))]
        col = data[o.response]
        nums = pd.to_numeric(col, errors="coerce")
        resp_ind = col.astype(str).str.strip().isin(wanted) | nums.isin(
            pd.to_numeric(pd.Series(wanted), errors="coerce").dropna())
        rows = resp_ind
        if o.aux:
            check_unit_auxiliaries(data, q, list(o.aux), resp_ind)
        reporter.info(f"unit respondents: {int(rows.sum()):,} of {len(rows):,}")
    inputs = survey_inputs(data, q, classification=cl, items=o.items, aux=o.aux, little_items=o.little_items,
                           rows=rows, exclude=[c for c in (o.weight, o.response) if c], add_aux=o.add_aux)
    reporter.info("auxiliaries: " + ", ".join(map(str, inputs.aux.columns)))
    if inputs.aux_left_out:
        reporter.info("not used as auxiliaries: " + ", ".join(inputs.aux_left_out)
                      + " (add them with diagnose.add_aux to use them)")
    mf, aux = inputs.mframe, inputs.aux
    weights = None
    if o.weight:
        weights = pd.to_numeric(data[o.weight], errors="coerce").astype(float)
        if weights.isna().all():
            raise SkipwiseError(Problem(code=ProblemCode.BAD_DATA, category=Category.DATA, item=o.weight,
                                        file=str(plan.file), line=plan.line("diagnose", "weight"),
                                        message="weight column holds no numbers"))
    opts = DiagnoseOptions(
        items=o.items, little_items=inputs.little_items, categorical=o.categorical,
        sensitivity_item=o.sensitivity, threshold=o.threshold, deltas=o.deltas, alpha=o.alpha, adjust=o.adjust,
        thresholds=SuggestionThresholds(low_rate=o.low_rate, high_rate=o.high_rate, alpha=o.alpha,
                                        auc_weak=o.auc_weak, auc_strong=o.auc_strong))
    todo = list(o.items or mf.items)
    with reporter.progress("diagnosing", len(todo) + 2) as advance:
        rep = run_diagnostics(mf, aux, options=opts, weights=weights, response=resp_ind,
                              progress=lambda _label: advance(1))
    from skipwise.rates import item_rates

    rep = with_package_rates(rep, item_rates(cl, min_base=plan.min_base))
    write_diagnostics_workbook(rep, target, overwrite=True)
    if rep.little is not None:
        p = "n/a" if np.isnan(rep.little.p_value) else f"{rep.little.p_value:.4g}"
        reporter.info(f"Little's MCAR test: d² = {rep.little.statistic:.2f}, df = {rep.little.df}, p = {p}")
    else:
        reporter.info("Little's MCAR test: not run (see the workbook's notes)")
    return rep
