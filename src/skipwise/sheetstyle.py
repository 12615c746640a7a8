"""One look for every workbook skipwise writes: titles, explanations, tables, number formats, print setup.

The item report, the diagnostics workbook and the weighting workbook all write
their sheets through :class:`SheetWriter`.  A sheet opens with a title, a short
explanation of what its numbers are and over which denominator, and a source
line where a published method is used; tables get human headers, a number
format on every numeric cell, column widths that fit their headers, a frozen
header row, an auto filter and print titles; every sheet prints landscape,
one page wide (or, for a table too wide to be read at that scale, as few pages
wide as keep the print readable, with its key columns repeated on each page),
with the sheet name and page number in the footer.

Rows are buffered and written when the sheet is closed, so the same code
serves openpyxl's normal and streaming (write-only) workbooks: column widths,
row heights and frozen panes are known before the first row is streamed.
Text from data always becomes a string cell (never a formula).
"""

from __future__ import annotations

import math
import re
import textwrap
from copy import copy
from dataclasses import dataclass
from typing import Any, Callable, Iterable, Sequence

import numpy as np
import pandas as pd
from openpyxl.cell import WriteOnlyCell
from openpyxl.styles import Alignment, Border, Font, PatternFill, Side
from openpyxl.utils import get_column_letter

__all__ = [
    "FONT_NAME", "PCT", "INT", "WEIGHTED", "DEC", "STAT", "P_VALUE", "WEIGHT", "EXCEL_MAX_ROWS",
    "EXCEL_MAX_CELL_CHARS", "clean_text", "clean_texts", "plain", "stat_format", "human", "SheetWriter",
    "TableRef", "MARK", "yes_no", "house_workbook",
]

#: A font the Debian LibreOffice packages install (fonts-dejavu), named on every cell.
FONT_NAME = "DejaVu Sans"
EXCEL_MAX_ROWS = 1_048_576
EXCEL_MAX_CELL_CHARS = 32_767

PCT = "0.0%"            #: rates and shares: percent with one decimal
INT = "#,##0"           #: counts: thousands separators
WEIGHTED = "#,##0.0"    #: weighted counts and sums of weights
DEC = "#,##0.00"
STAT = "0.000"          #: statistics between about 0.1 and 10 (3-4 significant digits)
P_VALUE = '[<0.001]"<0.001";0.000'  #: p-values: three decimals, "<0.001" below
WEIGHT = "#,##0.0000"   #: a weight column, where the (nearly) full value is the point
#: What a marked pattern cell holds: item nonresponse (one coding across the package).
MARK = "\u25a0"

_SIZE = 9
_COLOURS = {"slate": "2F4858", "teal": "33658A", "grey": "555555", "rust": "C8553D", "sand": "F4EBD9"}


def _font(**kw: Any) -> Font:
    return Font(name=FONT_NAME, size=kw.pop("size", _SIZE), **kw)


_STYLES: dict[str, dict[str, Any]] = {
    "title": {"font": _font(bold=True, size=13, color=_COLOURS["slate"])},
    "explain": {"font": _font(size=9, color="333333")},
    "source": {"font": _font(italic=True, size=8, color=_COLOURS["grey"])},
    "sub": {"font": _font(bold=True, size=10, color=_COLOURS["teal"])},
    "note": {"font": _font(italic=True, size=8, color=_COLOURS["grey"])},
    "header": {"font": _font(bold=True, color="FFFFFF"), "fill": PatternFill("solid", fgColor=_COLOURS["slate"]),
               "alignment": Alignment(wrap_text=True, vertical="center")},
    "rotated": {"font": _font(bold=True, color="FFFFFF"), "fill": PatternFill("solid", fgColor=_COLOURS["slate"]),
                "alignment": Alignment(text_rotation=90, horizontal="center", vertical="bottom")},
    "label": {"font": _font(bold=True)},
    "label_top": {"font": _font(bold=True), "alignment": Alignment(vertical="top")},  # beside a wrapped text
    "text": {"font": _font()},
    "wrap": {"font": _font(), "alignment": Alignment(wrap_text=True, vertical="top")},
    "num": {"font": _font(), "alignment": Alignment(vertical="top")},
    "verdict": {"font": _font(bold=True, size=10, color="1B1B1B")},
    "left": {"font": _font(), "alignment": Alignment(horizontal="left")},
    "bold": {"font": _font(bold=True)},
    "mark": {"font": _font(bold=True, color="FFFFFF"), "fill": PatternFill("solid", fgColor=_COLOURS["rust"]),
             "alignment": Alignment(horizontal="center", vertical="center"),
             "border": Border(*(Side(style="thin", color="FFFFFF"),) * 4)},
    "unmarked": {"font": _font(color="B8AE9C"), "fill": PatternFill("solid", fgColor=_COLOURS["sand"]),
                 "alignment": Alignment(horizontal="center", vertical="center"),
                 "border": Border(*(Side(style="thin", color="FFFFFF"),) * 4)},
}

