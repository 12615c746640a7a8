"""The test sheets of the diagnostics workbook: MCAR test, patterns, comparisons, models, propensities."""

from __future__ import annotations

import re
from typing import Any

import numpy as np
import pandas as pd
from openpyxl.chart import BarChart, Reference

from skipwise import sheetstyle as st
from skipwise.diagnostics.report import DiagnosticsReport
from skipwise.diagnostics.suggest import TOO_FEW

__all__ = ["association_words", "SEPARATION_WORDS", "rate_chart", "little_sheets", "comparisons_sheets",
           "models_sheet", "representativeness_sheet", "sensitivity_sheet", "code_text"]

_ASSOCIATION = {"none": "no nonresponse", "none detected": "not detected", "weak": "yes (small effect)",
                "strong": "yes (large effect)", "untested": "not tested (too few nonrespondents)",
                TOO_FEW: "too few to judge"}
SEPARATION_WORDS = {"none": "", "quasi-complete": "quasi-complete", "complete": "complete"}
_FLOAT_CODE = re.compile(r"^(-?\d+)\.0$")
_FLOAT_IN_TEXT = re.compile(r"=(-?\d+)\.0\b")


def association_words(level: object) -> str:
    return _ASSOCIATION.get(str(level), str(level))


def code_text(value: object) -> str:
    """A category as text, codes as integers (``1.0`` -> ``1``, ``district=2.0`` -> ``district=2``)."""
    text = str(value)
    if "=" in text:
        head, _, tail = text.rpartition("=")
        return f"{head}={code_text(tail)}"
    m = _FLOAT_CODE.match(text)
    return m.group(1) if m else text


def rate_chart(ws: Any, ref: st.TableRef, title: str, axis: str) -> BarChart:
    """Horizontal bars of a rate column, item names as categories, highest first."""
    chart = BarChart()
    chart.type = "bar"
    chart.style = 10
    chart.title = title
    chart.y_axis.title = axis
    chart.x_axis.title = "Item"
    chart.y_axis.numFmt = "0%"
    chart.y_axis.majorGridlines = None
    chart.x_axis.scaling.orientation = "maxMin"
    chart.legend = None
    rate_col = ref.columns["Nonresponse rate"]
    chart.add_data(Reference(ws, min_col=rate_col, min_row=ref.header_row, max_row=ref.last_row), titles_from_data=True)
    chart.set_categories(Reference(ws, min_col=ref.columns["Item"], min_row=ref.first_row, max_row=ref.last_row))
    chart.x_axis.delete = False
    chart.y_axis.delete = False
    chart.width, chart.height = 16, max(6.0, 0.75 * (ref.last_row - ref.first_row + 1) + 3)
    return chart


