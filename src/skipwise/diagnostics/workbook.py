"""Write a :class:`DiagnosticsReport` to an Excel workbook (openpyxl)."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pandas as pd
from openpyxl import Workbook
from openpyxl.chart import BarChart, LineChart, Reference
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter

from skipwise.diagnostics.little import LIMITS
from skipwise.diagnostics.report import DiagnosticsReport
from skipwise.diagnostics.suggest import CAUTIONS
from skipwise.io.atomic import atomic_output

__all__ = ["write_diagnostics_workbook", "SHEETS"]

SHEETS = ("Read me", "Items at a glance", "MCAR test", "Patterns", "Group comparisons",
          "Category shares", "Nonresponse models", "Representativeness", "Sensitivity", "Suggestions")

_BOLD = Font(bold=True)
_TITLE = Font(bold=True, size=14)
_HEAD_FILL = PatternFill("solid", fgColor="DDE4EE")
_WRAP = Alignment(wrap_text=True, vertical="top")

DEFINITIONS = (
    ("In scope", "A cell in the item's universe (routing says the question applied) that holds either an "
                 "answer or item nonresponse. Legitimate skips are never counted as missing; break-offs, "
                 "invalid values and wrong codes are set aside and counted apart."),
    ("Item nonresponse", "In scope, with a nonresponse code (e.g. don't know, refused) or an unexplained blank."),
    ("MCAR", "Missing completely at random: nonresponse is unrelated to any variable, observed or not."),
    ("MAR", "Missing at random: nonresponse depends only on observed variables (e.g. the auxiliaries)."),
    ("MNAR", "Missing not at random: nonresponse depends on the unobserved value itself. No test on the "
             "observed data can detect it."),
    ("Little's test", "Chi-square test of MCAR comparing each missingness pattern's means with the EM estimates "
                      "(Little 1988, JASA 83:1198–1202). Assumes multivariate normality."),
    ("AUC", "Area under the ROC curve of the nonresponse model: 0.5 = auxiliaries do not tell respondents from "
            "nonrespondents; 1 = they tell them apart perfectly. The size of an effect, not a test: with few "
            "nonrespondents a high AUC can arise by chance."),
    ("Flagged", "Evidence against MCAR for one item: at least the minimum number of nonrespondents, and the "
                "likelihood-ratio p-value of its nonresponse model on the auxiliaries, adjusted for the number "
                "of items tested (Holm 1979 by default; Benjamini & Hochberg 1995 on request), is below alpha."),
    ("R-indicator", "R = 1 − 2·S(ρ̂), S the standard deviation of estimated response propensities (Schouten, "
                    "Cobben & Bethlehem 2009). 1 = representative response with respect to the variables."),
    ("Partial indicator", "Between-category spread of propensities for one variable (Schouten, Shlomo & Skinner "
                          "2011); a negative category value means the category is under-represented."),
    ("Delta adjustment", "Nonrespondents are assumed to differ from respondents by δ on average; the tipping "
                         "point is the δ at which a stated conclusion changes."),
)


def _cell_value(v: object) -> object:
    if v is None:
        return None
    if isinstance(v, (float, np.floating)):
        f = float(v)
        return None if math.isnan(f) else (f if math.isfinite(f) else ("inf" if f > 0 else "-inf"))
    if isinstance(v, (np.integer,)):
        return int(v)
    if isinstance(v, (np.bool_, bool)):
        return bool(v)
    if isinstance(v, (int, str)):
        return v
    return str(v)


def _table(ws, df: pd.DataFrame, row: int, col: int = 1, *, formats: dict[str, str] | None = None) -> int:
    """Write ``df`` with a header at ``row``; return the next free row."""
    formats = formats or {}
    for j, name in enumerate(df.columns):
        c = ws.cell(row=row, column=col + j, value=str(name))
        c.font, c.fill = _BOLD, _HEAD_FILL
    for i, rec in enumerate(df.itertuples(index=False), start=1):
        for j, v in enumerate(rec):
            c = ws.cell(row=row + i, column=col + j, value=_cell_value(v))
            fmt = formats.get(str(df.columns[j]))
            if fmt:
                c.number_format = fmt
    return row + len(df) + 2


def _pairs(ws, pairs: list[tuple[str, object]], row: int) -> int:
    for k, v in pairs:
        ws.cell(row=row, column=1, value=k).font = _BOLD
        ws.cell(row=row, column=2, value=_cell_value(v))
        row += 1
    return row + 1


def _widths(ws, widths: dict[int, float] | None = None, default: float = 14) -> None:
    for k in range(1, ws.max_column + 1):
        ws.column_dimensions[get_column_letter(k)].width = (widths or {}).get(k, default)


P = "0.0000"
PCT = "0.0%"
NUM = "0.000"


def _read_me(ws, rep: DiagnosticsReport) -> None:
    ws.cell(row=1, column=1, value="Missingness diagnostics").font = _TITLE
    row = 3
    ws.cell(row=row, column=1, value="Cautions").font = _BOLD
    row += 1
    for text in (*CAUTIONS, *LIMITS, "These files hold respondents' answers: follow your organization's "
                 "data protection rules when sharing this workbook."):
        ws.cell(row=row, column=1, value="•")
        ws.cell(row=row, column=2, value=text).alignment = _WRAP
        row += 1
    row += 1
    ws.cell(row=row, column=1, value="Definitions").font = _BOLD
    row += 1
    for term, text in DEFINITIONS:
        ws.cell(row=row, column=1, value=term).font = _BOLD
        ws.cell(row=row, column=2, value=text).alignment = _WRAP
        row += 1
    row += 1
    row = _pairs(ws, [("Auxiliaries", ", ".join(rep.auxiliaries) or "(none)"),
                      ("Treated as categorical", ", ".join(rep.categorical) or "(none)"),
                      ("Cases in Little's test", rep.little_scope)], row)
    if rep.notes:
        ws.cell(row=row, column=1, value="Notes").font = _BOLD
        _table(ws, pd.DataFrame(rep.notes, columns=["part", "item", "message"]), row + 1)
    _widths(ws, {1: 26, 2: 110, 3: 90})


def _glance(ws, rep: DiagnosticsReport) -> None:
    c = rep.counts.reset_index()
    df = rep.summary.merge(c[["item", "out_of_universe", "set_aside"]], on="item", how="left")
    cols = ["item", "in_scope", "nonresponse", "nonresponse_rate", "auc", "neg_log10_model_p", "model_p",
            "model_p_adjusted", "flagged", "little_p", "min_compare_p", "out_of_universe", "set_aside",
            "association", "suggested"]
    # The package's rate (of D, as in the item report) beside the models' own base (in_scope).
    cols += [c for c in ("package_D", "package_nonresponse_rate", "below_min_base") if c in df.columns]
    ws.cell(row=1, column=1, value="Item nonresponse and evidence against MCAR, per item").font = _TITLE
    ws.cell(row=2, column=1, value="nonresponse_rate: of the model's base in_scope (answered + nonresponse cells); "
                                   "package_nonresponse_rate: the package's item nonresponse rate of D (as in the "
                                   "item report). AUC and p-values from the nonresponse model on the auxiliaries "
                                   "(blank: not estimable).")
    end = _table(ws, df[cols], 4, formats={"nonresponse_rate": PCT, "package_nonresponse_rate": PCT, "auc": NUM, "neg_log10_model_p": "0.00",
                                         "model_p": P, "model_p_adjusted": P, "little_p": P,
                                         "min_compare_p": P})
    ws.freeze_panes = "B5"
    _widths(ws, {1: 18, 14: 14, 15: 60})
    n = len(df)
    if n:
        bar = BarChart()
        bar.type = "col"
        bar.title = "Item nonresponse rate (bars) and AUC of the nonresponse model (line)"
        bar.y_axis.title = "nonresponse rate"
        bar.y_axis.number_format = "0%"
        bar.add_data(Reference(ws, min_col=4, min_row=4, max_row=4 + n), titles_from_data=True)
        cats = Reference(ws, min_col=1, min_row=5, max_row=4 + n)
        bar.set_categories(cats)
        line = LineChart()
        line.add_data(Reference(ws, min_col=5, min_row=4, max_row=4 + n), titles_from_data=True)
        line.y_axis.axId = 200
        line.y_axis.title = "AUC (0.5 = no association)"
        line.y_axis.scaling.min = 0.5
        line.y_axis.scaling.max = 1.0
        line.y_axis.crosses = "max"
        bar += line
        bar.height, bar.width = 9, max(16, min(40, 1.2 * n))
        ws.add_chart(bar, f"A{end + 1}")


def _little(ws, wsp, rep: DiagnosticsReport) -> None:
    ws.cell(row=1, column=1, value="Little's test of missing completely at random").font = _TITLE
    r = rep.little
    if r is None:
        ws.cell(row=3, column=1, value="Not run: " + "; ".join(m for p, _i, m in rep.notes if p == "Little's test"))
        wsp.cell(row=1, column=1, value="Little's test was not run.")
        _widths(ws, {1: 30, 2: 90})
        return
    row = _pairs(ws, [("d² statistic", r.statistic), ("degrees of freedom", r.df), ("p-value", r.p_value),
                      ("cases used", r.n_cases), ("cases dropped (all variables missing)", r.n_dropped_all_missing),
                      ("missingness patterns", r.n_patterns), ("variables", r.n_variables),
                      ("EM iterations", r.iterations), ("EM converged", r.converged),
                      ("cases", rep.little_scope)], 3)
    ws.cell(row=row, column=1, value="Notes").font = _BOLD
    for text in r.notes:
        row += 1
        ws.cell(row=row, column=2, value=text).alignment = _WRAP
    row += 2
    ws.cell(row=row, column=1, value="EM estimates (maximum likelihood, divisor n)").font = _BOLD
    est = pd.concat([r.mean.rename("mean"), r.cov.add_prefix("cov ")], axis=1).reset_index(names="variable")
    _table(ws, est, row + 1, formats={c: "0.0000" for c in est.columns[1:]})
    _widths(ws, {1: 34, 2: 16})
    wsp.cell(row=1, column=1, value="Missingness patterns (1 = observed, 0 = missing)").font = _TITLE
    _table(wsp, r.patterns, 3, formats={"d2_contribution": "0.000"})
    wsp.freeze_panes = "B4"
    _widths(wsp, {4: 40})


def _long(items: dict, attr: str) -> pd.DataFrame:
    frames = [getattr(v, attr).assign(item=k) for k, v in items.items() if len(getattr(v, attr))]
    if not frames:
        return pd.DataFrame({"item": []})
    df = pd.concat(frames, ignore_index=True)
    return df[["item", *[c for c in df.columns if c != "item"]]]


def _comparisons(ws, wsc, rep: DiagnosticsReport) -> None:
    ws.cell(row=1, column=1, value="Respondents vs item nonrespondents on the auxiliaries").font = _TITLE
    ws.cell(row=2, column=1, value="Numeric: Welch t-test, difference = nonrespondents − respondents, standardized "
                                   "by √((s²_r + s²_m)/2). Categorical: chi-square test, Cramér's V.")
    _table(ws, _long(rep.comparisons, "table"), 4,
           formats={"p_value": P, "std_difference": NUM, "cramers_v": NUM, "statistic": NUM, "df": "0.0"})
    ws.freeze_panes = "C5"
    wsc.cell(row=1, column=1, value="Category shares among respondents and nonrespondents").font = _TITLE
    _table(wsc, _long(rep.comparisons, "categories"), 3,
           formats={"share_respondents": PCT, "share_nonrespondents": PCT, "nonresponse_rate": PCT})
    wsc.freeze_panes = "C4"


def _models(ws, rep: DiagnosticsReport) -> None:
    ws.cell(row=1, column=1, value="Logistic models of item nonresponse on the auxiliaries").font = _TITLE
    fit = pd.DataFrame([{"item": k, "n": m.n, "left_out": m.n_left_out, "nonresponse": m.n_nonresponse, "auc": m.auc,
                         "pseudo_r2": m.pseudo_r2, "lr_statistic": m.lr_statistic, "lr_df": m.lr_df,
                         "lr_p_value": m.lr_p_value,
                         "reference": ", ".join(f"{a}={b}" for a, b in m.reference.items()),
                         "notes": " ".join(m.notes)} for k, m in rep.models.items()],
                       columns=["item", "n", "left_out", "nonresponse", "auc", "pseudo_r2", "lr_statistic", "lr_df",
                                "lr_p_value", "reference", "notes"])
    row = _table(ws, fit, 3, formats={"auc": NUM, "pseudo_r2": NUM, "lr_p_value": P, "lr_statistic": "0.00"})
    ws.cell(row=row, column=1, value="Coefficients (odds ratios with 95% confidence limits)").font = _BOLD
    _table(ws, _long(rep.models, "table"), row + 1,
           formats={c: NUM for c in ("coef", "std_err", "z", "odds_ratio", "or_low", "or_high")} | {"p_value": P})
    _widths(ws, {1: 18, 2: 22})


def _representativeness(ws, rep: DiagnosticsReport) -> None:
    ws.cell(row=1, column=1, value="Response propensities: R-indicator and partial indicators").font = _TITLE
    overall = pd.DataFrame([{"response": r.target, "n": r.n, "left_out": r.n_left_out, "responded": r.n_responded,
                             "response_rate": r.response_rate, "sd_propensity": r.sd_propensity,
                             "r_indicator": r.r_indicator, "max_abs_bias": r.max_abs_bias,
                             "model_std_errors": r.model_se,
                             "notes": " ".join(r.notes)} for r in rep.r_indicators],
                           columns=["response", "n", "left_out", "responded", "response_rate", "sd_propensity",
                                    "r_indicator", "max_abs_bias", "model_std_errors", "notes"])
    ws.cell(row=2, column=1, value="max_abs_bias: upper bound (1 − R)/(2ρ̄) on the absolute standardized bias of a "
                                   "respondent mean. Category values < 0: under-represented among respondents.")
    row = _table(ws, overall, 4, formats={"response_rate": PCT, "sd_propensity": "0.0000", "r_indicator": "0.000",
                                          "max_abs_bias": "0.000"})
    frames = [r.categories.assign(response=r.target).merge(r.partial, on="variable", suffixes=("", "_variable"))
              for r in rep.r_indicators]
    cats = pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()
    if len(cats):
        cats = cats[["response", "variable", "partial_unconditional_variable", "category", "n", "share",
                     "response_rate", "mean_propensity", "partial_unconditional"]]
        cats = cats.rename(columns={"partial_unconditional_variable": "partial_variable",
                                    "partial_unconditional": "partial_category"})
    ws.cell(row=row, column=1, value="Unconditional partial indicators by variable and category").font = _BOLD
    row = _table(ws, cats, row + 1, formats={"partial_variable": "0.0000", "partial_category": "0.0000",
                                              "share": PCT, "response_rate": PCT, "mean_propensity": "0.000"})
    ws.cell(row=row, column=1, value="Propensity models (odds ratios of responding with 95% limits); "
                                     "model_std_errors says how std_err, p_value and the limits were computed"
            ).font = _BOLD
    models = [r.model.assign(response=r.target, model_std_errors=r.model_se) for r in rep.r_indicators if len(r.model)]
    coefs = pd.concat(models, ignore_index=True) if models else pd.DataFrame({"response": []})
    coefs = coefs[["response", *[c for c in coefs.columns if c != "response"]]]
    _table(ws, coefs, row + 1, formats={c: NUM for c in ("coef", "std_err", "odds_ratio", "or_low", "or_high")}
           | {"p_value": P})
    _widths(ws, {1: 24, 8: 14})


def _sensitivity(ws, rep: DiagnosticsReport) -> None:
    ws.cell(row=1, column=1, value="Sensitivity to nonresponse not at random (delta adjustment)").font = _TITLE
    s = rep.sensitivity
    if s is None:
        ws.cell(row=3, column=1, value="Not requested (choose an item and a threshold).")
        _widths(ws, {1: 40})
        return
    row = _pairs(ws, [("item", s.item), ("respondents", s.n_respondents), ("nonrespondents", s.n_nonrespondents),
                      ("nonrespondent share (weighted)", s.weight_nonrespondents),
                      ("respondent mean", s.respondent_mean), ("respondent SD", s.respondent_sd),
                      ("threshold", s.threshold), ("conclusion at δ = 0", f"mean {s.conclusion} the threshold"
                                                   if s.conclusion else None),
                      ("tipping point δ*", s.tipping_point), ("δ* in respondent SDs", s.tipping_point_sd)], 3)
    ws.cell(row=row, column=1, value=("Each nonrespondent is given the respondent mean plus δ. Whether a δ as large "
                                      "as the tipping point is plausible is a question of subject knowledge."))
    _table(ws, s.grid, row + 2, formats={"delta": "0.000", "delta_sd": "0.00", "estimate": "0.000"})
    _widths(ws, {1: 32, 2: 16})


def _suggestions(ws, rep: DiagnosticsReport) -> None:
    ws.cell(row=1, column=1, value="Suggestions for handling item nonresponse").font = _TITLE
    row = 2
    for text in CAUTIONS:
        ws.cell(row=row, column=1, value=text)
        row += 1
    rows = [{"item": s.item, "association": s.association, "action": o.action, "verdict": o.verdict,
             "reason": o.reason, "evidence": s.evidence} for s in rep.suggestions for o in s.options]
    _table(ws, pd.DataFrame(rows, columns=["item", "association", "action", "verdict", "reason", "evidence"]),
           row + 1)
    ws.freeze_panes = ws.cell(row=row + 2, column=2)
    _widths(ws, {1: 18, 2: 14, 3: 26, 4: 12, 5: 80, 6: 80})


def write_diagnostics_workbook(report: DiagnosticsReport, path: str | Path, *, overwrite: bool = False) -> Path:
    """Write the diagnostics workbook atomically; return its path.

    Raises
    ------
    SkipwiseError
        ``output-exists`` if the file exists and ``overwrite`` is false.
    """
    wb = Workbook()
    sheets = [wb.active] + [wb.create_sheet() for _ in SHEETS[1:]]
    for ws, title in zip(sheets, SHEETS):
        ws.title = title
    by = dict(zip(SHEETS, sheets))
    _read_me(by["Read me"], report)
    _glance(by["Items at a glance"], report)
    _little(by["MCAR test"], by["Patterns"], report)
    _comparisons(by["Group comparisons"], by["Category shares"], report)
    _models(by["Nonresponse models"], report)
    _representativeness(by["Representativeness"], report)
    _sensitivity(by["Sensitivity"], report)
    _suggestions(by["Suggestions"], report)
    with atomic_output(path, overwrite=overwrite) as tmp:
        wb.save(tmp)
    return Path(path)
