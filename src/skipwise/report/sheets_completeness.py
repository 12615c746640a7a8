"""The "Completeness" sheet (share of applicable items answered per case) and the "Charts" sheet."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import pandas as pd
from openpyxl.chart import BarChart, Reference

from skipwise import sheetstyle as st

__all__ = ["CompletenessLayout", "write_completeness_sheet", "write_charts_sheet", "worst_items", "CHART_ITEMS"]

#: Items in the chart of the highest rates (the Items sheet has them all).
CHART_ITEMS = 15


@dataclass(frozen=True, kw_only=True)
class CompletenessLayout:
    title: str
    header_row: int
    first_row: int
    last_row: int      # last bin drawn in the chart (100 %)
    share_col: int


def write_completeness_sheet(wb: Any, table: pd.DataFrame, summary: list[tuple[str, object, str]], *,
                             title: str = "Completeness") -> CompletenessLayout:
    s = st.SheetWriter(wb, title, title="Case completeness: share of applicable items answered",
                       explanation=("Per case: answered items / items in the case's universe (breakoff cells count as "
                                    "applicable, not answered; left_blank cells of optional items do not count). Bins "
                                    "are tenths; exactly 100% has its own line. Shares are over all cases."))
    cols = [str(c) for c in table.columns]
    fmts = {"Cases": st.INT, "Share of cases": st.PCT, "Weighted share": st.PCT}
    ref = s.table(table, formats=fmts, headers={c: c for c in cols})
    s.width(1, 30)
    s.blank()
    kinds = {"int": st.INT, "pct": st.PCT, "dec": st.DEC}
    s.pairs([(label, value, kinds[kind]) for label, value, kind in summary], heading="Summary")
    s.close()
    return CompletenessLayout(title=title, header_row=ref.header_row, first_row=ref.first_row,
                              last_row=ref.first_row + 10, share_col=cols.index("Share of cases") + 1)


def write_charts_sheet(wb: Any, worst: pd.DataFrame, comp: CompletenessLayout, comp_ws: Any, *,
                       weighted: bool, min_base: int, title: str = "Charts") -> None:
    """Native bar charts: the items with the highest nonresponse rates, and case completeness.

    ``worst`` holds ``Item``, ``Item nonresponse rate`` and ``D`` of the items to chart, already
    sorted worst first and without items under the minimum base.
    """
    n = len(worst)
    kind = "weighted " if weighted else ""
    s = st.SheetWriter(wb, title, title="Charts",
                       explanation=((f"Left: the {n} items with the highest {kind}item nonresponse rate among items "
                                     f"with at least {min_base} cells in D (the minimum base), worst first. Right: "
                                     if n else f"No item with item nonresponse has at least {min_base} cells in D (the "
                                     "minimum base), so no item is charted. ")
                                    + "cases by share of applicable items answered (from the Completeness sheet)."))
    anchor_row = s.next_row
    if n:
        ref = s.table(worst, formats={"Item nonresponse rate": st.PCT, "D": st.INT},
                      headers={"D": "D (cells in universe)"})
        chart = BarChart()
        chart.type = "bar"  # horizontal bars: item names stay readable
        chart.style = 10
        chart.title = f"Highest {kind}item nonresponse rates"
        chart.y_axis.title = "Item nonresponse rate (share of D)"
        chart.x_axis.title = "Item"
        chart.y_axis.numFmt = "0%"
        chart.y_axis.majorGridlines = None
        chart.x_axis.scaling.orientation = "maxMin"  # worst item at the top
        chart.legend = None
        rate_col = ref.columns["Item nonresponse rate"]
        chart.add_data(Reference(s.ws, min_col=rate_col, min_row=ref.header_row, max_row=ref.last_row),
                       titles_from_data=True)
        chart.set_categories(Reference(s.ws, min_col=ref.columns["Item"], min_row=ref.first_row, max_row=ref.last_row))
        chart.x_axis.delete = False
        chart.y_axis.delete = False
        chart.width = 15
        chart.height = max(7.5, 0.6 * n + 3)
        s.chart(chart, f"E{anchor_row}")
    comp_chart = BarChart()
    comp_chart.type = "col"
    comp_chart.style = 12
    comp_chart.title = "Cases by share of applicable items answered"
    comp_chart.y_axis.title = "Share of cases"
    comp_chart.x_axis.title = "Share of applicable items answered"
    comp_chart.y_axis.numFmt = "0%"
    comp_chart.legend = None
    data = Reference(comp_ws, min_col=comp.share_col, min_row=comp.header_row, max_row=comp.last_row)
    cats = Reference(comp_ws, min_col=1, min_row=comp.first_row, max_row=comp.last_row)
    comp_chart.add_data(data, titles_from_data=True)
    comp_chart.set_categories(cats)
    comp_chart.x_axis.delete = False
    comp_chart.y_axis.delete = False
    comp_chart.width = 15
    comp_chart.height = 9
    s.chart(comp_chart, f"N{anchor_row}" if n else f"A{anchor_row}")
    s.close()


def worst_items(items: pd.DataFrame, rate_col: str, base_col: str, min_base: int, top: int = CHART_ITEMS) -> pd.DataFrame:
    """The ``top`` items with the highest rate among those with at least ``min_base`` cells in D."""
    base = pd.to_numeric(items[base_col], errors="coerce")
    ok = items[(base >= min_base) & items[rate_col].notna() & (items[rate_col] > 0)]
    ok = ok.sort_values([rate_col, "Item"], ascending=[False, True], kind="stable").head(top)
    return pd.DataFrame({"Item": ok["Item"].to_numpy(), "Item nonresponse rate": ok[rate_col].to_numpy(),
                         "D": base.loc[ok.index].to_numpy()})
