"""The weighting workbook (.xlsx), written through the shared sheet style (:mod:`skipwise.sheetstyle`).

Every sheet opens with a title, what its numbers are, their base and the
published method; rates are percentages, totals have thousands separators,
and the Replicates sheet says how to compute a variance with the replicate
weights.  Sheets without content (Collapsing when nothing was collapsed,
Trimming without a trimming step) are left out.
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from skipwise import sheetstyle as st
from skipwise.io.atomic import atomic_output
from skipwise.weighting.outcomes import OUTCOME_CATEGORIES
from skipwise.weighting.weigh import CAUTIONS, WeighResult

__all__ = ["write_workbook", "summary_rows", "RATE_KEYS", "RATE_DEFINITIONS", "STANDARD"]

RATE_KEYS = ("RR1", "RR2", "RR3", "RR4", "RR5", "RR6", "COOP1", "COOP2", "COOP3", "COOP4",
             "REF1", "REF2", "REF3", "CON1", "CON2", "CON3")
#: The outcome rates' standard.
STANDARD = ("The American Association for Public Opinion Research (AAPOR), Standard Definitions: Final "
            "Dispositions of Case Codes and Outcome Rates for Surveys.")
_ALL, _E, _D = "(I+P) + (R+NC+O) + (UH+UO)", "(I+P) + (R+NC+O) + e(UH+UO)", "(I+P) + (R+NC+O)"
RATE_DEFINITIONS = {
    "RR1": f"I / ({_ALL})", "RR2": f"(I+P) / ({_ALL})", "RR3": f"I / ({_E})", "RR4": f"(I+P) / ({_E})",
    "RR5": f"I / ({_D})", "RR6": f"(I+P) / ({_D})", "COOP1": "I / ((I+P) + R + O)",
    "COOP2": "(I+P) / ((I+P) + R + O)", "COOP3": "I / ((I+P) + R)", "COOP4": "(I+P) / ((I+P) + R)",
    "REF1": f"R / ({_ALL})", "REF2": f"R / ({_E})", "REF3": f"R / ({_D})",
    "CON1": f"((I+P) + R + O) / ({_ALL})", "CON2": f"((I+P) + R + O) / ({_E})", "CON3": f"((I+P) + R + O) / ({_D})",
}
_CATEGORY_WORDS = {"I": "complete interview", "P": "partial interview", "R": "refusal and break-off",
                   "NC": "non-contact", "O": "other eligible nonresponse", "UH": "unknown if eligible (no contact "
                   "with the address)", "UO": "unknown eligibility, other", "NE": "not eligible"}
_STAGE_WORDS = {"base": "base (design) weights", "eligibility": "after the eligibility adjustment",
                "nonresponse": "after the nonresponse adjustment", "calibrated": "after calibration",
                "final": "final weights"}


def summary_rows(res: WeighResult) -> list[tuple[str, object]]:
    """Key figures, in the order the command line prints them."""
    t = res.totals
    rows: list[tuple[str, object]] = [
        ("cases in file", t["cases"]),
        ("eligible cases", t["eligible"]),
        ("unknown-eligibility cases", t["unknown"]),
        ("respondents (weighted cases)", t["respondents"]),
        ("sum of base weights", t["base_sum"]),
        ("sum of final weights", t["final_sum"]),
    ]
    last = res.stage_summary.iloc[-1]
    rows += [("Kish design effect (final)", float(last["kish_deff"])),
             ("effective sample size (final)", float(last["effective_n"])),
             ("CV of final weights", float(last["cv"])),
             ("response rate RR3 (unweighted)", res.rates["RR3"]),
             ("e", res.rates["e"]), ("e method", res.rates["e_method"]),
             ("classes collapsed", len(res.chain.collapses))]
    if res.chain.trimming is not None:
        t = res.chain.trimming
        rows += [("trimming cap", t.cap), ("cases above the cap (first pass)", t.cases_capped)]
    if res.design is not None:
        rows += [("replicates", f"{res.design.count} ({res.design.method})")]
    return rows


def _fmt_of(label: str, value: object) -> str | None:
    if isinstance(value, str):
        return None
    if label.startswith("cases") or label.startswith("classes"):
        return st.INT
    if "rate" in label or label.startswith("CV") or label == "e":
        return st.PCT if "rate" in label or label == "e" else st.STAT
    if "design effect" in label:
        return st.STAT
    if "sum of" in label or "cap" in label or "effective" in label:
        return st.WEIGHTED
    return st.INT


def _overview(wb, res: WeighResult) -> None:
    s = st.SheetWriter(wb, "Overview", title="Weighting: summary of the run",
                       explanation=("The weighting chain from base weights to final weights: cases, sums of weights, "
                                    "the design effect of the final weights and the response rate. Counts are cases of "
                                    "the sample file; sums are sums of weights."),
                       source="Kish 1992 (design effect due to weighting, J. Official Statistics 8:183-200); "
                              "outcome rates: " + STANDARD)
    words = {"e": "e (eligible share of unknown-eligibility cases)", "e method": "How e was found"}
    rows = [(words.get(k, k[:1].upper() + k[1:]), v, _fmt_of(k, v)) for k, v in summary_rows(res)]
    s.pairs(rows)
    s.width(1, 36)
    s.width(2, 16)
    if res.chain.notes:
        s.blank()
        s.line("Notes", "sub")
        for note in res.chain.notes:
            s.note(note)
    s.blank()
    s.line("Cautions", "sub")
    for text in CAUTIONS:
        s.note(text)
    s.close()


def _rates(wb, res: WeighResult) -> None:
    s = st.SheetWriter(wb, "Outcome rates", title="Outcome rates of the sample",
                       explanation=("Response, cooperation, refusal and contact rates from the final dispositions, "
                                    "unweighted (cases) and weighted by the base weights; e is the estimated share "
                                    "of eligible cases among those of unknown eligibility (UH, UO)."),
                       source=STANDARD)
    table = pd.DataFrame({"Rate": list(RATE_KEYS), "Unweighted": [res.rates[k] for k in RATE_KEYS],
                          "Weighted by base weights": [res.rates_weighted[k] for k in RATE_KEYS],
                          "Definition": [RATE_DEFINITIONS[k] for k in RATE_KEYS]})
    table.loc[len(table)] = ["e", res.rates["e"], res.rates_weighted["e"], str(res.rates["e_method"])]
    ref = s.table(table, formats={"Unweighted": st.PCT, "Weighted by base weights": st.PCT}, wrap=["Definition"])
    s.width(ref.columns["Definition"], 50)
    s.blank()
    cats = pd.DataFrame({"Category": list(OUTCOME_CATEGORIES),
                         "Meaning": [_CATEGORY_WORDS[k] for k in OUTCOME_CATEGORIES],
                         "Cases": [res.counts[k] for k in OUTCOME_CATEGORIES],
                         "Sum of base weights": [res.counts_weighted[k] for k in OUTCOME_CATEGORIES]})
    s.table(cats, formats={"Cases": st.INT, "Sum of base weights": st.WEIGHTED}, main=False,
            heading="Cases by outcome category")
    s.close()


def _stages(wb, res: WeighResult) -> None:
    df = res.stage_summary.copy()
    df["stage"] = df["stage"].map(lambda v: _STAGE_WORDS.get(str(v), str(v)))
    heads = {"stage": "Stage", "n": "Cases with weight", "sum": "Sum of weights", "min": "Smallest",
             "p1": "1st percentile", "p5": "5th percentile", "p25": "25th percentile", "median": "Median",
             "p75": "75th percentile", "p95": "95th percentile", "p99": "99th percentile", "max": "Largest",
             "max/median": "Largest / median", "cv": "CV", "kish_deff": "Kish design effect",
             "effective_n": "Effective sample size"}
    fmts = {c: "#,##0.00" for c in ("min", "p1", "p5", "p25", "median", "p75", "p95", "p99", "max")}
    fmts |= {"n": st.INT, "sum": st.WEIGHTED, "max/median": "0.00", "cv": st.STAT, "kish_deff": st.STAT,
             "effective_n": st.WEIGHTED}
    s = st.SheetWriter(wb, "Weight stages", title="Weights after each step of the chain",
                       explanation=("Distribution of the weights of the cases that carry weight after each step. "
                                    "Kish design effect = 1 + CV\u00b2 (CV with divisor n); effective sample size = "
                                    "n / design effect."),
                       source="Kish, L. (1992). Weighting for unequal Pi. J. Official Statistics 8(2), 183-200.")
    s.table(df, formats=fmts, headers=heads)
    s.close()


def _classes(wb, res: WeighResult) -> None:
    if res.chain.class_tables:
        df = pd.concat(res.chain.class_tables, ignore_index=True)
        s = st.SheetWriter(wb, "Class factors", title="Adjustment factors by class",
                           explanation=("Eligibility and nonresponse adjustment in weighting classes: the weight of "
                                        "each class is carried by the cases kept (eligible, or respondents); factor = "
                                        "weight in / weight of the cases kept."),
                           source="Kalton & Flores-Cervantes 2003 (weighting methods, J. Official Statistics 19:81-97).")
        s.table(df, formats={"cases": st.INT, "kept": st.INT, "weight_in": st.WEIGHTED,
                             "weight_kept_in": st.WEIGHTED, "factor": st.STAT},
                headers={"step": "Step", "class": "Class", "cases": "Cases", "kept": "Cases kept",
                         "weight_in": "Weight in", "weight_kept_in": "Weight of the cases kept", "factor": "Factor"})
        s.close()
    if res.chain.collapses:
        coll = pd.DataFrame([{"Step": c.step, "Merged": c.merged, "Into": c.into, "Reason": c.reason,
                              "Respondents": c.respondents, "Factor": c.factor} for c in res.chain.collapses])
        s = st.SheetWriter(wb, "Collapsing", title="Classes merged before adjustment",
                           explanation=("A class with too few cases kept or too large a factor was merged into a "
                                        "neighbouring class; the merged class's figures are on Class factors."))
        s.table(coll, formats={"Respondents": st.INT, "Factor": st.STAT}, wrap=["Reason"])
        s.close()


def _margins(wb, res: WeighResult) -> None:
    m = res.chain.margins
    if m is None or not len(m):
        return
    df = m.copy()
    df["difference"] = df["difference"].round(6) + 0.0
    s = st.SheetWriter(wb, "Margins", title="Calibration margins: targets and achieved totals",
                       explanation=("Sums of weights of the respondents in each category before calibration and "
                                    "after the final step, against the population totals of the plan."),
                       source="Deville & S\u00e4rndal 1992 (calibration estimators, JASA 87:376-382); raking: "
                              "Deming & Stephan 1940.")
    s.table(df, formats={"target": st.WEIGHTED, "before": st.WEIGHTED, "achieved": st.WEIGHTED,
                         "difference": "#,##0.00"},
            headers={"variable": "Variable", "category": "Category", "target": "Target total",
                     "before": "Before calibration", "achieved": "Achieved", "difference": "Achieved - target"})
    s.close()


def _trimming(wb, res: WeighResult) -> None:
    t = res.chain.trimming
    if t is None:
        return
    s = st.SheetWriter(wb, "Trimming", title="Trimming of large weights",
                       explanation=("Weights above the cap were cut to it and the weights calibrated again, repeated "
                                    "until no weight exceeds the cap (or the rounds run out)."),
                       source="Potter 1990 (weight trimming, Proc. Survey Research Methods Section, ASA).")
    s.pairs([("Rule", t.rule, None), ("Cap", t.cap, st.WEIGHTED),
             ("Cases above the cap (first pass)", t.cases_capped, st.INT),
             ("Weight above the cap (first pass)", t.weight_removed_first_pass, st.WEIGHTED),
             ("Largest weight before", t.max_before, st.WEIGHTED), ("Largest weight after", t.max_after, st.WEIGHTED),
             ("Trim and re-calibrate rounds", t.iterations, st.INT)])
    s.width(1, 36)
    s.close()


def _propensity(wb, res: WeighResult) -> None:
    fit = res.chain.propensity
    if fit is None:
        return
    sep = getattr(fit, "separation", None)
    s = st.SheetWriter(wb, "Propensity model", title="Response propensity model",
                       explanation=("Logistic regression of responding on the covariates among eligible cases; "
                                    "coefficients are log-odds of responding. Separation: "
                                    + (sep.describe("respondents", "nonrespondents") if sep is not None
                                       else "not checked") + "."),
                       source="Rosenbaum & Rubin 1983; separation: Albert & Anderson 1984.")
    s.table(pd.DataFrame({"Term": fit.params.index, "Coefficient": fit.params.to_numpy(),
                          "Std error": fit.bse.to_numpy()}), formats={"Coefficient": st.STAT, "Std error": st.STAT})
    s.close()


def _estimates(wb, res: WeighResult) -> None:
    e = res.estimates
    if e.empty:
        return
    s = st.SheetWriter(wb, "Estimates", title="Weighted estimates with replicate standard errors",
                       explanation=("Means and proportions over the respondents with a valid value (n), weighted by "
                                    "the final weights; standard errors from the replicate weights (see Replicates)."),
                       source="Wolter 2007, Introduction to Variance Estimation.")
    heads = {"variable": "Variable", "category": "Category", "kind": "Kind", "n": "Cases", "estimate": "Estimate",
             "se": "Standard error", "replicates": "Replicates", "method": "Method"}
    for kind, fmt in (("mean", None), ("proportion", st.PCT)):
        part = e[e["kind"] == kind]
        if not len(part):
            continue
        f = fmt or st.stat_format(part["estimate"])
        s.table(part.drop(columns=["kind"]).assign(category=part["category"].astype(str)),
                formats={"n": st.INT, "estimate": f, "se": fmt or st.stat_format(part["se"] * 10),
                         "replicates": st.INT}, headers=heads, heading="Means" if kind == "mean" else "Proportions")
        s.blank()
    s.close()


def _replicates(wb, res: WeighResult) -> None:
    d = res.design
    if d is None:
        return
    groups = pd.DataFrame({"group": d.group, "coef": d.coef})
    per = groups.groupby("group", sort=True).agg(replicates=("coef", "size"), coef=("coef", "first")).reset_index()
    per["group"] = per["group"] + 1
    rep_cols = list(res.weight_columns[-d.count:])
    stratified = d.method == "JKn"
    s = st.SheetWriter(wb, "Replicates", title=f"Replicate weights ({d.method}) and how to compute a variance",
                       explanation=(f"{d.count:,} replicate weight columns; each replicate re-runs the whole weighting "
                                    "chain from its own base weights, so the variance includes every adjustment."),
                       source=("Jackknife: Wolter 2007, ch. 4; Rao-Wu bootstrap: Rao & Wu 1988 (JASA 83:231-241)."
                               " See docs/weighting.md."))
    s.pairs([("Method", {"JKn": "stratified delete-one-PSU jackknife (JKn)",
                         "JK1": "delete-one-PSU jackknife (JK1)",
                         "bootstrap": "Rao-Wu rescaling bootstrap"}.get(d.method, d.method), None),
             ("Replicates", d.count, st.INT),
             ("Replicate weight columns", f"{rep_cols[0]} ... {rep_cols[-1]}" if len(rep_cols) > 1
              else ", ".join(rep_cols), None)], heading="The design")
    s.blank()
    s.line("How to compute a variance", "sub")
    for text in ("1. Compute the estimate with the final weight (theta).",
                 "2. Compute the same estimate with each replicate weight column r instead (theta_r).",
                 "3. Variance v = sum over r of c_r (theta_r - mean_g)^2, where c_r is the scale factor below and "
                 "mean_g the mean of theta_r over the replicates of the same group"
                 + (" (the stratum)." if stratified else " (all replicates)."),
                 "4. Standard error = square root of v."):
        s.note(text, "explain")
    s.blank()
    s.table(per.rename(columns={"group": "Group" if not stratified else "Stratum (group)",
                                "replicates": "Replicates", "coef": "Scale factor c_r"}),
            formats={"Group": st.INT, "Stratum (group)": st.INT, "Replicates": st.INT, "Scale factor c_r": "0.0000"},
            heading="Scale factors by group")
    s.close()


def write_workbook(res: WeighResult, path: str | Path, *, overwrite: bool = True) -> Path:
    """Write every diagnostic of a weighting run to an .xlsx workbook, atomically."""
    wb = st.house_workbook()
    _overview(wb, res)
    _rates(wb, res)
    _stages(wb, res)
    _classes(wb, res)
    _margins(wb, res)
    _trimming(wb, res)
    _propensity(wb, res)
    _estimates(wb, res)
    _replicates(wb, res)
    from skipwise.io.inert import inert_workbook

    inert_workbook(wb)  # answers, names and labels from data stay text, never formulas
    with atomic_output(path, overwrite=overwrite) as tmp:
        wb.save(tmp)
    return Path(path)


