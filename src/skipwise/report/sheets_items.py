"""The "Items" and "Subgroups" sheets: per-item counts and rates, and rates within groups."""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Any

import pandas as pd

from skipwise import sheetstyle as st
from skipwise.report.tables import ITEM_RATE, ITEM_RATE_W, SubgroupTable

__all__ = ["ItemsLayout", "write_items_sheet", "write_subgroups_sheet", "column_header", "SMALL_PCT"]


_TEXT_COLS = ("Section", "Item", "Label", "Who was asked", "Asked if (rule as written)", "Below minimum base")


@dataclass(frozen=True, kw_only=True)
class ItemsLayout:
    """Where the Items sheet put things (for the charts)."""

    title: str
    first_row: int
    last_row: int
    item_col: int
    rate_col: int


#: A rate on a base under the minimum: shown, with a marker (the cell stays a number).
SMALL_PCT = st.PCT + '" *"'


def _formats(frame: pd.DataFrame) -> dict[str, str]:
    fmts: dict[str, str] = {}
    for col in frame.columns:
        name = str(col)
        if name in _TEXT_COLS or frame[col].dtype.kind not in "biuf":
            continue
        if name.endswith("rate") or "rate (" in name:
            fmts[name] = st.PCT
        elif "weighted" in name or frame[col].dtype.kind == "f":
            fmts[name] = st.WEIGHTED
        else:
            fmts[name] = st.INT
    return fmts


#: Short words for status tokens in headers (the Overview gives their meanings).
HEADER_WORDS = {"dont_know": "Don't know", "item_missing": "Item missing", "gate_unknown": "Gate unknown",
                "breakoff": "Break-off", "left_blank": "Left blank", "off_route": "Off route",
                "wrong_code": "Wrong code"}


def column_header(name: str) -> str:
    """A human header; a status or reason token keeps its token beside the words (``Don't know (dont_know)``)."""
    base, sep, rest = name.partition(" rate")
    if not _TOKEN.match(base):
        return name
    words = HEADER_WORDS.get(base, base.replace("_", " "))
    words = words[:1].upper() + words[1:] + (" rate" if sep else "")
    token = "" if "_" not in base and words.lower().startswith(base) else f" ({base})"
    return f"{words}{token}{rest}"


_TOKEN = re.compile(r"^[a-z][a-z0-9_]*$")


def write_items_sheet(wb: Any, table: pd.DataFrame, *, title: str = "Items") -> ItemsLayout:
    """One row per item in interview order; frozen header and item columns, auto filter, percentages."""
    s = st.SheetWriter(wb, title, title="Item nonresponse by item (interview order)",
                       explanation=(
                           "D = cells in the item's universe excluding breakoff and left_blank. Answered rate, item "
                           "nonresponse rate ((nonresponse reasons + item_missing) / D) and fault rate ((wrong_code + "
                           "invalid where asked) / D) add up to 100%; each reason's rate uses D too. gate_unknown, "
                           "breakoff, off_route, left_blank and invalid values where not asked are counted apart. "
                           "Items with D under the minimum base are marked and left out of rankings and charts."),
                       source="Groves et al. 2009, Survey Methodology, ch. 6.")
    cols = [str(c) for c in table.columns]
    ref = s.table(table, formats=_formats(table), headers={c: column_header(c) for c in cols},
                  wrap=("Label", "Who was asked", "Asked if (rule as written)"), freeze_col=3, max_width=14)
    for c, hi in (("Section", 14), ("Item", 20), ("Label", 32), ("Who was asked", 36),
                  ("Asked if (rule as written)", 30)):
        if c in ref.columns:
            s.width(ref.columns[c], min(st_text_width(table[c], c), hi))
    s.close()
    rate_col = cols.index(ITEM_RATE_W if ITEM_RATE_W in cols else ITEM_RATE) + 1
    return ItemsLayout(title=title, first_row=ref.first_row, last_row=ref.last_row,
                       item_col=cols.index("Item") + 1, rate_col=rate_col)


def st_text_width(values: pd.Series, header: str) -> float:
    longest = max([len(str(header))] + [len(str(v)) for v in values.head(500) if v is not None])
    return float(max(longest + 2, 8))


def write_subgroups_sheet(wb: Any, sub: SubgroupTable | None, items: pd.DataFrame, *,
                          title: str = "Subgroups") -> None:
    """Item nonresponse rate of each item (rows) in each group value (columns)."""
    if sub is None or sub.rates.shape[1] == 0:
        s = st.SheetWriter(wb, title, title="Item nonresponse rate by subgroup",
                           explanation=("No grouping variable was given. Run the report with --by COLUMN (or "
                                        "by=(...) in Python) to compare item nonresponse across groups."))
        s.close()
        return
    groups = list(sub.rates.columns)
    min_base = getattr(sub, "min_base", None)
    small = getattr(sub, "small", None)
    kind = "weighted" if sub.weighted else "unweighted"
    s = st.SheetWriter(wb, title, title=f"Item nonresponse rate by subgroup ({kind})",
                       explanation=(
                           "Within each group: (nonresponse reasons + item_missing) / D, the group's cells in the "
                           "item's universe excluding breakoff and left_blank" + (", as ratios of weighted totals."
                                                                                  if sub.weighted else ".")
                           + " Blank: no case of the group in the item's universe; '(missing)': no group value."
                           + (f" A rate marked * rests on fewer than {min_base} cells in D: read it with care."
                              if min_base is not None else " Small groups give unstable rates.")))
    overall = ITEM_RATE_W if sub.weighted and ITEM_RATE_W in items.columns else ITEM_RATE
    names = [f"{var} = {val}" for var, val in groups]
    frame = pd.DataFrame({"Section": items["Section"].to_numpy(), "Item": items["Item"].to_numpy(),
                          "Label": items["Label"].to_numpy(), "All cases": items[overall].to_numpy()})
    size = pd.DataFrame({"Section": [""], "Item": ["(cases in group)"], "Label": [""],
                         "All cases": [float(sub.sizes.groupby(level=0).sum().iloc[0]) if len(sub.sizes) else None]})
    for (var, val), name in zip(groups, names):
        frame[name] = sub.rates[(var, val)].reindex(items["Item"]).to_numpy()
        size[name] = [sub.sizes[(var, val)]]
    size_fmt = st.WEIGHTED if sub.weighted else st.INT
    s.table(size, formats={c: size_fmt for c in ["All cases", *names]}, headers={n: n for n in names},
            main=False, heading="Cases in each group")
    s.blank()
    fmts = {c: st.PCT for c in ["All cases", *names]}
    ref = s.table(frame, formats=fmts, headers={n: n for n in names}, wrap=("Label",), freeze_col=4, max_width=14)
    s.width(ref.columns["Section"], 12)
    s.width(ref.columns["Item"], min(st_text_width(items["Item"], "Item"), 20))
    s.width(ref.columns["Label"], 30)
    if small is not None:
        # mark small cells: same number, a format with a star (the rates engineer's marker)
        for i, item in enumerate(items["Item"]):
            row = s._rows[ref.first_row - 1 + i]
            flags = small.loc[item].to_numpy()
            for j, f in enumerate(flags):
                if f:
                    v, _fmt, k = row[4 + j]
                    row[4 + j] = (v, SMALL_PCT, k)
    s.close()
