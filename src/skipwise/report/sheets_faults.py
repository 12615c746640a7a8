"""The "Routing faults" sheet: one row per fault (bounded) and a count per item beside it."""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from skipwise.report import styles as st

__all__ = ["write_faults_sheet", "FAULTS_HEADER_ROW"]

FAULTS_HEADER_ROW = 4

_LIST_HEADER = {"case_id": "Case id", "item": "Item", "status": "Status", "value": "Stored value",
                "rule": "Asked if (rule as written)", "inputs": "Rule inputs (stored values)"}


def _clean_column(values: pd.Series) -> tuple[np.ndarray, np.ndarray]:
    """Cleaned text (vectorized) and a mask of cells that would read as a formula."""
    text = st.clean_texts(values.astype(object).where(values.notna(), "").astype(str))
    arr = text.to_numpy(dtype=object)
    return arr, text.str.startswith("=").to_numpy(dtype=bool)


def write_faults_sheet(wb: Any, rows: pd.DataFrame, total: int, counts: pd.DataFrame, *,
                       case_ids: bool, title: str = "Routing faults") -> None:
    """Write the fault list (at most ``len(rows)`` lines of ``total``) and the per-item counts.

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
    ws = wb.create_sheet(title)
    st.printable(ws)
    keys = [k for k in _LIST_HEADER if case_ids or k != "case_id"]
    n_list = len(keys)
    count_cols = list(counts.columns)
    widths = {"case_id": 14, "item": 18, "status": 12, "value": 16, "rule": 40, "inputs": 48}
    st.set_widths(ws, [widths[k] for k in keys] + [3, 18] + [11] * (len(count_cols) - 1))
    ws.freeze_panes = f"A{FAULTS_HEADER_ROW + 1}"
    ws.auto_filter.ref = st.table_ref(FAULTS_HEADER_ROW, FAULTS_HEADER_ROW + len(rows), n_list)
    ws.append(st.title_row(ws, "Routing faults: off_route, wrong_code and invalid cells"))
    shown = len(rows)
    if total == 0:
        note = "No routing faults were found."
    elif shown < total:
        note = (f"Showing the first {shown:,} of {total:,} faults (file order, then interview order); "
                "the counts per item on the right cover all of them.")
    else:
        note = f"All {total:,} faults are listed, in file order, then interview order."
    ws.append(st.note_row(ws, note))
    ws.append(st.note_row(ws, (
        "This sheet lists case ids: share it only under your organization's data protection rules."
        if case_ids else "Case ids were left out of this workbook (--no-case-ids).")))
    head = st.header_row(ws, [_LIST_HEADER[k] for k in keys]) + [None]
    head += st.header_row(ws, ["Item" if c == "item" else ("All faults" if c == "total" else c) for c in count_cols])
    ws.append(head)
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
    count_values = counts.to_numpy(dtype=object)
    n_lines = max(shown, len(counts))
    # Rows here are faults (capped), not respondents; the sheet API takes one row at a time.
    for i in range(n_lines):
        if i < shown:
            if formula_like[i]:
                line = [st.text_cell(ws, columns[k][i]) if isinstance(columns[k][i], str)
                        else st.plain(columns[k][i]) for k in keys]
            else:
                line = [st.plain(columns[k][i]) for k in keys]
        else:
            line = [None] * n_list
        if i < len(counts):
            line.append(None)
            line += [st.text_cell(ws, count_values[i, 0])] + [st.value_cell(ws, v, st.INT) for v in count_values[i, 1:]]
        ws.append(line)