_ILLEGAL = re.compile(r"[\000-\010\013\014\016-\037]")
#: Sheets of at most this many rows are fitted on one page (common practice, no source).
SHORT_SHEET_ROWS = 40
#: Characters of explanation per printed line (landscape A4 at the usual scale).
LINE_CHARS = 125
#: Column-width units across the printable width of an A4 page at 100% (11.69 or 8.27 in less the
#: sheets' 0.4 in margins, at about 0.073 in per unit of the default font): landscape, portrait.
PAGE_WIDTH_UNITS = {True: 150.0, False: 102.0}
#: The smallest print scale a reader can still read at arm's length (common practice, no source).
MIN_PRINT_SCALE = 0.6


def pages_wide(widths: Sequence[float], repeated: int, page_units: float) -> tuple[int, int]:
    """How many pages wide a table prints so that its scale stays at or above ``MIN_PRINT_SCALE``.

    ``widths`` are the column widths, the first ``repeated`` of which are the table's key columns;
    ``page_units`` is the width of one page at 100%.  Returns the number of pages (one when the
    table fits at the smallest readable scale) and how many key columns print again on every
    page (none when they would take half a page or more).
    """
    room = page_units / MIN_PRINT_SCALE
    total = float(sum(widths))
    if total <= room:
        return 1, 0
    titles = float(sum(widths[:repeated]))
    if titles >= room / 2:
        repeated, titles = 0, 0.0
    return math.ceil((total - titles) / (room - titles)), repeated


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


def yes_no(value: object) -> str:
    return "yes" if bool(value) else "no"


def plain(value: object) -> object:
    """A Python scalar openpyxl accepts: numpy scalars unwrapped; NaN, infinity and None empty."""
    if value is None or value is pd.NA or value is pd.NaT:
        return None
    if isinstance(value, (np.bool_, bool)):
        return yes_no(value)
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, (float, np.floating)):
        v = float(value)
        return None if not math.isfinite(v) else v
    if isinstance(value, (int, str)):
        return value
    return str(value)


def stat_format(values: Iterable[object]) -> str:
    """A format showing 3-4 significant digits for the typical size of ``values``."""
    arr = np.array([v for v in (plain(x) for x in values) if isinstance(v, (int, float))], dtype=float)
    big = float(np.nanmax(np.abs(arr))) if arr.size else 0.0
    if big >= 1000:
        return INT
    if big >= 100:
        return "#,##0.0"
    if big >= 10:
        return "0.00"
    return STAT


def human(name: str) -> str:
    """A snake_case name as a header: ``model_p_adjusted`` -> ``Model p adjusted``."""
    text = str(name).replace("_", " ").strip()
    return text[:1].upper() + text[1:]


@dataclass(frozen=True)
class _Stream:
    rows: Iterable[list]
    count: int
    width: int


@dataclass(frozen=True)
class Column:
    """One column of a :meth:`SheetWriter.columns` block, a value per row.

    ``kind`` "text": every value a str, written as a text cell (a leading ``=`` stays text, an empty
    str is an empty text cell), unstyled.  ``kind`` "number": a numeric array, each value a number
    cell (NaN and infinity an empty one) with the number format ``fmt``, or no cell where there is no
    format and no finite value.
    """

    kind: str
    values: np.ndarray
    fmt: str | None = None


@dataclass(frozen=True)
class _Columns:
    line: Callable[[int], list]
    count: int
    width: int
    fast: np.ndarray
    columns: tuple[Column, ...]


@dataclass(frozen=True)
class _Raw:
    elements: list
    first: int
    count: int


#: Rows of a column block turned into XML at a time.
_RAW_CHUNK = 20_000


