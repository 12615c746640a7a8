"""The diagnose step of a run: the same analysis as ``skipwise diagnose``, from plan options.

It reuses the already computed classification instead of classifying again.
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

__all__ = ["diagnose_step"]


def _unknown(names: list[str], valid: list[str], what: str, plan: RunPlan, key: str) -> list[Problem]:
    return [Problem(code=ProblemCode.UNKNOWN_NAME, category=Category.USAGE, item=n, message=what,
                    file=str(plan.file), line=plan.line("diagnose", key), hint=did_you_mean(n, valid))
            for n in names if n not in valid]


def _values(data: pd.DataFrame, q: Questionnaire, cl: Classification) -> pd.DataFrame:
    """Analysis values of every single-column item (codes and skips made blank)."""
    from skipwise.questionnaire import ItemType

    values = pd.DataFrame(np.nan, index=data.index, columns=list(q.item_names))
    av = cl.analysis_values(data)
    for name in q.item_names:
        item = q.item(name)
        if item.type is not ItemType.MULTI and len(item.columns) == 1:
            values[name] = av[item.columns[0]]
    return values


def diagnose_step(data: pd.DataFrame, q: Questionnaire, cl: Classification, plan: RunPlan, target: Path,
                  reporter: Reporter):
    """Run the diagnostics the plan asks for and write the workbook to ``target``.

    Returns the :class:`~skipwise.diagnostics.DiagnosticsReport`.

    References
    ----------
    Little, R. J. A. (1988). A test of missing completely at random for multivariate data with
    missing values. *JASA* 83(404), 1198-1202 (the test itself lives in ``skipwise.diagnostics``).
    """
    from skipwise.classify import statuses as S
    # The choice of default auxiliaries is the diagnose command's; shared, not copied.
    from skipwise.cli.cmd_diagnose import default_auxiliaries
    from skipwise.diagnostics import SuggestionThresholds, missingness_frame
    from skipwise.diagnostics.report import DiagnoseOptions, choose_little_items, run_diagnostics
    from skipwise.diagnostics.workbook import write_diagnostics_workbook
    from skipwise.questionnaire import ItemType

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
                           plan, "aux"))
    if o.threshold is not None and o.sensitivity is None:
        problems.append(Problem(code=ProblemCode.MISSING_KEY, category=Category.USAGE, file=str(plan.file),
                                line=plan.line("diagnose", "threshold"), message="'threshold' needs 'sensitivity'",
                                hint="name the item whose mean the threshold is about"))
    if problems:
        raise SkipwiseError(problems)

    values = _values(data, q, cl)
    rows = pd.Series(True, index=data.index)
    resp_ind = None
    if o.response is not None:
        wanted = [str(v) for v in (o.responded or ("1",))]
        col = data[o.response]
        nums = pd.to_numeric(col, errors="coerce")
        resp_ind = col.astype(str).str.strip().isin(wanted) | nums.isin(
            pd.to_numeric(pd.Series(wanted), errors="coerce").dropna())
        rows = resp_ind
        reporter.info(f"unit respondents: {int(rows.sum()):,} of {len(rows):,}")
    mf = missingness_frame(values.loc[rows], cl.universe_mask().loc[rows], cl.nonresponse_mask().loc[rows],
                           answered_mask=cl.mask(S.ANSWERED).loc[rows])
    aux_names = list(o.aux) if o.aux else None
    if aux_names is None:
        context = [c for c in q.context if c in data.columns and c not in (q.case_id, o.weight, o.response)]
        aux_names, left = default_auxiliaries(data, context)
        if left:
            reporter.info("context columns not used as auxiliaries: " + ", ".join(left)
                          + " (name them in diagnose.aux to use them)")
    if not aux_names:
        raise SkipwiseError(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE, file=str(plan.file),
                                    line=plan.line("diagnose"), message="no auxiliary variables to compare "
                                    "respondents with", hint="name fully observed columns in diagnose.aux"))
    aux = pd.DataFrame({a: (values[a] if a in q.item_names else data[a]) for a in aux_names}, index=data.index)
    aux = aux.apply(lambda s: s if pd.api.types.is_numeric_dtype(s) else s.astype(str).where(s.notna()))
    weights = None
    if o.weight:
        weights = pd.to_numeric(data[o.weight], errors="coerce").astype(float)
        if weights.isna().all():
            raise SkipwiseError(Problem(code=ProblemCode.BAD_DATA, category=Category.DATA, item=o.weight,
                                        file=str(plan.file), line=plan.line("diagnose", "weight"),
                                        message="weight column holds no numbers"))
    if o.little_items:
        l_items = list(o.little_items)
    else:
        numeric = [n for n in (o.items or q.item_names) if q.item(n).type in (ItemType.INTEGER, ItemType.NUMBER)]
        l_items = choose_little_items(mf, [n for n in numeric if n in mf.items]) if numeric else []
    opts = DiagnoseOptions(
        items=o.items, little_items=tuple(l_items), categorical=o.categorical,
        sensitivity_item=o.sensitivity, threshold=o.threshold, deltas=o.deltas, alpha=o.alpha,
        thresholds=SuggestionThresholds(low_rate=o.low_rate, high_rate=o.high_rate, alpha=o.alpha,
                                        auc_weak=o.auc_weak, auc_strong=o.auc_strong))
    todo = list(o.items or mf.items)
    with reporter.progress("diagnosing", len(todo) + 2) as advance:
        rep = run_diagnostics(mf, aux, options=opts, weights=weights, response=resp_ind,
                              progress=lambda _label: advance(1))
    write_diagnostics_workbook(rep, target, overwrite=True)
    if rep.little is not None:
        p = "n/a" if np.isnan(rep.little.p_value) else f"{rep.little.p_value:.4g}"
        reporter.info(f"Little's MCAR test: d² = {rep.little.statistic:.2f}, df = {rep.little.df}, p = {p}")
    else:
        reporter.info("Little's MCAR test: not run (see the workbook's notes)")
    return rep