def little_sheets(wb: Any, rep: DiagnosticsReport) -> None:
    """The test's result first, in words; then the patterns it compared (a marked cell = nonresponse)."""
    r = rep.little
    src = "Little, R. J. A. (1988). A test of missing completely at random for multivariate data with missing " \
          "values. JASA 83(404), 1198-1202."
    s = st.SheetWriter(wb, "MCAR test", title="Is item nonresponse completely at random? Little's test",
                       explanation=("One chi-square test over several items at once: do the cases with each "
                                    "pattern of nonresponse differ in their answered values? Base: the cases in "
                                    "the test (" + rep.little_scope + ")."), source=src)
    if r is None:
        s.line("Result: not run", "sub")
        for p, _i, m in rep.notes:
            if p == "Little's test":
                s.note(m)
        s.close()
        return
    alpha = rep.alpha
    sig = np.isfinite(r.p_value) and r.p_value < alpha
    p_text = "<0.001" if r.p_value < 0.001 else f"{r.p_value:.3f}"
    if not np.isfinite(r.p_value):
        verdict = "Result: the test could not give a p-value (see the notes below)."
    elif sig:
        verdict = (f"Result: evidence against MCAR (p = {p_text}, below {alpha:g}). Nonresponse on these items is "
                   "related to values that were answered: treat them as at best missing at random (MAR) and use "
                   "the auxiliaries in weighting or imputation; do not rely on complete cases.")
    else:
        verdict = (f"Result: no evidence against MCAR (p = {p_text}, not below {alpha:g}). This is not proof of "
                   "MCAR: the test may lack power, and it cannot see nonresponse that depends on the missing "
                   "value itself (MNAR).")
    s.note(verdict, "verdict")
    s.blank()
    s.pairs([("p-value", r.p_value, st.P_VALUE), ("Chi-square statistic (d\u00b2)", r.statistic, "#,##0.0"),
             ("Degrees of freedom", r.df, st.INT), ("Cases in the test", r.n_cases, st.INT),
             ("Cases left out (every variable missing)", r.n_dropped_all_missing, st.INT),
             ("Patterns of nonresponse", r.n_patterns, st.INT), ("Variables", r.n_variables, st.INT),
             ("Estimation converged", "yes" if r.converged else f"no ({r.iterations} iterations)", None)],
            heading="The test")
    pat = r.patterns
    variables = [str(v) for v in r.mean.index]
    missing = {v: int(pat.loc[pat[v] == 0, "n_cases"].sum()) for v in variables if v in pat.columns}
    s.blank()
    s.table(pd.DataFrame({"Variable": list(missing),
                          "Cases answered": [r.n_cases - m for m in missing.values()],
                          "Nonresponse": list(missing.values()),
                          "Nonresponse share": [m / r.n_cases if r.n_cases else None for m in missing.values()]}),
            formats={"Cases answered": st.INT, "Nonresponse": st.INT, "Nonresponse share": st.PCT},
            heading="Variables in the test (shares of the test's cases)")
    s.blank()
    for text in r.notes:
        s.note(text)
    s.close()

    wp = st.SheetWriter(wb, "Patterns", title="Patterns of item nonresponse in Little's test",
                        explanation=(f"{st.MARK} marks item nonresponse, as in the item report; a blank square is an "
                                     "answer. Cases and shares are over the test's cases; the contribution is the "
                                     "pattern's part of the chi-square statistic (large: the pattern's cases differ)."),
                        source=src)
    grid = pd.DataFrame({"Pattern": pat["pattern"], "Cases": pat["n_cases"],
                         "Share of cases": pat["n_cases"] / max(r.n_cases, 1),
                         "Items with nonresponse": len(variables) - pat["n_observed"],
                         "Contribution to d\u00b2": pat["d2_contribution"]})
    for v in variables:
        grid[v] = pat[v].to_numpy() == 0
    wp.table(grid, formats={"Pattern": st.INT, "Cases": st.INT, "Share of cases": st.PCT,
                            "Items with nonresponse": st.INT, "Contribution to d\u00b2": "#,##0.0"},
             headers={v: v for v in variables}, rotate=variables, marks=variables, freeze_col=2)
    wp.close()


def _long(items: dict, attr: str, keep: list[str]) -> pd.DataFrame:
    frames = [getattr(v, attr).assign(item=k) for k, v in items.items() if k in keep and len(getattr(v, attr))]
    if not frames:
        return pd.DataFrame()
    df = pd.concat(frames, ignore_index=True)
    return df[["item", *[c for c in df.columns if c != "item"]]]


def _judged(rep: DiagnosticsReport, base: int) -> list[str]:
    s = rep.summary
    return [str(i) for i, n, a in zip(s["item"], s["in_scope"], s["association"]) if n >= base and a != TOO_FEW]


