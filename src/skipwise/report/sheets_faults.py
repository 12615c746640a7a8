"""The "Routing faults" sheet: one row per fault (bounded) and a count per item beside it."""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from openpyxl.cell import WriteOnlyCell
from openpyxl.cell.cell import ERROR_CODES
from openpyxl.utils import get_column_letter

from skipwise import sheetstyle as st

__all__ = ["write_faults_sheet", "FAULTS_HEADER_ROW"]

#: Most rows of the header-to-listing layout before the header (title, two explanation lines, blank).
FAULTS_HEADER_ROW = 12
#: Fault rows in the print area (the sheet and the CSV hold them all).
PRINT_ROWS = 200

_LIST_HEADER = {"case_id": "Case id", "item": "Item", "status": "Status", "value": "Stored value",
                "rule": "Asked if (rule as written)", "inputs": "Rule inputs (stored values)"}


def _clean_column(values: pd.Series) -> tuple[np.ndarray, np.ndarray]:
    """Cleaned text (vectorized) and a mask of cells that would read as a formula."""
    text = st.clean_texts(values.astype(object).where(values.notna(), "").astype(str))
    arr = text.to_numpy(dtype=object)
    return arr, text.str.startswith("=").to_numpy(dtype=bool)


def write_faults_sheet(wb: Any, rows: pd.DataFrame, total: int, counts: pd.DataFrame, *,
                       case_ids: bool, title: str = "Routing faults", print_rows: int = PRINT_ROWS) -> None:
    """Write the fault list (at most ``len(rows)`` lines of ``total``) and the per-item counts.

    The print area covers the first ``print_rows`` faults (the full listing is in the sheet and in the
    package's ``*_faults.csv``); the header row repeats on every printed page.

    Parameters
    ----------
    rows
        Fault records (``case_id item status value rule inputs``), already capped.
    total
        Number of faults in the whole file.
    counts
        Per-item counts (``item`` and one column per fault status plus ``total``).
    case_ids
        False leaves the case id column out altogether.
    """
    shown = len(rows)
    if total == 0:
        note = "No routing faults were found."
    elif shown < total:
        note = (f"Showing the first {shown:,} of {total:,} faults (file order, then interview order); "
                "the counts per item on the right cover all of them.")
    else:
        note = f"All {total:,} faults are listed, in file order, then interview order."
    printed = (f" Printed: the first {print_rows:,} rows; the full listing is the package's *_faults.csv."
               if shown > print_rows else "")
    s = st.SheetWriter(wb, title, title="Routing faults: off_route, wrong_code and invalid cells",
                       explanation=[note + printed,
                                    "off_route = an answer where the routing says not asked; wrong_code = a not-asked "
                                    "code where asked; invalid = a value outside the item's values. "
                                    + ("This sheet lists case ids: share it only under your organization's data "
                                       "protection rules." if case_ids
                                       else "Case ids were left out of this workbook (--no-case-ids).")])
    keys = [k for k in _LIST_HEADER if case_ids or k != "case_id"]
    n_list = len(keys)
    count_cols = list(counts.columns)
    widths = {"case_id": 14, "item": 18, "status": 24, "value": 16, "rule": 40, "inputs": 48}
    count_heads = ["Item" if c == "item" else ("All faults" if c == "total" else st.human(c)) for c in count_cols]
    head_names = [_LIST_HEADER[k] for k in keys] + [""] + count_heads
    n_lines = max(shown, len(counts))
    ref = s.header(head_names, widths=[widths[k] for k in keys] + [3, 18] + [11] * (len(count_cols) - 1),
                   count=n_lines)
    for j, k in enumerate(keys, start=1):
        s.width(j, widths[k])
    s.width(n_list + 1, 3)
    columns = {}
    formula_like = np.zeros(shown, dtype=bool)
    for k in keys:
        if k == "case_id":
            columns[k] = rows[k].to_numpy(dtype=object)
            if rows[k].dtype.kind not in "biuf":
                arr, bad = _clean_column(rows[k])
                columns[k], formula_like = arr, formula_like | bad
        else:
            arr, bad = _clean_column(rows[k])
            columns[k], formula_like = arr, formula_like | bad
    if "status" in columns:  # words beside the token (the token stays for machines)
        words = {t: f"{st.human(t)} ({t})" for t in set(columns["status"].tolist()) if isinstance(t, str)}
        columns["status"] = np.array([words.get(t, t) for t in columns["status"]], dtype=object)
    count_values = counts.to_numpy(dtype=object)
    ws = s.ws
    numeric_ids = case_ids and rows["case_id"].dtype.kind in "biuf"

    def line(i: int) -> list:
        # Rows here are faults (capped), not respondents: one row, cell by cell, where the columns cannot say it.
        if i < shown:
            if formula_like[i]:
                row = [text_cell(ws, columns[k][i]) if isinstance(columns[k][i], str)
                       else st.plain(columns[k][i]) for k in keys]
            else:
                row = [st.plain(columns[k][i]) for k in keys]
            if numeric_ids:
                row[0] = id_cell(ws, row[0])
        else:
            row = [None] * n_list
        if i < len(counts):
            row.append(None)
            row += [text_cell(ws, count_values[i, 0])] + [int_cell(ws, v) for v in count_values[i, 1:]]
        return row

    # The listing column by column; row by row (line) only beside the counts, and where a stored text
    # would read as a formula or an error value as a plain value.
    fast = np.zeros(n_lines, dtype=bool)
    fast[len(counts):shown] = True
    listing = []
    for k in keys:
        if k == "case_id" and numeric_ids and rows[k].dtype.kind != "b":
            listing.append(st.Column("number", rows[k].to_numpy(), "0"))
        elif k == "case_id" and numeric_ids:
            fast[:] = False
        else:
            listing.append(st.Column("text", columns[k]))
            fast[:shown] &= ~formula_like & ~np.isin(columns[k], ERROR_CODES)
    s.columns(line, n_lines, len(head_names), fast, listing)
    s.close(print_rows=print_rows)
    if ref.last_row >= ref.first_row:
        s.ws.auto_filter.ref = f"A{ref.header_row}:{get_column_letter(n_list)}{ref.header_row + max(shown, 1)}"


def text_cell(ws: Any, value: object) -> Any:
    """A string cell (a leading ``=`` stays text)."""
    cell = WriteOnlyCell(ws, value=None)
    cell.value = st.clean_text(value)
    cell.data_type = "s"
    return cell


def id_cell(ws: Any, value: object) -> Any:
    """A numeric case id: digits as stored, no thousands separator."""
    cell = WriteOnlyCell(ws, value=value)
    cell.number_format = "0"
    return cell


def int_cell(ws: Any, value: object) -> Any:
    cell = WriteOnlyCell(ws, value=st.plain(value))
    cell.number_format = st.INT
    return cell
