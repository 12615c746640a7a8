"""Workbook cells from data are text or numbers, never formulas.

openpyxl (and pandas' ``to_excel`` through it) stores any string starting with ``=``
as a formula, so an answer or value label such as ``=HYPERLINK(...)`` would become a
live formula in the delivered workbook (formula injection).  A cell of the string type
(``data_type = "s"``) is shown as the text written and never evaluated (ECMA-376 Part 1,
18.3.1.4 ``c``: the ``t`` attribute, ``s``/``inlineStr`` cells hold text, ``f`` holds a
formula).  skipwise itself writes no formulas, so every formula cell is turned into text.

CSV outputs are left byte-true: a CSV file has no cell types, and rewriting answers
(e.g. prefixing ``'``) would change the data; docs/bad-inputs.md says how to open one
safely.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pandas as pd

__all__ = ["inert_cell", "inert_workbook", "write_inert_excel"]


def inert_cell(cell: Any) -> Any:
    """Make one openpyxl cell (normal or write-only) hold its string as text, never a formula."""
    if isinstance(cell.value, str) and cell.data_type == "f":
        cell.data_type = "s"
    return cell


def inert_workbook(wb: Any) -> int:
    """Turn every formula cell of a normal-mode openpyxl workbook into text; return how many."""
    changed = 0
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for cell in row:
                if cell.data_type == "f" and isinstance(cell.value, str):
                    cell.data_type = "s"
                    changed += 1
    return changed


def write_inert_excel(frame: pd.DataFrame, path: str | Path) -> None:
    """``frame.to_excel(path, index=False)``, with every string cell (and header) kept as text."""
    with pd.ExcelWriter(path, engine="openpyxl") as writer:
        frame.to_excel(writer, index=False)
        inert_workbook(writer.book)
