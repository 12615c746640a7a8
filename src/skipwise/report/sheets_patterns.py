"""The "Patterns" sheet: which items go missing together, as a shaded grid."""

from __future__ import annotations

from typing import Any

import pandas as pd

from skipwise import sheetstyle as st
from skipwise.report.patterns import PatternTable

__all__ = ["write_patterns_sheet"]



def write_patterns_sheet(wb: Any, pt: PatternTable, rates: pd.Series, *, title: str = "Patterns") -> None:
    """Most frequent joint nonresponse patterns over the items with the highest rates.

    ``rates`` holds each item's (unweighted) item nonresponse rate, shown above its grid column.
    A marked square is item nonresponse, the one coding of patterns across the package.
    """
    weighted = pt.weighted is not None
    k = len(pt.items)
    if k == 0:
        s = st.SheetWriter(wb, title, title="Joint patterns of item nonresponse",
                           explanation="No item (at the minimum base or above) has any item nonresponse, so there is "
                                       "no pattern to show.")
        s.close()
        return
    s = st.SheetWriter(wb, title, title="Joint patterns of item nonresponse",
                       explanation=[
                           f"Columns: the {k} items with the highest item nonresponse rate (items under the minimum "
                           f"base left out), in interview order. {st.MARK} = item nonresponse (a reason or "
                           "item_missing); blank = any other status. Shares are over all cases.",
                           f"{pt.distinct:,} distinct patterns over these items; the {len(pt.counts):,} most frequent "
                           "are shown. Columns marked together show items that go missing together."])
    items = list(pt.items)
    lead = ["Pattern", "Cases", "Share of cases"] + (["Weighted share"] if weighted else []) + ["Items missing"]
    rows = {"Pattern": [str(r + 1) for r in range(len(pt.counts))] + ["All others"],
            "Cases": list(pt.counts) + [pt.other_cases],
            "Share of cases": list(pt.shares) + [pt.other_cases / max(pt.total_cases, 1)]}
    if weighted:
        tw = pt.total_weight
        rows["Weighted share"] = [w / tw if tw else None for w in pt.weighted] + \
                                 [pt.other_weight / tw if tw else None]
    rows["Pattern"] = list(range(1, len(pt.counts) + 1)) + ["All others"]
    rows["Items missing"] = [int(pt.grid[r].sum()) for r in range(len(pt.counts))] + [None]
    frame = pd.DataFrame(rows)
    for j, item in enumerate(items):
        frame[item] = list(pt.grid[:, j].astype(bool)) + [False]
    s.cells([None] * (len(lead) - 1) + [("Item rate", None, "label")]
            + [(rates.get(i), st.PCT, "num") for i in items])
    ref = s.table(frame, formats={"Pattern": st.INT, "Cases": st.INT, "Share of cases": st.PCT, "Weighted share": st.PCT,
                                  "Items missing": st.INT},
                  headers={i: i for i in items}, rotate=items, marks=items, freeze_col=len(lead) + 1)
    for j in range(len(lead) + 1, len(lead) + k + 1):
        s.width(j, 6.5)  # a rate of 100.0% fits; no "###"
    # the last line ("All others") has no pattern: blank squares, not unmarked ones
    last = s._rows[ref.last_row - 1]
    for j in range(len(lead), len(lead) + k):
        last[j] = None
    s.close()