def comparisons_sheets(wb: Any, rep: DiagnosticsReport, flagged: list[str], base: int) -> None:
    df = _long(rep.comparisons, "table", _judged(rep, base))
    if len(df):
        out = pd.DataFrame({"Item": df["item"], "Auxiliary": df["auxiliary"], "Test": df["test"],
                            "Mean, respondents": df["mean_respondents"],
                            "Mean, nonrespondents": df["mean_nonrespondents"],
                            "Standardized difference": df["std_difference"], "Cram\u00e9r's V": df["cramers_v"],
                            "Statistic": df["statistic"], "Degrees of freedom": df["df"], "p-value": df["p_value"]})
        s = st.SheetWriter(wb, "Group comparisons", title="Do item nonrespondents differ on the auxiliaries?",
                           explanation=("Per item (at least the minimum base), respondents vs item nonrespondents "
                                        "among its in-scope cases. Numeric: Welch t-test, difference = "
                                        "nonrespondents - respondents over sqrt((s\u00b2r + s\u00b2m)/2). "
                                        "Categorical: chi-square test and Cram\u00e9r's V."),
                           source="Welch 1947; Cram\u00e9r 1946.")
        s.table(out, formats={"Mean, respondents": "#,##0.0", "Mean, nonrespondents": "#,##0.0",
                              "Standardized difference": st.STAT, "Cram\u00e9r's V": st.STAT,
                              "Statistic": "#,##0.00", "Degrees of freedom": "#,##0.0", "p-value": st.P_VALUE},
                freeze_col=3)
        s.close()
    cats = _long(rep.comparisons, "categories", flagged)
    if len(cats):
        s = st.SheetWriter(wb, "Category shares", title="Category shares of the items with evidence against MCAR",
                           explanation=("Per flagged item and categorical auxiliary: the share of respondents and of "
                                        "nonrespondents in each category (each adds to 100%), and the item's "
                                        "nonresponse rate within the category (over its in-scope cases)."))
        s.table(pd.DataFrame({"Item": cats["item"], "Auxiliary": cats["auxiliary"],
                              "Category": cats["category"].map(code_text), "Respondents": cats["n_respondents"],
                              "Nonrespondents": cats["n_nonrespondents"],
                              "Share of respondents": cats["share_respondents"],
                              "Share of nonrespondents": cats["share_nonrespondents"],
                              "Nonresponse rate": cats["nonresponse_rate"]}),
                formats={"Respondents": st.INT, "Nonrespondents": st.INT, "Share of respondents": st.PCT,
                         "Share of nonrespondents": st.PCT, "Nonresponse rate": st.PCT}, freeze_col=3)
        s.close()


_ROUTINE = ("in-scope cases with a missing auxiliary were left out", "Constant or redundant (collinear) terms")


def _common(notes: list[tuple[str, ...]]) -> tuple[list[str], list[str]]:
    """Notes said once (shared by every model, or routine: left-out cases and terms) and each model's own."""
    if not notes:
        return [], []
    shared = set(notes[0]).intersection(*map(set, notes[1:]))
    routine = sorted({n for ns in notes for n in ns if _ROUTINE[1] in n and n not in shared})
    said = [n for n in notes[0] if n in shared] + routine[:3]
    own = [" ".join(n for n in ns if n not in shared and not any(r in n for r in _ROUTINE)) for ns in notes]
    return said, own


