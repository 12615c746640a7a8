"""The "Completeness" sheet (share of applicable items answered per case) and the "Charts" sheet."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import pandas as pd
from openpyxl.chart import BarChart, Reference

from skipwise.report import styles as st
from skipwise.report.sheets_items import ItemsLayout

__all__ = ["CompletenessLayout", "write_completeness_sheet", "write_charts_sheet", "CHART_MAX_ITEMS"]

COMPLETENESS_HEADER_ROW = 3
#: The item chart shows at most this many items (interview order); the Items sheet has them all.
CHART_MAX_ITEMS = 250
#: Column of the Charts sheet's own table of the worst items (right of the charts).
_TABLE_COL_INDEX = 30
_TABLE_COL = "AD"


@dataclass(frozen=True, kw_only=True)
class CompletenessLayout:
    title: str
    header_row: int
    first_row: int
    last_row: int      # last bin drawn in the chart (100 %)
    share_col: int


def write_completeness_sheet(wb: Any, table: pd.DataFrame, summary: list[tuple[str, object, str]], *,
                             title: str = "Completeness") -> CompletenessLayout:
    ws = wb.create_sheet(title)
    st.printable(ws)
    cols = [str(c) for c in table.columns]
    st.set_widths(ws, [44, 12, 14, 14])
    ws.freeze_panes = f"A{COMPLETENESS_HEADER_ROW + 1}"
    ws.auto_filter.ref = st.table_ref(COMPLETENESS_HEADER_ROW, COMPLETENESS_HEADER_ROW + len(table), len(cols))
    ws.append(st.title_row(ws, "Case completeness: share of applicable items answered"))
    ws.append(st.note_row(ws, (
        "Per case: answered items / items in the case's universe (breakoff cells count as applicable, "
        "not answered). Bins are tenths; exactly 100% has its own line.")))
    ws.append(st.header_row(ws, cols))
    fmts = {"Cases": st.INT, "Share of cases": st.PCT, "Weighted share": st.PCT}
    for row in st.frame_rows(ws, table, fmts):
        ws.append(row)
    ws.append([])
    ws.append(st.title_row(ws, "Summary", sub=True))
    kinds = {"int": st.INT, "pct": st.PCT, "dec": st.DEC}
    for label, value, kind in summary:
        ws.append([st.text_cell(ws, label), st.value_cell(ws, value, kinds[kind])])
    first = COMPLETENESS_HEADER_ROW + 1
    return CompletenessLayout(title=title, header_row=COMPLETENESS_HEADER_ROW, first_row=first,
                              last_row=first + 10, share_col=cols.index("Share of cases") + 1)


def write_charts_sheet(wb: Any, items: ItemsLayout, comp: CompletenessLayout, items_ws: Any, comp_ws: Any,
                       *, weighted: bool, title: str = "Charts", worst: pd.Series | None = None,
                       min_base: int | None = None) -> None:
    """Native bar charts of the item nonresponse rate by item and of case completeness.

    ``worst``: the items' rates at or above the minimum base, worst first; when given the item
    chart shows those (at most :data:`CHART_MAX_ITEMS`) from a small table on this sheet.
    """
    ws = wb.create_sheet(title)
    st.printable(ws)
    n_items = items.last_row - items.first_row + 1
    if worst is not None:
        n_items = len(worst)
    shown = min(n_items, CHART_MAX_ITEMS)
    ws.append(st.title_row(ws, "Charts"))
    note = "Charts read their figures from the Items and Completeness sheets."
    if worst is not None:
        note = ("The item chart shows the items with the highest item nonresponse rate, worst first, from the "
                f"table at column {_TABLE_COL}; items with D under the minimum base ({min_base}) are left out.")
    if worst is not None and not len(worst):
        note = f"No item has at least {min_base} cells in D (the minimum base): there is no item chart."
    if shown < n_items:
        note += f" The item chart shows the first {shown} of {n_items} items."
    ws.append(st.note_row(ws, note))
    if worst is not None:  # the chart's own data: item, rate (rows 3 .. 3 + shown)
        lead = [None] * (_TABLE_COL_INDEX - 1)
        ws.append(lead + [st.text_cell(ws, "Item"), st.text_cell(ws, str(worst.name or "Item nonresponse rate"))])
        for item, rate in worst.head(shown).items():
            ws.append(lead + [st.text_cell(ws, item), st.value_cell(ws, float(rate), st.PCT)])
        items_ws, items = ws, ItemsLayout(title=title, first_row=4, last_row=3 + shown,
                                          item_col=_TABLE_COL_INDEX, rate_col=_TABLE_COL_INDEX + 1)
    if n_items > 0:
        chart = BarChart()
        chart.type = "bar"  # horizontal bars: item names stay readable
        chart.style = 10
        chart.title = "Item nonresponse rate by item" + (" (weighted)" if weighted else "")
        chart.y_axis.title = "Item nonresponse rate"
        chart.y_axis.numFmt = "0%"
        chart.y_axis.majorGridlines = None
        chart.x_axis.scaling.orientation = "maxMin"  # first item at the top
        chart.legend = None
        last = items.first_row + shown - 1
        data = Reference(items_ws, min_col=items.rate_col, min_row=items.first_row - 1, max_row=last)
        cats = Reference(items_ws, min_col=items.item_col, min_row=items.first_row, max_row=last)
        chart.add_data(data, titles_from_data=True)
        chart.set_categories(cats)
        chart.x_axis.delete = False
        chart.y_axis.delete = False
        chart.width = 22
        chart.height = max(7.5, min(0.45 * shown + 3, 120.0))
        ws.add_chart(chart, "A4")
    comp_chart = BarChart()
    comp_chart.type = "col"
    comp_chart.style = 12
    comp_chart.title = "Cases by share of applicable items answered"
    comp_chart.y_axis.title = "Share of cases"
    comp_chart.y_axis.numFmt = "0%"
    comp_chart.legend = None
    data = Reference(comp_ws, min_col=comp.share_col, min_row=comp.header_row, max_row=comp.last_row)
    cats = Reference(comp_ws, min_col=1, min_row=comp.first_row, max_row=comp.last_row)
    comp_chart.add_data(data, titles_from_data=True)
    comp_chart.set_categories(cats)
    comp_chart.x_axis.delete = False
    comp_chart.y_axis.delete = False
    comp_chart.width = 22
    comp_chart.height = 9
    ws.add_chart(comp_chart, "N4" if n_items > 0 else "A4")
