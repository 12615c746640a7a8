"""The "Items" and "Subgroups" sheets: per-item counts and rates, and rates within groups."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import pandas as pd

from skipwise.report import styles as st
from skipwise.report.tables import ITEM_RATE, ITEM_RATE_W, SubgroupTable

__all__ = ["ItemsLayout", "write_items_sheet", "write_subgroups_sheet", "ITEMS_HEADER_ROW"]

#: Row of the Items sheet's header (title and definition note above it).
ITEMS_HEADER_ROW = 3

_TEXT_COLS = ("Section", "Item", "Label", "Asked if (rule as written)", "Below minimum base")
#: A rate on a base under the minimum: shown, with a marker (the cell stays a number).
SMALL_PCT = st.PCT + '" *"'


@dataclass(frozen=True, kw_only=True)
class ItemsLayout:
    """Where the Items sheet put things (for the charts)."""

    title: str
    first_row: int
    last_row: int
    item_col: int
    rate_col: int


def _formats(frame: pd.DataFrame) -> dict[str, str]:
    fmts: dict[str, str] = {}
    for col in frame.columns:
        name = str(col)
        if name in _TEXT_COLS:
            continue
        if name.endswith("rate") or "rate (" in name:
            fmts[name] = st.PCT
        elif "weighted" in name or frame[col].dtype.kind == "f":
            fmts[name] = st.WEIGHTED
        else:
            fmts[name] = st.INT
    return fmts


def write_items_sheet(wb: Any, table: pd.DataFrame, *, title: str = "Items") -> ItemsLayout:
    """One row per item in interview order; frozen header and item columns, auto filter, percentages."""
    ws = wb.create_sheet(title)
    st.printable(ws)
    cols = [str(c) for c in table.columns]
    widths = []
    for c in cols:
        if c in _TEXT_COLS:
            hi = 16 if c == "Section" else (24 if c == "Item" else 48)
            widths.append(st.text_width(table[c].head(500), header="" if c != "Item" else c, lo=8, hi=hi))
        else:
            widths.append(13.0)
    st.set_widths(ws, widths)
    ws.freeze_panes = f"C{ITEMS_HEADER_ROW + 1}"
    last = ITEMS_HEADER_ROW + len(table)
    ws.auto_filter.ref = st.table_ref(ITEMS_HEADER_ROW, last, len(cols))
    ws.append(st.title_row(ws, "Item nonresponse by item (interview order)"))
    ws.append(st.note_row(ws, (
        "D = cells in the item's universe excluding breakoff and left_blank. Answered rate, item nonresponse "
        "rate ((nonresponse reasons + item_missing) / D) and fault rate ((wrong_code + invalid where asked) "
        "/ D) add up to 100%; each reason's rate uses D too. gate_unknown, breakoff, off_route, left_blank "
        "and invalid values where not asked are counted apart. Items with D under the minimum base are "
        "marked and left out of rankings and charts. Status meanings: see the Overview.")))
    ws.append(st.header_row(ws, cols))
    for row in st.frame_rows(ws, table, _formats(table), wrap=("Asked if (rule as written)",)):
        ws.append(row)
    rate_col = cols.index(ITEM_RATE_W if ITEM_RATE_W in cols else ITEM_RATE) + 1
    return ItemsLayout(title=title, first_row=ITEMS_HEADER_ROW + 1, last_row=last,
                       item_col=cols.index("Item") + 1, rate_col=rate_col)


def write_subgroups_sheet(wb: Any, sub: SubgroupTable | None, items: pd.DataFrame, *,
                          title: str = "Subgroups") -> None:
    """Item nonresponse rate of each item (rows) in each group value (columns)."""
    ws = wb.create_sheet(title)
    st.printable(ws)
    if sub is None or sub.rates.shape[1] == 0:
        st.set_widths(ws, [90])
        ws.append(st.title_row(ws, "Item nonresponse rate by subgroup"))
        ws.append(st.note_row(ws, "No grouping variable was given. Run the report with --by COLUMN "
                                  "(or by=(...) in Python) to compare item nonresponse across groups."))
        return
    groups = list(sub.rates.columns)
    header = ["Section", "Item", "Label", "All cases"] + [f"{var} = {val}" for var, val in groups]
    st.set_widths(ws, [14, st.text_width(items["Item"], header="Item", hi=24),
                       st.text_width(items["Label"].head(500), hi=40), 12] + [14] * len(groups))
    header_row = 4
    ws.freeze_panes = f"D{header_row + 1}"
    last = header_row + 1 + len(items)
    ws.auto_filter.ref = st.table_ref(header_row, last, len(header))
    kind = "weighted" if sub.weighted else "unweighted"
    ws.append(st.title_row(ws, f"Item nonresponse rate by subgroup ({kind})"))
    ws.append(st.note_row(ws, (
        "Within each group: (nonresponse reasons + item_missing) / cases in universe excluding breakoff and left_blank"
        + (", as ratios of weighted totals." if sub.weighted else ".")
        + " Blank: no case of the group was in the item's universe. Small groups give unstable rates.")))
    ws.append(st.note_row(ws, "Group values of missing cells are shown as '(missing)'. A rate marked * rests on "
                              f"fewer than {sub.min_base} cells in universe (the minimum base): read it with care."))
    ws.append(st.header_row(ws, header))
    size_fmt = st.WEIGHTED if sub.weighted else st.INT
    size_row = [st.text_cell(ws, ""), st.text_cell(ws, "(cases in group)"), st.text_cell(ws, ""),
                st.value_cell(ws, float(sub.sizes.groupby(level=0).sum().iloc[0]) if len(sub.sizes) else None, size_fmt)]
    size_row += [st.value_cell(ws, sub.sizes[(var, val)], size_fmt) for var, val in groups]
    ws.append(size_row)
    overall = ITEM_RATE_W if sub.weighted and ITEM_RATE_W in items.columns else ITEM_RATE
    for i, item in enumerate(items["Item"]):
        row = [st.text_cell(ws, items["Section"].iat[i]), st.text_cell(ws, item), st.text_cell(ws, items["Label"].iat[i]),
               st.value_cell(ws, items[overall].iat[i], st.PCT)]
        flags = sub.small.loc[item].to_numpy() if sub.small is not None else [False] * len(groups)
        row += [st.value_cell(ws, v, SMALL_PCT if f else st.PCT) for v, f in zip(sub.rates.loc[item].to_numpy(), flags)]
        ws.append(row)