def models_sheet(wb: Any, rep: DiagnosticsReport, flagged: list[str]) -> None:
    if not rep.models:
        return
    ms = list(rep.models.values())
    shared, own = _common([m.notes for m in ms])
    verdict = [m.separation.verdict if m.separation is not None else "none" for m in ms]
    fit = pd.DataFrame({
        "Item": [m.item for m in ms], "Cases": [m.n for m in ms],
        "Left out (missing auxiliary)": [m.n_left_out for m in ms],
        "Nonrespondents": [m.n_nonresponse for m in ms],
        "AUC": [None if v == "complete" else m.auc for m, v in zip(ms, verdict)],
        "McFadden R\u00b2": [m.pseudo_r2 for m in ms], "LR statistic": [m.lr_statistic for m in ms],
        "LR df": [m.lr_df for m in ms], "LR p-value": [m.lr_p_value for m in ms],
        "Separation": [_FLOAT_IN_TEXT.sub(r"=\1", m.separation.describe("nonrespondents", "respondents"))
                       if m.separation is not None and m.separation.separated else "no" for m in ms],
        "Notes": own})
    s = st.SheetWriter(wb, "Nonresponse models", title="Logistic models of item nonresponse on the auxiliaries",
                       explanation=("One model per item over its in-scope cases with complete auxiliaries (the "
                                    "Cases column is the base). Where an auxiliary separates respondents from "
                                    "nonrespondents, the verdict replaces the odds ratios, which have no finite value."),
                       source="Hosmer, Lemeshow & Sturdivant 2013; separation: Albert & Anderson 1984.")
    for text in shared:
        s.note(text)
    ref = s.table(fit, formats={"Cases": st.INT, "Left out (missing auxiliary)": st.INT, "Nonrespondents": st.INT, "AUC": st.STAT,
                                "McFadden R\u00b2": st.STAT, "LR statistic": "#,##0.00", "LR df": st.INT,
                                "LR p-value": st.P_VALUE}, wrap=["Separation", "Notes"], freeze_col=2)
    s.width(ref.columns["Separation"], 40)
    s.width(ref.columns["Notes"], 60)
    coefs = _long(rep.models, "table", flagged)
    if len(coefs):
        s.blank()
        s.table(pd.DataFrame({"Item": coefs["item"], "Term": coefs["term"].map(code_text),
                              "Coefficient": coefs["coef"], "Std error": coefs["std_err"], "p-value": coefs["p_value"],
                              "Odds ratio": coefs["odds_ratio"], "95% low": coefs["or_low"],
                              "95% high": coefs["or_high"]}),
                formats={"Coefficient": st.STAT, "Std error": st.STAT, "p-value": st.P_VALUE,
                         "Odds ratio": st.STAT, "95% low": st.STAT, "95% high": st.STAT}, main=False,
                heading="Odds ratios of nonresponse for the items with evidence against MCAR (blank: separation)")
    s.close()