def _raw_writer_ok(ws: Any) -> bool:
    """Whether rows can be handed to this sheet as XML elements (openpyxl's streaming sheet over lxml)."""
    try:
        from openpyxl import LXML
        from openpyxl.worksheet._write_only import WriteOnlyWorksheet
    except ImportError:  # pragma: no cover - another openpyxl layout: the cell-by-cell path
        return False
    return (LXML and isinstance(ws, WriteOnlyWorksheet) and getattr(ws, "_rows", False) is None
            and all(hasattr(ws, a) for a in ("_get_writer", "_values_to_row")))


def _raw_rows(ws: Any):
    """openpyxl's row writer of a streaming sheet (``WriteOnlyWorksheet._write_rows``), also taking
    rows already made as XML elements (:class:`_Raw`): the same ``sheetData``, rows in order."""
    xf = ws._writer.xf.send(True)
    with xf.element("sheetData"):
        row_idx = 1
        try:
            while True:
                row = (yield)
                if isinstance(row, _Raw):
                    if row.first != row_idx:  # pragma: no cover - a bug here, never a wrong sheet
                        raise RuntimeError(f"rows out of order: {row.first} where {row_idx} is next")
                    xf.write(*row.elements)
                    row_idx += row.count
                else:
                    ws._writer.write_row(xf, ws._values_to_row(row, row_idx), row_idx)
                    row_idx += 1
        except GeneratorExit:
            pass
    ws._writer.xf.send(None)


def _xml_escape(text: pd.Series) -> pd.Series:
    """Text content as XML (``&``, ``<``, ``>`` and carriage returns escaped, as lxml writes them)."""
    for ch, ent in (("&", "&amp;"), ("<", "&lt;"), (">", "&gt;"), ("\r", "&#13;")):
        has = text.str.contains(ch, regex=False)
        if has.any():
            text = text.where(~has, text.str.replace(ch, ent, regex=False))
    return text


@dataclass(frozen=True)
class TableRef:
    """Where a table landed: its header row, first and last data rows and column numbers (1-based)."""

    header_row: int
    first_row: int
    last_row: int
    columns: dict[str, int]
    first_col: int


def house_workbook(*, write_only: bool = False) -> Any:
    """An empty workbook whose default font is :data:`FONT_NAME` (cells written without a style too)."""
    from openpyxl import Workbook
    from openpyxl.utils.indexed_list import IndexedList

    wb = Workbook(write_only=write_only)
    wb._fonts = IndexedList([Font(name=FONT_NAME, size=_SIZE, family=2)])  # font 0: every unstyled cell
    for named in wb._named_styles:
        if named.name == "Normal":
            named.font = Font(name=FONT_NAME, size=_SIZE, family=2)
    if not write_only:
        wb.remove(wb.active)
    return wb


