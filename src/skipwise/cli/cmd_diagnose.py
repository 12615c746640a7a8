"""`skipwise diagnose`: missingness-mechanism diagnostics as an Excel workbook."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Optional

import numpy as np
import pandas as pd
import typer

from skipwise.cli.app import app, fail
from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError, did_you_mean

_CAUTION = ("Caution: no test on the observed data can tell data missing at random from data missing "
            "not at random (MNAR); weights and imputation do not repair MNAR. Files hold respondents' "
            "answers: follow your organization's methodology standards and data protection rules.")


def _names(values: list[str] | None) -> list[str] | None:
    """Accept repeated options and comma-separated lists alike."""
    if not values:
        return None
    return [n.strip() for v in values for n in str(v).split(",") if n.strip()]


def _numeric_column(data: pd.DataFrame, col: str, what: str) -> pd.Series:
    if col not in data.columns:
        raise SkipwiseError(Problem(code=ProblemCode.MISSING_COLUMN, category=Category.USAGE, item=col,
                                    message=f"{what} column not in the data",
                                    hint=did_you_mean(col, map(str, data.columns))))
    s = pd.to_numeric(data[col], errors="coerce")
    if s.isna().all():
        raise SkipwiseError(Problem(code=ProblemCode.BAD_DATA, category=Category.DATA, item=col,
                                    message=f"{what} column holds no numbers"))
    return s.astype(float)


_HELP = (
    "Diagnose the missingness mechanism of every item, over in-scope cells only.\n\n"
    "Legitimate skips never count as missing. The workbook holds Little's MCAR test, "
    "respondent/nonrespondent comparisons and logistic models on the auxiliaries (odds ratios, AUC), "
    "R-indicators with partial indicators, an optional delta-adjustment sensitivity analysis and "
    "handling suggestions with their evidence.\n\n"
    "Caution: no test proves data missing at random, and weights and imputation do not repair data "
    "missing not at random; follow your organization's methodology standards and data protection rules."
)


@app.command("diagnose", help=_HELP)
def diagnose(
    data_path: Annotated[Path, typer.Argument(metavar="DATA", help="Survey data file (.sav, .zsav, .dta, .csv, .xlsx, .parquet, .sas7bdat, .xpt).")],
    questionnaire: Annotated[Path, typer.Option("-q", "--questionnaire", help="Questionnaire file (YAML).")],
    out: Annotated[Optional[Path], typer.Option("-o", "--out", help="Workbook to write (.xlsx; default diagnostics.xlsx).")] = None,
    output_old: Annotated[Optional[Path], typer.Option("--output", hidden=True)] = None,
    items: Annotated[Optional[list[str]], typer.Option("--items", help="Items to diagnose (repeat or comma-separate; default: all).")] = None,
    aux: Annotated[Optional[list[str]], typer.Option("--aux", help="Auxiliary columns known for every case (repeat or comma-separate; default: suitable context columns plus the items age and sex if asked of everyone with at most 2% nonresponse; with --response, only what is known for every sampled case). Replaces the defaults: use --add-aux to add to them. An item may be named: its answers are used.")] = None,
    add_aux: Annotated[Optional[list[str]], typer.Option("--add-aux", help="Auxiliary columns or items used in addition to the default ones (repeat or comma-separate).")] = None,
    categorical: Annotated[Optional[list[str]], typer.Option("--categorical", help="Auxiliaries to treat as categorical (default: text columns and whole-number columns with at most 10 values).")] = None,
    little_items: Annotated[Optional[list[str]], typer.Option("--little-items", help="Variables of Little's test (default: numeric items with nonresponse whose common scope keeps at least half the cases, leaving out near-duplicates with R² ≥ 0.99).")] = None,
    weight: Annotated[Optional[str], typer.Option("--weight", help="Design-weight column for the R-indicators and the sensitivity analysis.")] = None,
    response: Annotated[Optional[str], typer.Option("--response", help="Column telling unit respondents from nonrespondents; adds a unit-level R-indicator and restricts item diagnostics to respondents.")] = None,
    responded: Annotated[Optional[list[str]], typer.Option("--responded", help="Values of --response that mean 'responded' (default: 1).")] = None,
    sensitivity: Annotated[Optional[str], typer.Option("--sensitivity", help="Item whose mean gets a delta-adjustment sensitivity analysis.")] = None,
    threshold: Annotated[Optional[float], typer.Option("--threshold", help="Conclusion to test in the sensitivity analysis: is the mean above or below this value?")] = None,
    delta: Annotated[Optional[list[float]], typer.Option("--delta", help="Shift(s) δ to try (repeat; default: a grid around the tipping point).")] = None,
    low_rate: Annotated[float, typer.Option(help="Nonresponse rate below which an item counts as little affected (common practice, no source).")] = 0.05,
    high_rate: Annotated[float, typer.Option(help="Rate from which dropping the variable is worth considering (common practice, no source).")] = 0.40,
    alpha: Annotated[float, typer.Option(help="Significance level for evidence against MCAR (applied to the adjusted p-values).")] = 0.05,
    adjust: Annotated[str, typer.Option(help="Adjustment of the items' p-values for testing many items: holm (family-wise error, any dependence), bh (false discovery rate) or none.")] = "holm",
    auc_weak: Annotated[float, typer.Option(help="AUC from which a flagged item's effect is called moderate (effect size only; it never flags an item).")] = 0.60,
    auc_strong: Annotated[float, typer.Option(help="AUC from which a flagged item's association is called strong (effect size only).")] = 0.70,
    min_base: Annotated[int, typer.Option(
        "--min-base", min=0, help="Minimum cells in universe (D, unweighted) for an item's rate to be judged and "
                                  "ranked; items under it are shown but marked (default 30: common practice, "
                                  "no source).")] = 30,
    overwrite: Annotated[bool, typer.Option("--overwrite", help="Replace the output file if it exists.")] = False,
) -> None:
    """Diagnose the missingness mechanism (help text: ``_HELP``)."""
    from skipwise.cli.common import out_option

    output = out_option(out, output_old, Path("diagnostics.xlsx"))
    try:
        from skipwise.cli.common import classify_with_progress
        from skipwise.diagnostics import SuggestionThresholds
        from skipwise.diagnostics.report import DiagnoseOptions, run_diagnostics
        from skipwise.diagnostics.survey import check_unit_auxiliaries, sensitivity_problem, survey_inputs
        from skipwise.diagnostics.workbook import write_diagnostics_workbook
        from skipwise.io import read_survey
        from skipwise.io.atomic import check_writable
        from skipwise.questionnaire import load_questionnaire

        check_writable(output, overwrite=overwrite, inputs=(data_path, questionnaire))
        if threshold is not None and sensitivity is None:
            raise SkipwiseError(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE,
                                        message="--threshold needs --sensitivity ITEM",
                                        hint="name the item whose mean the threshold is about"))
        if aux and add_aux:
            raise SkipwiseError(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE,
                                        message="--add-aux adds to the default auxiliaries; with --aux there are none",
                                        hint="list every auxiliary with --aux, or use --add-aux alone"))
        q = load_questionnaire(questionnaire)
        named = [*(_names(items) or []), *(_names(little_items) or []), *([sensitivity] if sensitivity else [])]
        unknown = [Problem(code=ProblemCode.UNKNOWN_NAME, category=Category.USAGE, item=n,
                           message="not an item of the questionnaire", file=str(questionnaire),
                           hint=did_you_mean(n, q.item_names)) for n in named if n not in q.item_names]
        if unknown:
            raise SkipwiseError(unknown)
        if sensitivity and (bad := sensitivity_problem(q, sensitivity, file=str(questionnaire))):
            raise SkipwiseError(bad)
        data = read_survey(data_path)
        rows = None
        resp_ind = None
        if response is not None:
            if response not in data.columns:
                raise SkipwiseError(Problem(code=ProblemCode.MISSING_COLUMN, category=Category.USAGE, item=response,
                                            message="response column not in the data",
                                            hint=did_you_mean(response, map(str, data.columns))))
            wanted = responded or ["1"]
            col = data[response]
            as_text = col.astype(str).str.strip()
            nums = pd.to_numeric(col, errors="coerce")
            resp_ind = as_text.isin(wanted) | nums.isin(pd.to_numeric(pd.Series(wanted), errors="coerce").dropna())
            rows = resp_ind
            if aux:
                check_unit_auxiliaries(data, q, _names(aux), resp_ind)
            typer.echo(f"Unit respondents: {int(rows.sum()):,} of {len(rows):,}", err=True)
        typer.echo(f"Classifying {len(data):,} cases against {len(q.item_names)} items ...", err=True)
        cls = classify_with_progress(data, q)

        chosen = _names(items)
        inputs = survey_inputs(data, q, classification=cls, items=chosen, aux=_names(aux),
                               little_items=_names(little_items), rows=rows,
                               exclude=[c for c in (weight, response) if c], add_aux=_names(add_aux))
        typer.echo("Auxiliaries: " + ", ".join(map(str, inputs.aux.columns))
                   + (" (as named with --aux)" if aux else ""), err=True)
        if inputs.aux_left_out:
            typer.echo("Not used as auxiliaries: " + ", ".join(inputs.aux_left_out)
                       + " (add them with --add-aux to use them).", err=True)
        mf, aux_frame, l_items = inputs.mframe, inputs.aux, list(inputs.little_items)
        w = _numeric_column(data, weight, "weight") if weight else None
        opts = DiagnoseOptions(
            items=tuple(chosen) if chosen else None, little_items=tuple(l_items),
            categorical=tuple(_names(categorical)) if categorical else None,
            sensitivity_item=sensitivity, threshold=threshold, deltas=tuple(delta) if delta else None,
            alpha=alpha, adjust=adjust, thresholds=SuggestionThresholds(low_rate=low_rate, high_rate=high_rate, alpha=alpha,
                                                         auc_weak=auc_weak, auc_strong=auc_strong),
        )
        todo = list(chosen or mf.items)
        with typer.progressbar(length=len(todo) + 2, label="Diagnosing", file=None) as bar:
            # auxiliaries, weights and the response indicator cover every sampled case (the unit
            # R-indicator needs the nonrespondents); item analyses use only the rows of ``mf``
            rep = run_diagnostics(mf, aux_frame, options=opts, weights=w, response=resp_ind,
                                  progress=lambda _label: bar.update(1))
        from skipwise.pipeline.diagnose import with_package_rates
        from skipwise.rates import item_rates

        rep = with_package_rates(rep, item_rates(cls, min_base=min_base))
        write_diagnostics_workbook(rep, output, overwrite=overwrite)
    except SkipwiseError as err:
        fail(err)
        return
    _print_summary(rep, output)


def _print_summary(rep, output: Path) -> None:
    lr = rep.little
    if lr is not None:
        p = "n/a" if np.isnan(lr.p_value) else f"{lr.p_value:.4g}"
        typer.echo(f"Little's MCAR test: d² = {lr.statistic:.2f}, df = {lr.df}, p = {p} "
                   f"({lr.n_cases:,} cases, {lr.n_patterns} patterns, {lr.n_variables} variables)")
    else:
        typer.echo("Little's MCAR test: not run (see the workbook's notes)")
    from skipwise.rates import format_rate

    ranked = rep.summary[~rep.summary["below_min_base"]] if "below_min_base" in rep.summary else rep.summary
    key = "package_nonresponse_rate" if "package_nonresponse_rate" in ranked else "nonresponse_rate"
    s = ranked.sort_values(key, ascending=False, kind="stable").head(10)
    typer.echo("Highest item nonresponse (package rate of D; the models' base is answered + nonresponse cells):")
    for r in s.itertuples():
        auc = "" if pd.isna(r.auc) else f", AUC {r.auc:.2f}"
        p = "" if pd.isna(r.model_p_adjusted) else f", adjusted p {r.model_p_adjusted:.2g}"
        flag = "FLAGGED (evidence against MCAR)" if r.flagged else r.association
        pkg = (f"{format_rate(r.package_nonresponse_rate):>6} of D = {int(r.package_D):,}; "
               if key == "package_nonresponse_rate" and not pd.isna(r.package_D) else "")
        typer.echo(f"  {r.item:<20} {pkg}model base {r.in_scope:,}{p}{auc}; {flag}; {r.suggested}")
    small = int(rep.summary["below_min_base"].sum()) if "below_min_base" in rep.summary else 0
    if small:
        typer.echo(f"  ({small} item(s) with D under the minimum base are not ranked)")
    if rep.sensitivity is not None and rep.sensitivity.tipping_point is not None:
        sv = rep.sensitivity
        typer.echo(f"Sensitivity of {sv.item}: the mean is {sv.conclusion} {sv.threshold:g} unless nonrespondents "
                   f"differ by δ* = {sv.tipping_point:.4g} ({sv.tipping_point_sd:.2f} SD)")
    if rep.notes:
        typer.echo(f"{len(rep.notes)} note(s) in the workbook's 'Read me' sheet.")
    typer.echo(f"Wrote {output}")
    typer.echo(_CAUTION)
