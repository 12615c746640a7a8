"""Write a :class:`DiagnosticsReport` to an Excel workbook, through the shared sheet style.

Every sheet opens with a title, what its numbers are and their base, and the
published method behind them.  Estimates are shown where they serve a
decision: the MCAR sheet gives the test's result and its reading in words (no
EM mean and covariance blocks), category shares and coefficients are listed
for the items with evidence against MCAR, and a model with separation shows
the separation verdict instead of infinite odds ratios.
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from skipwise import sheetstyle as st
from skipwise.diagnostics import sheets_tests as T
from skipwise.diagnostics.little import LIMITS
from skipwise.diagnostics.report import DiagnosticsReport
from skipwise.diagnostics.suggest import CAUTIONS, TOO_FEW, flagged
from skipwise.io.atomic import atomic_output

__all__ = ["write_diagnostics_workbook", "SHEETS", "DEFINITIONS", "TOP_CHART_ITEMS"]

#: Every sheet the workbook may hold, in order; Sensitivity only when requested, Category shares and
#: Representativeness only when they have rows.
SHEETS = ("Read me", "Items at a glance", "MCAR test", "Patterns", "Group comparisons",
          "Category shares", "Nonresponse models", "Representativeness", "Sensitivity", "Suggestions")
#: Items in the chart of the highest nonresponse rates.
TOP_CHART_ITEMS = 15

DEFINITIONS = (
    ("Package D, package rate", "The package's base D (cells in the item's universe excluding breakoff and "
     "left_blank) and its item nonresponse rate, the same numbers as in the item report and the codebook."),
    ("In scope (model base)", "A cell in the item's universe (routing says the question applied) that holds "
     "an answer or item nonresponse. Legitimate skips are never missing; break-offs, invalid values and wrong "
     "codes are set aside and counted apart, so this base can be a little smaller than the item report's."),
    ("Item nonresponse", "In scope, with a nonresponse code (e.g. don't know, refused) or an unexplained blank."),
    ("Too few to judge", "Fewer in-scope cases than the minimum base: shown, but not tested, ranked, charted or "
     "flagged (common practice, no source)."),
    ("MCAR", "Missing completely at random: nonresponse is unrelated to any variable, observed or not."),
    ("MAR", "Missing at random: nonresponse depends only on observed variables (e.g. the auxiliaries)."),
    ("MNAR", "Missing not at random: nonresponse depends on the unobserved value itself. No test on the "
     "observed data can detect it."),
    ("Little's test", "Chi-square test of MCAR over several items at once (Little 1988). Assumes multivariate "
     "normality."),
    ("AUC", "Area under the ROC curve of the nonresponse model: 0.5 = the auxiliaries do not tell respondents "
     "from nonrespondents, 1 = they tell them apart perfectly. A size of effect, not a test."),
    ("Evidence against MCAR", "At least the minimum base and the minimum number of nonrespondents, and the "
     "likelihood-ratio p-value of the item's nonresponse model on the auxiliaries, adjusted for the number of "
     "items tested (Holm 1979 by default; Benjamini & Hochberg 1995 on request), below alpha."),
    ("Separation", "Some auxiliary (or combination) tells respondents from nonrespondents without error "
     "(complete) or with ties only (quasi-complete); the coefficients involved diverge and have no finite "
     "estimate (Albert & Anderson 1984)."),
    ("R-indicator", "R = 1 - 2 S(p), S the standard deviation of the estimated response propensities (Schouten, "
     "Cobben & Bethlehem 2009). 1 = representative response with respect to the variables."),
    ("Partial indicator", "Between-category spread of the propensities for one variable (Schouten, Shlomo & "
     "Skinner 2011); a negative category value means the category is under-represented."),
    ("Delta adjustment", "Nonrespondents are assumed to differ from respondents by delta on average; the "
     "tipping point is the delta at which a stated conclusion changes."),
)


def _read_me(wb, rep: DiagnosticsReport, min_base: int) -> None:
    s = st.SheetWriter(wb, "Read me", title="Missingness diagnostics: how to read this workbook",
                       explanation=("Which items' nonresponse is related to what is known about every case, and "
                                    "how to handle it. Counts are cases; rates are over each item's in-scope cases "
                                    "(see the definitions below)."),
                       source="Little 1988 (JASA 83:1198-1202); Holm 1979; Albert & Anderson 1984; Schouten, "
                              "Cobben & Bethlehem 2009; Schouten, Shlomo & Skinner 2011.")
    s.line("Cautions", "sub")
    for text in (*CAUTIONS, *LIMITS, "These files hold respondents' answers: follow your organization's data "
                 "protection rules when sharing this workbook."):
        s.note(text)
    s.blank()
    s.table(pd.DataFrame(DEFINITIONS, columns=["Term", "Meaning"]), wrap=["Meaning"], heading="Definitions")
    s.width(1, 24)
    s.width(2, 110)
    s.blank()
    s.pairs([("Auxiliaries", ", ".join(rep.auxiliaries) or "(none)", None),
             ("Treated as categorical", ", ".join(rep.categorical) or "(none)", None),
             ("Minimum base", min_base, st.INT),
             ("Cases in Little's test", rep.little_scope, None)], heading="Settings")
    if rep.notes:
        s.blank()
        s.table(pd.DataFrame([(p, i or "", m) for p, i, m in rep.notes], columns=["Part", "Item", "Message"]),
                wrap=["Message"], heading="Notes of the run", main=False)
        s.width(3, 70)
    s.close()


def _glance(wb, rep: DiagnosticsReport, min_base: int) -> None:
    c = rep.counts.reset_index()[["item", "out_of_universe", "set_aside"]]
    df = rep.summary.merge(c, on="item", how="left")
    sep = {k: m.separation.verdict for k, m in rep.models.items() if getattr(m, "separation", None) is not None}
    out = pd.DataFrame({
        "Item": df["item"], "In scope": df["in_scope"], "Nonresponse": df["nonresponse"],
        "Nonresponse rate": df["nonresponse_rate"],
        **({"Package D": df["package_D"], "Package rate": df["package_nonresponse_rate"]}
           if "package_D" in df.columns else {}),
        "Evidence against MCAR": df["association"].map(T.association_words),
        "AUC": [None if sep.get(i) == "complete" else a for i, a in zip(df["item"], df["auc"])],
        "Model p": df["model_p"], "Model p adjusted": df["model_p_adjusted"],
        "Separation": [T.SEPARATION_WORDS.get(sep.get(i, "none"), "") for i in df["item"]],
        "Out of universe": df["out_of_universe"], "Set aside": df["set_aside"], "Suggested": df["suggested"],
    })
    s = st.SheetWriter(wb, "Items at a glance", title="Item nonresponse and evidence against MCAR, per item",
                       explanation=(f"Rate = nonresponse / in-scope cases (the models' base); package rate = the "
                                    f"item nonresponse rate of D, as in the item report. AUC and p-values come "
                                    f"from each item's nonresponse model on the auxiliaries; items with fewer than "
                                    f"{min_base} in-scope cases are too few to judge. Blank: not estimable."),
                       source="Holm 1979 (adjusted p); Hanley & McNeil 1982 (AUC).")
    ref = s.table(out, formats={"In scope": st.INT, "Nonresponse": st.INT, "Nonresponse rate": st.PCT,
                                "Package D": st.INT, "Package rate": st.PCT,
                                "AUC": st.STAT, "Model p": st.P_VALUE, "Model p adjusted": st.P_VALUE,
                                "Out of universe": st.INT, "Set aside": st.INT},
                  wrap=["Suggested"], freeze_col=2)
    s.width(ref.columns["Suggested"], 34)
    judged = df[(df["in_scope"] >= min_base) & (df["nonresponse"] > 0) & (df["association"] != TOO_FEW)]
    top = judged.sort_values(["nonresponse_rate", "item"], ascending=[False, True]).head(TOP_CHART_ITEMS)
    if len(top):
        s.blank()
        chart_ref = s.table(pd.DataFrame({"Item": top["item"], "Nonresponse rate": top["nonresponse_rate"],
                                          "In scope": top["in_scope"]}),
                            formats={"Nonresponse rate": st.PCT, "In scope": st.INT}, main=False,
                            heading=f"The {len(top)} highest nonresponse rates among items with at least "
                                    f"{min_base} in-scope cases")
        s.chart(T.rate_chart(s.ws, chart_ref, f"Highest item nonresponse rates (base at least {min_base})",
                             "Share of in-scope cases"), f"E{chart_ref.header_row}")
    s.close()


def _suggestions(wb, rep: DiagnosticsReport) -> None:
    rows = []
    rate = rep.summary.set_index("item")["nonresponse_rate"]
    for sug in rep.suggestions:
        if sug.association in ("none",):
            continue
        chosen = [o for o in sug.options if o.verdict == "suggested"]
        rows.append({"Item": sug.item, "Nonresponse rate": rate.get(sug.item),
                     "Evidence against MCAR": T.association_words(sug.association),
                     "Suggested": "; ".join(o.action for o in chosen) or "no single option stands out",
                     "Why": " ".join(f"{o.action.capitalize()}: {o.reason}." for o in chosen),
                     "Also possible": "; ".join(o.action for o in sug.options if o.verdict == "possible"),
                     "Evidence": sug.evidence})
    if not rows:
        return
    s = st.SheetWriter(wb, "Suggestions", title="Suggestions for handling item nonresponse",
                       explanation=("One line per item with item nonresponse: what to consider, why, and the "
                                    "evidence (rates over in-scope cases). Suggestions to weigh, not decisions; the "
                                    "cut-offs are common practice, no source."),
                       source="Little & Rubin 2019, Statistical Analysis with Missing Data; Rubin 1987.")
    ref = s.table(pd.DataFrame(rows), formats={"Nonresponse rate": st.PCT},
                  wrap=["Suggested", "Why", "Also possible", "Evidence"], freeze_col=2)
    for name, w in (("Suggested", 24), ("Why", 60), ("Also possible", 28), ("Evidence", 50)):
        s.width(ref.columns[name], w)
    s.blank()
    for text in CAUTIONS:
        s.note(text)
    s.close()


def write_diagnostics_workbook(report: DiagnosticsReport, path: str | Path, *, overwrite: bool = False,
                               min_base: int | None = None) -> Path:
    """Write the diagnostics workbook atomically; return its path.

    Sheets (in :data:`SHEETS` order) that would have no content are left out:
    Sensitivity when it was not requested, Category shares when no item shows
    evidence against MCAR, Suggestions when no item has nonresponse.

    Raises
    ------
    SkipwiseError
        ``output-exists`` if the file exists and ``overwrite`` is false.
    """
    base = int(min_base if min_base is not None else getattr(report, "min_base", 30))
    wb = st.house_workbook()
    _read_me(wb, report, base)
    _glance(wb, report, base)
    T.little_sheets(wb, report)
    flagged_items = [str(i) for i, f in zip(report.summary["item"], report.summary["flagged"]) if flagged_or(f)]
    T.comparisons_sheets(wb, report, flagged_items, base)
    T.models_sheet(wb, report, flagged_items)
    T.representativeness_sheet(wb, report, flagged_items)
    T.sensitivity_sheet(wb, report)
    _suggestions(wb, report)
    with atomic_output(path, overwrite=overwrite) as tmp:
        wb.save(tmp)
    return Path(path)


def flagged_or(value: object) -> bool:
    """True for a flagged item (the summary's ``flagged`` column, or an association level)."""
    return flagged(value) if isinstance(value, str) else bool(value)
