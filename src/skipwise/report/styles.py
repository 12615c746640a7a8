"""Look of the item-nonresponse workbook: colours, fonts, number formats, safe cells.

The workbook is written in openpyxl's streaming (write-only) mode, so every
styled cell is a :class:`~openpyxl.cell.WriteOnlyCell` made here.  Text from
the data (stored values, labels, rules) passes through :func:`text_cell`,
which strips characters a worksheet cannot hold, truncates to the cell limit
and never lets a value that starts with ``=`` become a formula.
"""

from __future__ import annotations

import math
import re
from typing import Any, Iterable, Sequence

import numpy as np
import pandas as pd
from openpyxl.cell import WriteOnlyCell
from openpyxl.styles import Alignment, Border, Font, PatternFill, Side
from openpyxl.utils import get_column_letter

__all__ = [
    "EXCEL_MAX_ROWS", "EXCEL_MAX_CELL_CHARS", "PCT", "INT", "DEC", "WEIGHTED",
    "clean_text", "clean_texts", "text_cell", "value_cell", "header_row", "title_row", "note_row",
    "set_widths", "grid_cell", "table_ref",
]

#: Rows a worksheet can hold (Excel 2007 and later).
EXCEL_MAX_ROWS = 1_048_576
#: Characters a cell can hold.
EXCEL_MAX_CELL_CHARS = 32_767

PCT = "0.0%"
INT = "#,##0"
DEC = "#,##0.00"
WEIGHTED = "#,##0.0"

# Colours of our own: a slate header, a teal accent, an amber grid for missing cells.
_HEADER_FILL = PatternFill("solid", fgColor="2F4858")
_HEADER_FONT = Font(bold=True, color="FFFFFF")
_TITLE_FONT = Font(bold=True, size=14, color="2F4858")
_SUBTITLE_FONT = Font(bold=True, size=11, color="33658A")
_NOTE_FONT = Font(italic=True, size=9, color="555555")
_MISSING_FILL = PatternFill("solid", fgColor="C8553D")
_MISSING_FONT = Font(bold=True, color="FFFFFF", size=9)
_PRESENT_FILL = PatternFill("solid", fgColor="F4EBD9")
_PRESENT_FONT = Font(color="B8AE9C", size=9)
_THIN = Side(style="thin", color="FFFFFF")
_GRID_BORDER = Border(left=_THIN, right=_THIN, top=_THIN, bottom=_THIN)
_WRAP_TOP = Alignment(wrap_text=True, vertical="top")
_CENTER = Alignment(horizontal="center", vertical="center")

_ILLEGAL = re.compile(r"[\000-\010\013\014\016-\037]")


def clean_text(value: object) -> str:
    """Text a worksheet cell can hold: no control characters, at most the cell limit."""
    text = _ILLEGAL.sub("\ufffd", str(value))
    if len(text) > EXCEL_MAX_CELL_CHARS:
        text = text[: EXCEL_MAX_CELL_CHARS - 1] + "\u2026"
    return text


def clean_texts(text: pd.Series) -> pd.Series:
    """:func:`clean_text` over a whole column of strings at once."""
    text = text.str.replace(_ILLEGAL.pattern, "\ufffd", regex=True)
    long = text.str.len() > EXCEL_MAX_CELL_CHARS
    if long.any():
        text = text.where(~long, text.str.slice(0, EXCEL_MAX_CELL_CHARS - 1) + "\u2026")
    return text


def text_cell(ws: Any, value: object, *, font: Font | None = None, wrap: bool = False) -> WriteOnlyCell:
    """A string cell; a leading ``=`` stays text (no formula from data)."""
    cell = WriteOnlyCell(ws, value=None)
    cell.value = clean_text(value)
    cell.data_type = "s"
    if font is not None:
        cell.font = font
    if wrap:
        cell.alignment = _WRAP_TOP
    return cell


def plain(value: object) -> object:
    """A Python scalar openpyxl accepts: numpy scalars unwrapped, NaN and None as empty."""
    if value is None:
        return None
    if isinstance(value, (np.bool_, bool)):
        return bool(value)
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        v = float(value)
        return None if math.isnan(v) or math.isinf(v) else v
    if isinstance(value, int):
        return value
    return value


def value_cell(ws: Any, value: object, fmt: str | None = None, *, bold: bool = False) -> Any:
    """A cell with a number format; strings go through :func:`text_cell`."""
    v = plain(value)
    if isinstance(v, str):
        return text_cell(ws, v, font=Font(bold=True) if bold else None)
    cell = WriteOnlyCell(ws, value=v)
    if fmt is not None:
        cell.number_format = fmt
    if bold:
        cell.font = Font(bold=True)
    return cell


def header_row(ws: Any, names: Sequence[str]) -> list[WriteOnlyCell]:
    cells = []
    for name in names:
        c = text_cell(ws, name, font=_HEADER_FONT)
        c.fill = _HEADER_FILL
        c.alignment = Alignment(wrap_text=True, vertical="center")
        cells.append(c)
    return cells


def title_row(ws: Any, text: str, *, sub: bool = False) -> list[WriteOnlyCell]:
    return [text_cell(ws, text, font=_SUBTITLE_FONT if sub else _TITLE_FONT)]


def note_row(ws: Any, text: str, *, col: int = 0) -> list[Any]:
    return [None] * col + [text_cell(ws, text, font=_NOTE_FONT)]


def grid_cell(ws: Any, missing: bool) -> WriteOnlyCell:
    """One square of the pattern grid: 1 and a dark fill for nonresponse, 0 and a pale fill otherwise."""
    cell = WriteOnlyCell(ws, value=1 if missing else 0)
    cell.fill = _MISSING_FILL if missing else _PRESENT_FILL
    cell.font = _MISSING_FONT if missing else _PRESENT_FONT
    cell.alignment = _CENTER
    cell.border = _GRID_BORDER
    return cell


def set_widths(ws: Any, widths: Iterable[float]) -> None:
    """Column widths (characters); must be called before the first row is written."""
    for j, w in enumerate(widths, start=1):
        ws.column_dimensions[get_column_letter(j)].width = float(w)


def text_width(values: Iterable[object], *, header: str = "", lo: float = 6, hi: float = 60) -> float:
    """A sensible column width for text: the longest of header and (sampled) values, bounded."""
    longest = len(header)
    for v in values:
        if v is not None:
            longest = max(longest, len(str(v)))
    return float(min(max(longest + 2, lo), hi))


def table_ref(first_row: int, last_row: int, n_cols: int) -> str:
    """``A<first>:<col><last>`` for an auto filter over a table."""
    return f"A{first_row}:{get_column_letter(max(n_cols, 1))}{max(last_row, first_row)}"


def frame_rows(ws: Any, frame: Any, formats: dict[str, str] | None = None, *, wrap: Sequence[str] = ()) -> Iterable[list[Any]]:
    """Styled rows of a small table (items, groups, bins): one list of cells per frame row.

    Rows here are items or table lines, never respondents.
    """
    formats = formats or {}
    columns = list(frame.columns)
    fmts = [formats.get(str(col)) for col in columns]
    wraps = [col in wrap for col in columns]
    for values in frame.itertuples(index=False, name=None):
        row = []
        for v, fmt, wr in zip(values, fmts, wraps):
            v = plain(v)
            if isinstance(v, str):
                row.append(text_cell(ws, v, wrap=wr))
            else:
                row.append(value_cell(ws, v, fmt))
        yield row
