"""The weighting diagnostics workbook (.xlsx, openpyxl)."""

from __future__ import annotations

import math
from dataclasses import asdict
from pathlib import Path

import numpy as np
import pandas as pd

from skipwise.io.atomic import atomic_output
from skipwise.weighting.outcomes import OUTCOME_CATEGORIES
from skipwise.weighting.weigh import CAUTIONS, WeighResult

__all__ = ["write_workbook", "summary_rows"]

RATE_KEYS = ("RR1", "RR2", "RR3", "RR4", "RR5", "RR6", "COOP1", "COOP2", "COOP3", "COOP4",
             "REF1", "REF2", "REF3", "CON1", "CON2", "CON3")


def summary_rows(res: WeighResult) -> list[tuple[str, object]]:
    """Key figures, in the order the command line prints them."""
    prep = res.prepared
    final = res.final
    rows: list[tuple[str, object]] = [
        ("cases in file", len(prep.frame)),
        ("eligible cases", int(prep.eligible.sum())),
        ("unknown-eligibility cases", int(prep.unknown.sum())),
        ("respondents (weighted cases)", int(prep.respondent.sum())),
        ("sum of base weights", float(prep.base.sum())),
        ("sum of final weights", float(final.sum())),
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


def _frame_to_sheet(ws, df: pd.DataFrame) -> None:
    ws.append([str(c) for c in df.columns])
    for row in df.itertuples(index=False):
        ws.append([_cell(v) for v in row])
    _widths(ws)


def _cell(v: object) -> object:
    if isinstance(v, (np.integer,)):
        return int(v)
    if isinstance(v, (float, np.floating)):
        f = float(v)
        return None if math.isnan(f) else ("inf" if math.isinf(f) else f)
    if isinstance(v, (bool, np.bool_)):
        return bool(v)
    return v if isinstance(v, (int, str)) or v is None else str(v)


def _widths(ws) -> None:
    for col in ws.columns:
        longest = max((len(str(c.value)) for c in col if c.value is not None), default=8)
        ws.column_dimensions[col[0].column_letter].width = min(max(10, longest + 2), 70)


def write_workbook(res: WeighResult, path: str | Path, *, overwrite: bool = True) -> Path:
    """Write every diagnostic of a weighting run to an .xlsx workbook, atomically."""
    from openpyxl import Workbook
    from openpyxl.styles import Font

    wb = Workbook()
    ws = wb.active
    ws.title = "Overview"
    ws.append(["figure", "value"])
    for k, v in summary_rows(res):
        ws.append([k, _cell(v)])
    for note in res.chain.notes:
        ws.append(["note", note])
    _widths(ws)

    ws = wb.create_sheet("Outcome rates")
    ws.append(["measure", "unweighted", "weighted by base weights"])
    for k in RATE_KEYS:
        ws.append([k, _cell(res.rates[k]), _cell(res.rates_weighted[k])])
    ws.append(["e", _cell(res.rates["e"]), _cell(res.rates_weighted["e"])])
    ws.append(["e method", res.rates["e_method"], res.rates_weighted["e_method"]])
    ws.append([])
    ws.append(["outcome category", "cases", "sum of base weights"])
    for k in OUTCOME_CATEGORIES:
        ws.append([k, _cell(res.counts[k]), _cell(res.counts_weighted[k])])
    _widths(ws)

    _frame_to_sheet(wb.create_sheet("Weight stages"), res.stage_summary)
    classes = pd.concat(res.chain.class_tables, ignore_index=True) if res.chain.class_tables else \
        pd.DataFrame(columns=["step", "class", "cases", "kept", "weight_in", "weight_kept_in", "factor"])
    _frame_to_sheet(wb.create_sheet("Class factors"), classes)
    coll = pd.DataFrame([asdict(c) for c in res.chain.collapses],
                        columns=["step", "merged", "into", "reason", "respondents", "factor"])
    _frame_to_sheet(wb.create_sheet("Collapsing"), coll)
    margins = res.chain.margins if res.chain.margins is not None else \
        pd.DataFrame(columns=["variable", "category", "target", "before", "achieved", "difference"])
    _frame_to_sheet(wb.create_sheet("Margins"), margins)
    ws = wb.create_sheet("Trimming")
    t = res.chain.trimming
    if t is None:
        ws.append(["no trimming step in the plan"])
    else:
        ws.append(["figure", "value"])
        for k, v in (("rule", t.rule), ("cap", t.cap), ("cases above the cap (first pass)", t.cases_capped),
                     ("weight above the cap (first pass)", t.weight_removed_first_pass),
                     ("largest weight before", t.max_before), ("largest weight after", t.max_after),
                     ("trim/re-calibrate rounds", t.iterations)):
            ws.append([k, _cell(v)])
        _widths(ws)
    if res.chain.propensity is not None:
        fit = res.chain.propensity
        _frame_to_sheet(wb.create_sheet("Propensity model"),
                        pd.DataFrame({"term": fit.params.index, "coefficient": fit.params.to_numpy(),
                                      "std_error": fit.bse.to_numpy()}))
    if not res.estimates.empty:
        _frame_to_sheet(wb.create_sheet("Estimates"), res.estimates)
    ws = wb.create_sheet("Cautions")
    ws.append(["caution"])
    for text in CAUTIONS:
        ws.append([text])
    ws.column_dimensions["A"].width = 110
    for sheet in wb.worksheets:
        for c in sheet[1]:
            c.font = Font(bold=True)
        sheet.freeze_panes = "A2"
    from skipwise.io.inert import inert_workbook

    inert_workbook(wb)  # names and labels from data stay text, never formulas
    with atomic_output(path, overwrite=overwrite) as tmp:
        wb.save(tmp)
    return Path(path)