class SheetWriter:
    """Buffer one sheet's rows with their styles; :meth:`close` writes them with the layout.

    Parameters
    ----------
    wb
        An openpyxl workbook (normal or write-only).
    name
        The sheet's name (tab).
    title
        The heading of the sheet.
    explanation
        What the numbers are and their denominator (wrapped into lines of :data:`LINE_CHARS`).
    source
        The published method or standard used, if any.
    """

    def __init__(self, wb: Any, name: str, *, title: str, explanation: str | Sequence[str],
                 source: str | None = None) -> None:
        self.ws = wb.create_sheet(name)
        self.name = name
        self._rows: list[Any] = []  # lists of (value, format, kind) or None, and _Stream blocks
        self._n = 0
        self._heights: dict[int, float] = {}
        self._need: dict[int, float] = {}
        self._fixed: dict[int, float] = {}
        self._floor: dict[int, float] = {}  # a column is never narrower than the labels of pairs() in it
        self._main: TableRef | None = None
        self._freeze_col = 1
        self._charts: list[tuple[Any, str]] = []
        self._wrapped: list[tuple[int, int, int]] = []  # (row, column, characters) of wrapped cells
        self._last_table: TableRef | None = None
        self._headers: list[tuple[int, list[tuple[int, str]], int]] = []  # (row, [(column, text)], rotated)
        self._styles: dict[tuple[str, str | None], Any] = {}  # (kind, number format) -> style array, made once
        self.line(title, "title")
        self._heights[1] = 20
        lines = [explanation] if isinstance(explanation, str) else list(explanation)
        for text in lines:
            for part in textwrap.wrap(text, LINE_CHARS) or [""]:
                self.line(part, "explain")
        if source:
            for part in textwrap.wrap("Source: " + source, LINE_CHARS + 15):
                self.line(part, "source")
        self.blank()

    # -- rows ---------------------------------------------------------------------------------------
    @property
    def next_row(self) -> int:
        """The 1-based number of the row the next call writes."""
        return self._n + 1

    def _add(self, row: list) -> None:
        self._rows.append(row)
        self._n += 1

    def stream(self, rows: Iterable[list], count: int, width: int) -> None:
        """``count`` rows made elsewhere (plain values or cells, ``width`` columns), written as they come.

        For long listings: nothing is buffered; values must already be safe (text never a formula).
        """
        self._rows.append(_Stream(rows, count, width))
        self._n += count

    def columns(self, line: Callable[[int], list], count: int, width: int, fast: np.ndarray,
                columns: Sequence[Column]) -> None:
        """``count`` rows given column by column: for long listings, written without a cell object per value.

        ``line(i)`` gives row ``i`` as :meth:`stream` rows are (plain values or cells); rows where
        ``fast`` is True are the ``columns`` (one :class:`Column` each, from column A), which must say
        the same cells as ``line`` would.  Where the rows cannot be handed to the sheet as XML
        (a normal workbook), every row is ``line(i)``.
        """
        self._rows.append(_Columns(line, count, width, np.asarray(fast, dtype=bool), tuple(columns)))
        self._n += count

    def blank(self) -> None:
        self._add([])

    def line(self, text: str, kind: str = "note", *, col: int = 1) -> None:
        """One line of text in column ``col`` (kinds: title, explain, source, sub, note, text, bold)."""
        self._add([None] * (col - 1) + [(text, None, kind)])

    def note(self, text: str, kind: str = "note") -> None:
        """A note (or another kind of line), wrapped into lines."""
        for part in textwrap.wrap(text, LINE_CHARS + 15 if kind == "note" else LINE_CHARS) or [""]:
            self.line(part, kind)

    def cells(self, row: list[tuple[object, str | None, str] | None]) -> None:
        """One row of (value, number format, kind) cells, or None for an empty cell."""
        self._add(list(row))

    def labelled(self, label: str, text: str) -> None:
        """A label in column A and a long text beside it, wrapped in column B."""
        self._wrapped.append((self.next_row, 2, len(text)))
        self._add([(label, None, "label_top"), (text, None, "wrap")])

    def width(self, col: int, chars: float) -> None:
        """Fix the width of column ``col`` (1-based), overriding the measured one."""
        self._fixed[col] = chars

    def pairs(self, rows: Iterable[tuple[str, object, str | None]], *, heading: str | None = None) -> None:
        """Label / value lines (a label in column A, the value in column B, with its format)."""
        if heading:
            self.line(heading, "sub")
        for label, value, fmt in rows:
            self._add([(label, None, "label"), (value, fmt, "left")])
            self._measure(1, label)
            self._floor[1] = max(self._floor.get(1, 0), len(str(label)) + 2)
            self._measure(2, value, fmt, cap=60)

    def table(self, df: pd.DataFrame, *, formats: dict[str, str] | None = None, headers: dict[str, str] | None = None,
              wrap: Sequence[str] = (), rotate: Sequence[str] = (), marks: Sequence[str] = (),
              main: bool | None = None, col: int = 1, freeze_col: int = 1, heading: str | None = None,
              max_width: float = 45) -> TableRef:
        """Write a small table (rows are items, terms or categories, never respondents).

        ``formats`` maps a column to its number format (a numeric column without one gets
        :func:`stat_format`); ``headers`` renames columns (default :func:`human`);
        ``rotate`` columns get vertical headers; ``marks`` columns hold booleans drawn as
        marked (True) or plain squares.  The first table of a sheet (or ``main=True``) gets
        the auto filter, the frozen header and the print titles.
        """
        if heading:
            self.line(heading, "sub")
        formats = dict(formats or {})
        headers = headers or {}
        names = [str(c) for c in df.columns]
        for c in names:
            if c not in formats and c not in marks and pd.api.types.is_numeric_dtype(df[c]) \
                    and not pd.api.types.is_bool_dtype(df[c]):
                formats[c] = stat_format(df[c])
        shown = [headers.get(c, human(c)) for c in names]
        header_row = self.next_row
        lead = [None] * (col - 1)
        self._add(lead + [(h, None, "rotated" if c in rotate else "header") for c, h in zip(names, shown)])
        rotated_len = 0
        for j, (c, h) in enumerate(zip(names, shown), start=col):
            if c in rotate:
                rotated_len = max(rotated_len, len(h))
                self._need[j] = max(self._need.get(j, 0), 4.5)
            else:
                words = max((len(w) for w in h.split()), default=4)
                self._need[j] = max(self._need.get(j, 0), words + 1.5,
                                    min(max(words + 2, math.ceil(len(h) / 3) + 2), max_width))
        kinds = ["mark" if c in marks else ("wrap" if c in wrap else "num") for c in names]
        fmts = [formats.get(c) for c in names]
        for values in df.itertuples(index=False, name=None):
            row = list(lead)
            for j, (v, fmt, kind) in enumerate(zip(values, fmts, kinds), start=col):
                if kind == "mark":
                    row.append((bool(v), None, "mark" if bool(v) else "unmarked"))
                    continue
                row.append((v, fmt, kind))
                self._measure(j, v, fmt, cap=max_width)
                if kind == "wrap" and isinstance(v, str) and v:
                    self._wrapped.append((self.next_row, j, len(v)))
            self._add(row)
        last = self.next_row - 1
        self._headers.append((header_row, [(j, h) for j, (c, h) in enumerate(zip(names, shown), start=col)
                                           if c not in rotate], rotated_len))
        ref = TableRef(header_row=header_row, first_row=header_row + 1, last_row=last,
                       columns={c: j for j, c in enumerate(names, start=col)}, first_col=col)
        if main or (main is None and self._main is None):
            self._main = ref
            self._freeze_col = freeze_col
        self._last_table = ref
        return ref

    def header(self, names: Sequence[str], *, col: int = 1, widths: Sequence[float] | None = None,
               main: bool = True, count: int = 0, freeze_col: int = 1) -> TableRef:
        """A header row alone, for a listing whose ``count`` rows follow by :meth:`stream`."""
        row = self.next_row
        self._add([None] * (col - 1) + [(h, None, "header") for h in names])
        lines = 1
        for j, h in enumerate(names, start=col):
            w = widths[j - col] if widths is not None else max(len(x) for x in h.split()) + 2
            self._need[j] = max(self._need.get(j, 0), w)
            lines = max(lines, math.ceil(len(h) / max(w - 1.5, 1)))
        self._heights[row] = 13.0 * min(lines, 5) + 4
        ref = TableRef(header_row=row, first_row=row + 1, last_row=row + count,
                       columns={h: j for j, h in enumerate(names, start=col)}, first_col=col)
        if main:
            self._main = ref
            self._freeze_col = freeze_col
        self._last_table = ref
        return ref

    def chart(self, chart: Any, anchor: str) -> None:
        """A chart anchored at a cell (e.g. ``"A12"``); series are never smoothed."""
        for s in getattr(chart, "series", []):
            s.smooth = False
        self._charts.append((chart, anchor))

    def _measure(self, j: int, v: object, fmt: str | None = None, *, cap: float = 45) -> None:
        v = plain(v)
        if v is None:
            return
        if isinstance(v, str):
            n = max((len(p) for p in v.split("\n")), default=0) + 2
        elif fmt == PCT:
            n = 8
        elif fmt == P_VALUE:
            n = 8
        else:
            n = len(f"{v:,.0f}") + (5 if fmt and "." in fmt else 2) + (2 if fmt and "0000" in fmt else 0)
        self._need[j] = max(self._need.get(j, 0), min(n, cap))

    # -- output -------------------------------------------------------------------------------------
    def _cell(self, spec: tuple[object, str | None, str] | None) -> Any:
        if spec is None:
            return None
        value, fmt, kind = spec
        if kind in ("mark", "unmarked"):
            cell = WriteOnlyCell(self.ws, value=MARK if kind == "mark" else "")
            cell.data_type = "s"
            fmt = None
        else:
            v = plain(value)
            cell = WriteOnlyCell(self.ws, value=None)
            if isinstance(v, str):
                cell.value = clean_text(v)
                cell.data_type = "s"
                fmt = None
            else:
                cell.value = v
                if v is None:
                    fmt = None
        key = (kind, fmt or None)
        shared = self._styles.get(key)
        if shared is not None:  # the style made once per sheet, then shared by its cells
            cell._style = copy(shared)
            return cell
        if fmt:
            cell.number_format = fmt
        for attr, val in _STYLES[kind].items():
            setattr(cell, attr, val)
        self._styles[key] = copy(cell._style)
        return cell

    def _style_id(self, fmt: str | None) -> int | None:
        """The workbook's style number of a cell with only the number format ``fmt`` (None: unstyled)."""
        if not fmt:
            return None
        cell = WriteOnlyCell(self.ws, value=None)
        cell.number_format = fmt
        return cell.style_id if cell.has_style else None

    def _column_cells(self, col: int, column: Column, rownum: np.ndarray) -> tuple[list, np.ndarray]:
        """Each row's cell of one column as pieces of XML text (columns of a row-major join; '' for no
        cell), and the rows the column can give."""
        letter = get_column_letter(col)
        n = len(rownum)
        if column.kind == "text":
            values = pd.Series(column.values, dtype=object)
            ok = np.ones(n, dtype=bool)
            if pd.api.types.infer_dtype(values, skipna=False) != "string":
                ok = values.map(type).to_numpy() == str
                values = values.where(ok, "")
            text = values.astype(str)
            empty = (text == "").to_numpy()
            keep = (text.str.strip() != text).to_numpy()
            body = _xml_escape(text).to_numpy(dtype=object)
            opening = np.where(empty, '" t="inlineStr"/>',
                               np.where(keep, '" t="inlineStr"><is><t xml:space="preserve">',
                                        '" t="inlineStr"><is><t>'))
            closing = np.where(empty, "", "</t></is></c>")
            return [f'<c r="{letter}', rownum, opening.astype(object), body, closing.astype(object)], ok
        values = np.asarray(column.values)
        if values.dtype.kind not in "iuf":
            return [np.full(n, "", dtype=object)], np.zeros(n, dtype=bool)
        sid = self._style_id(column.fmt)
        attr = '" t="n"' if sid is None else f'" s="{sid}" t="n"'
        finite = np.isfinite(values) if values.dtype.kind == "f" else np.ones(n, dtype=bool)
        text = np.full(n, "", dtype=object)
        if finite.any():
            text[finite] = np.char.mod("%.16g", values[finite]).astype(object)
        if finite.all():
            return [f'<c r="{letter}', rownum, attr + "><v>", text, "</v></c>"], np.ones(n, dtype=bool)
        there = finite | (sid is not None)  # an empty number cell only where it has a format
        return [np.where(there, f'<c r="{letter}', ""), np.where(there, rownum, ""),
                np.where(finite, attr + "><v>", np.where(there, attr + "/>", "")), text,
                np.where(finite, "</v></c>", "")], np.ones(n, dtype=bool)

    def _write_columns(self, block: _Columns, first_row: int, raw: bool) -> None:
        ws = self.ws
        if not raw:
            for i in range(block.count):
                ws.append(block.line(i))
            return
        from lxml import etree

        rownum = np.arange(first_row, first_row + block.count).astype(str).astype(object)
        fast = block.fast.copy()
        for r in ws.row_dimensions:  # a row with its own height or style goes through openpyxl
            if first_row <= r < first_row + block.count:
                fast[r - first_row] = False
        pieces: list = ['<row r="', rownum, '">']
        for j, column in enumerate(block.columns, start=1):
            parts, ok = self._column_cells(j, column, rownum)
            pieces += parts
            fast &= ok
        pieces.append("</row>")
        i = 0
        slow = np.flatnonzero(~fast)
        while i < block.count:
            if not fast[i]:
                ws.append(block.line(i))
                i += 1
                continue
            nxt = slow[np.searchsorted(slow, i)] if len(slow) and slow[-1] > i else block.count
            end = min(nxt, i + _RAW_CHUNK)
            grid = np.empty((end - i, len(pieces)), dtype=object)  # rows x pieces, joined row-major
            for k, piece in enumerate(pieces):
                grid[:, k] = piece if isinstance(piece, str) else piece[i:end]
            text = "".join(grid.ravel().tolist())
            try:
                root = etree.fromstring(f"<rows>{text}</rows>")
            except (etree.XMLSyntaxError, ValueError, UnicodeError):  # text XML cannot hold: openpyxl says so
                for k in range(i, end):
                    ws.append(block.line(k))
            else:
                ws._rows.send(_Raw(list(root), first_row + i, end - i))
            i = end

    def _width(self, j: int) -> float:
        """Column ``j``'s width: the fixed one, else the measured one, never below its labels."""
        return max(self._fixed.get(j, self._need.get(j, 10)), self._floor.get(j, 0))

    def close(self, *, print_rows: int | None = None, landscape: bool = True) -> None:
        """Set widths, heights, panes, filter and print setup, then write the rows.

        ``print_rows`` limits the print area to that many rows of the main table.
        """
        ws = self.ws
        ncols = max((r.width if isinstance(r, (_Stream, _Columns)) else len(r) for r in self._rows), default=1)
        for j in range(1, ncols + 1):
            ws.column_dimensions[get_column_letter(j)].width = float(max(self._width(j), 4))
        for r, heads, rotated_len in self._headers:
            k = max([math.ceil(len(h) / max(self._width(j) - 1.5, 1)) for j, h in heads]
                    or [1])
            self._heights[r] = max(13.0 * min(k, 5) + 4, 6.2 * rotated_len + 12 if rotated_len else 0)
        lines: dict[int, int] = {}
        for r, j, n in self._wrapped:
            lines[r] = max(lines.get(r, 1), math.ceil(n / max(self._width(j) - 1, 1)))
        for r, k in lines.items():
            if k > 1:
                self._heights.setdefault(r, 11.0 * k + 2)
        for r, h in self._heights.items():
            ws.row_dimensions[r].height = h
        main = self._main
        last_col = get_column_letter(max(ncols, 1))
        if main is not None:
            ws.freeze_panes = f"{get_column_letter(self._freeze_col)}{main.first_row}"
            first_col = get_column_letter(main.first_col)
            end_col = get_column_letter(main.first_col + len(main.columns) - 1)
            ws.auto_filter.ref = f"{first_col}{main.header_row}:{end_col}{max(main.last_row, main.header_row)}"
            if self._last_table is main:  # a later table's overflow page must not carry this header
                ws.print_title_rows = f"{main.header_row}:{main.header_row}"
            if print_rows is not None and main.last_row > main.header_row + print_rows:
                ws.print_area = f"A1:{last_col}{main.header_row + print_rows}"
        ps = ws.page_setup
        ps.orientation = "landscape" if landscape else "portrait"
        ps.paperSize = "9"  # A4
        ps.fitToWidth, repeated = pages_wide([max(self._width(j), 4) for j in range(1, ncols + 1)],
                                             self._freeze_col - 1 if main is not None else 0,
                                             PAGE_WIDTH_UNITS[landscape])
        if ps.fitToWidth > 1:  # each row's pages follow one another, the key columns on every page
            ps.pageOrder = "overThenDown"
        if repeated:
            ws.print_title_cols = f"A:{get_column_letter(repeated)}"
        # a short sheet prints on one page; a long one as many pages tall as it needs
        ps.fitToHeight = 1 if self._n <= SHORT_SHEET_ROWS and print_rows is None else 0
        ws.sheet_properties.pageSetUpPr.fitToPage = True
        ws.print_options.gridLines = False
        ws.page_margins.left = ws.page_margins.right = 0.4
        ws.page_margins.top = ws.page_margins.bottom = 0.6
        ws.oddFooter.center.text = "&A \u2013 page &P of &N"
        ws.oddFooter.center.font = f"{FONT_NAME},Regular"
        ws.oddFooter.center.size = 8
        for chart, anchor in self._charts:
            ws.add_chart(chart, anchor)
        raw = any(isinstance(row, _Columns) for row in self._rows) and _raw_writer_ok(ws)
        if raw:  # openpyxl's own row writer, also taking rows made as XML
            ws._get_writer()
            ws._rows = _raw_rows(ws)
            next(ws._rows)
        r = 1
        for row in self._rows:
            if isinstance(row, _Stream):
                for values in row.rows:
                    ws.append(values)
                r += row.count
            elif isinstance(row, _Columns):
                self._write_columns(row, r, raw)
                r += row.count
            else:
                ws.append([self._cell(s) for s in row])
                r += 1
