"""The "Patterns" sheet: which items go missing together, as a shaded grid."""

from __future__ import annotations

from typing import Any

import pandas as pd
from openpyxl.styles import Alignment
from openpyxl.utils import get_column_letter

from skipwise.report import styles as st
from skipwise.report.patterns import PatternTable

__all__ = ["write_patterns_sheet", "PATTERNS_HEADER_ROW"]

PATTERNS_HEADER_ROW = 5


def write_patterns_sheet(wb: Any, pt: PatternTable, rates: pd.Series, *, title: str = "Patterns") -> None:
    """Most frequent joint nonresponse patterns over the items with the highest rates.

    ``rates`` holds each item's (unweighted) item nonresponse rate, shown above its grid column.
    """
    ws = wb.create_sheet(title)
    st.printable(ws)
    weighted = pt.weighted is not None
    lead = ["Pattern", "Cases", "Share of cases"] + (["Weighted share"] if weighted else []) + ["Items missing"]
    k = len(pt.items)
    st.set_widths(ws, [10, 11, 11] + ([11] if weighted else []) + [9] + [5] * k)
    ws.freeze_panes = f"{get_column_letter(len(lead) + 1)}{PATTERNS_HEADER_ROW + 1}"
    if k:
        ws.auto_filter.ref = st.table_ref(PATTERNS_HEADER_ROW, PATTERNS_HEADER_ROW + len(pt.counts), len(lead) + k)
    ws.append(st.title_row(ws, "Joint patterns of item nonresponse"))
    if k == 0:
        ws.append(st.note_row(ws, "No item has any item nonresponse, so there is no pattern to show."))
        return
    ws.append(st.note_row(ws, (
        f"Columns: the {k} items with the highest item nonresponse rate, in interview order. "
        "A filled square (1) is item nonresponse (a nonresponse reason or item_missing); a pale square (0) "
        "is any other status (answered, skipped, breakoff, ...). Shares are over all cases.")))
    ws.append(st.note_row(ws, (
        f"{pt.distinct:,} distinct patterns over these items; the {len(pt.counts):,} most frequent are shown. "
        "Columns that fill together mark items that go missing together.")))
    rate_row: list[Any] = [None] * (len(lead) - 1) + [st.text_cell(ws, "Item rate")]
    rate_row += [st.value_cell(ws, rates.get(item), st.PCT) for item in pt.items]
    ws.append(rate_row)
    head = st.header_row(ws, lead + list(pt.items))
    for c in head[len(lead):]:
        c.alignment = Alignment(text_rotation=90, horizontal="center", vertical="bottom")
    ws.append(head)
    shares = pt.shares
    # Rows here are patterns (at most top_patterns), not cases.
    for r in range(len(pt.counts)):
        row = [st.value_cell(ws, r + 1, st.INT), st.value_cell(ws, pt.counts[r], st.INT),
               st.value_cell(ws, shares[r], st.PCT)]
        if weighted:
            row.append(st.value_cell(ws, pt.weighted[r] / pt.total_weight if pt.total_weight else None, st.PCT))
        row.append(st.value_cell(ws, int(pt.grid[r].sum()), st.INT))
        row += [st.grid_cell(ws, bool(m)) for m in pt.grid[r]]
        ws.append(row)
    other = [st.text_cell(ws, "All others"), st.value_cell(ws, pt.other_cases, st.INT),
             st.value_cell(ws, pt.other_cases / max(pt.total_cases, 1), st.PCT)]
    if weighted:
        other.append(st.value_cell(ws, pt.other_weight / pt.total_weight if pt.total_weight else None, st.PCT))
    ws.append(other)