def representativeness_sheet(wb: Any, rep: DiagnosticsReport, flagged: list[str]) -> None:
    ris = list(rep.r_indicators)
    if not ris:
        return
    keep = {"unit response", *(f"response to {i}" for i in flagged)}
    s = st.SheetWriter(wb, "Representativeness", title="Response propensities: R-indicator and partial indicators",
                       explanation=("Per response (unit response, or response to an item over its in-scope cases): "
                                    "R = 1 - 2 S(p) of the estimated propensities; max. absolute bias = (1 - R)/(2 x "
                                    "mean propensity) bounds the standardized bias of a respondent mean."),
                       source="Schouten, Cobben & Bethlehem 2009 (Survey Methodology 35:101-113); Schouten, Shlomo "
                              "& Skinner 2011 (partial indicators).")
    few = {f"response to {i}" for i, a in zip(rep.summary["item"], rep.summary["association"]) if a == TOO_FEW}
    overall = pd.DataFrame({
        "Response": [r.target + (" (too few to judge)" if r.target in few else "") for r in ris], "Cases": [r.n for r in ris],
        "Left out (missing auxiliary)": [r.n_left_out for r in ris], "Responded": [r.n_responded for r in ris],
        "Response rate": [r.response_rate for r in ris], "SD of propensities": [r.sd_propensity for r in ris],
        "R-indicator": [r.r_indicator for r in ris], "Max. absolute bias": [r.max_abs_bias for r in ris],
        "Separation": ["no" if r.separation is None or not r.separation.separated else r.separation.verdict
                       for r in ris],
        "Standard errors": [r.model_se for r in ris]})
    s.table(overall, formats={"Cases": st.INT, "Left out (missing auxiliary)": st.INT, "Responded": st.INT, "Response rate": st.PCT,
                              "SD of propensities": "0.0000", "R-indicator": st.STAT, "Max. absolute bias": st.STAT},
            freeze_col=2)
    wide = pd.DataFrame([{"Response": r.target, **dict(zip(r.partial["variable"], r.partial["partial_unconditional"]))}
                         for r in ris])
    s.blank()
    s.table(wide, formats={c: "0.0000" for c in wide.columns[1:]}, headers={c: c for c in wide.columns[1:]},
            main=False, heading="Unconditional partial indicator of each variable (larger: more of the lack of "
                                "representativeness)")
    sel = [r for r in ris if r.target in keep]
    if sel:
        cats = pd.concat([r.categories.assign(response=r.target) for r in sel], ignore_index=True)
        s.blank()
        s.table(pd.DataFrame({"Response": cats["response"], "Variable": cats["variable"],
                              "Category": cats["category"].map(code_text), "Cases": cats["n"], "Share": cats["share"],
                              "Response rate": cats["response_rate"], "Mean propensity": cats["mean_propensity"],
                              "Partial indicator": cats["partial_unconditional"]}),
                formats={"Cases": st.INT, "Share": st.PCT, "Response rate": st.PCT, "Mean propensity": st.STAT,
                         "Partial indicator": "0.0000"}, main=False,
                heading="By category, for unit response and the items with evidence against MCAR "
                        "(negative: under-represented among respondents)")
        coefs = pd.concat([r.model.assign(response=r.target, se=r.model_se) for r in sel if len(r.model)],
                          ignore_index=True) if any(len(r.model) for r in sel) else pd.DataFrame()
        if len(coefs):
            s.blank()
            s.table(pd.DataFrame({"Response": coefs["response"], "Term": coefs["term"].map(code_text),
                                  "Coefficient": coefs["coef"], "Std error": coefs["std_err"],
                                  "p-value": coefs["p_value"], "Odds ratio": coefs["odds_ratio"],
                                  "95% low": coefs["or_low"], "95% high": coefs["or_high"],
                                  "Standard errors": coefs["se"]}),
                    formats={"Coefficient": st.STAT, "Std error": st.STAT, "p-value": st.P_VALUE,
                             "Odds ratio": st.STAT, "95% low": st.STAT, "95% high": st.STAT}, main=False,
                    heading="Propensity models (odds ratios of responding, 95% limits; blank: separation)")
    s.close()


def sensitivity_sheet(wb: Any, rep: DiagnosticsReport) -> None:
    d = rep.sensitivity
    if d is None:
        return
    s = st.SheetWriter(wb, "Sensitivity", title=f"Sensitivity of the mean of {d.item} to nonresponse not at random",
                       explanation=("Each nonrespondent is given the respondent mean plus delta; the estimate is the "
                                    "mean over all in-scope cases. Whether a delta as large as the tipping point is "
                                    "plausible is a question of subject knowledge."),
                       source="Delta adjustment: van Buuren 2018, Flexible Imputation of Missing Data, sec. 3.8; "
                              "Little & Rubin 2019.")
    fmt = st.stat_format([d.respondent_mean, d.threshold])
    s.pairs([("Item", d.item, None), ("Respondents", d.n_respondents, st.INT),
             ("Nonrespondents", d.n_nonrespondents, st.INT),
             ("Nonrespondent share (weighted)", d.weight_nonrespondents, st.PCT),
             ("Respondent mean", d.respondent_mean, fmt), ("Respondent SD", d.respondent_sd, fmt),
             ("Threshold", d.threshold, fmt),
             ("Conclusion at delta = 0", f"mean {d.conclusion} the threshold" if d.conclusion else "(no threshold)",
              None),
             ("Tipping point delta", d.tipping_point, fmt), ("Tipping point in respondent SDs", d.tipping_point_sd,
                                                             "0.00")])
    s.blank()
    s.table(d.grid, formats={"delta": fmt, "delta_sd": "0.00", "estimate": fmt},
            headers={"delta": "Delta", "delta_sd": "Delta in respondent SDs", "estimate": "Estimated mean",
                     "conclusion": "Conclusion"}, main=True)
    s.close()
