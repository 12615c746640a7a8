"""Time the item-nonresponse workbook on a large invented file (prints figures; not a test).

Builds a synthetic questionnaire of ITEMS integer items (every tenth routed on the item before it),
random stored values for CASES cases (answers, blanks, don't-know and refusal codes, a few
out-of-range values), classifies them, then times only ``write_item_report`` with a weight and
one grouping column.  Floor, in the same run: the same cells with the same styles (font, fill,
border, alignment, protection, number format) written by openpyxl in write-only mode, read back
from the report itself (see ``openpyxl_floor``).  Target: at most 1.5x the floor.  Both are
printed in wall and CPU seconds (compare CPU seconds on a shared machine).

The floor was changed on 2026-12-03: before, it wrote no style at all (it looked for a
``style_id`` that openpyxl's read-only cells do not have), left out the empty text cells and
moved cells after a gap to the left; it now writes exactly the report's cells (checked cell by
cell: value, type and style), each distinct style made once and shared.

Usage: python benchmarks/bench_report.py [CASES] [ITEMS]   (CASES default: 1,000,000 x SKIPWISE_BENCH_SCALE)
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

from _common import cpu_of, result, scaled
from skipwise.classify import classify
from skipwise.questionnaire.loader import loads_questionnaire
from skipwise.report import write_item_report


def questionnaire_text(p: int) -> str:
    lines = ["format: 1", "survey: {name: bench, title: Benchmark survey, case_id: id}", "context: [wt, region]",
             "codes:", "  - {value: -1, reason: routed_out, kind: structural}",
             "  - {value: -8, reason: dont_know, kind: nonresponse}",
             "  - {value: -9, reason: refused, kind: nonresponse}", "breakoff: {min_run: 5}",
             "sections:", "  - name: main", "    items:"]
    for j in range(p):
        rule = f", asked_if: x{j - 1:03d} <= 6" if j % 10 == 9 else ""
        lines.append(f"      - {{name: x{j:03d}, label: Item {j}, type: integer, range: [0, 9]{rule}}}")
    return "\n".join(lines) + "\n"


def synthetic_data(n: int, p: int, seed: int = 2026) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    cols: dict[str, np.ndarray] = {"id": np.arange(n, dtype=np.int64),
                                   "wt": rng.uniform(0.5, 3.0, n),
                                   "region": rng.integers(1, 8, n)}
    for j in range(p):  # loop over items, not cases
        u = rng.random(n, dtype=np.float32)
        v = rng.integers(0, 10, n).astype(np.float64)
        v[u < 0.04] = np.nan
        v[(u >= 0.04) & (u < 0.07)] = -8
        v[(u >= 0.07) & (u < 0.09)] = -9
        v[(u >= 0.09) & (u < 0.0905)] = 99
        cols[f"x{j:03d}"] = v
    return pd.DataFrame(cols)


def main() -> None:
    n = int(sys.argv[1]) if len(sys.argv) > 1 else scaled(1_000_000)
    p = int(sys.argv[2]) if len(sys.argv) > 2 else 200
    q = loads_questionnaire(questionnaire_text(p))
    t0 = time.perf_counter()
    data = synthetic_data(n, p)
    t1 = time.perf_counter()
    c = classify(data, q)
    t2 = time.perf_counter()
    print(f"cases x items:           {n:,} x {p}")
    print(f"generate data:           {t1 - t0:8.1f} s")
    print(f"classify (not the target): {t2 - t1:6.1f} s")
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp) / "bench.xlsx"
        secs, cpu, _ = cpu_of(lambda: write_item_report(data, q, out, classification=c, weight="wt",
                                                        by=("region",)))
        size = out.stat().st_size
        floor, floor_cpu = openpyxl_floor(out, Path(tmp) / "floor.xlsx")
    print(f"routing faults in file:  {int(c.counts()[['off_route', 'wrong_code', 'invalid']].to_numpy().sum()):,}")
    print(f"write report:            {secs:8.1f} s (CPU {cpu:.1f} s); floor (openpyxl write-only, same cells) "
          f"{floor:.1f} s (CPU {floor_cpu:.1f} s); CPU ratio {cpu / floor_cpu:.2f}x")
    print(f"workbook size:           {size / 1e6:8.1f} MB")
    result(f"report {n:,} x {p}", f"{secs:.1f} s", f"{floor:.1f} s", secs / floor, "<= 1.5x floor",
           secs <= 1.5 * floor)


class _Spec(tuple):
    """A cell the floor makes itself: (value, forced text, style id)."""


def openpyxl_floor(report: Path, target: Path) -> tuple[float, float]:
    """Wall and CPU seconds to write the report's cells with their styles in openpyxl's write-only mode.

    Every cell the report wrote is written again at its place: values, text cells (an empty text or
    one starting with ``=`` stays text), styled empty cells, and each distinct style (font, fill,
    border, alignment, protection, number format) set once, then shared (the cell's style array
    copied, as openpyxl's own worksheet copy does).  Unstyled cells are handed to ``append`` as plain
    values (openpyxl's cheapest way).  The default font is the report's.  Not in the
    floor: column widths, row heights, panes, filters, print setup and the two charts (a few hundred
    XML elements).
    """
    from copy import copy

    from openpyxl import Workbook, load_workbook
    from openpyxl.cell import WriteOnlyCell
    from openpyxl.cell.cell import ERROR_CODES
    from openpyxl.styles import Font
    from openpyxl.utils.indexed_list import IndexedList

    source = load_workbook(report, read_only=True)
    styles: dict = {}  # style id -> (font, fill, border, alignment, protection, number format), copied once
    sheets = []
    for ws in source.worksheets:  # read (not timed): every cell's value, type and style, at its place
        rows = []
        for row in ws.iter_rows():
            cells: list = []
            for cell in row:
                sid = getattr(cell, "_style_id", 0)  # an EmptyCell (a gap) has none
                value, text = cell.value, cell.data_type in ("s", "inlineStr")  # inlineStr: an empty text
                if value is None and text:
                    value = ""  # an empty text cell
                if value is None and not sid:
                    cells.append(None)  # no cell here
                    continue
                if not sid and not (text and isinstance(value, str) and (value[:1] == "=" or value in ERROR_CODES)):
                    cells.append(value)  # a plain value: openpyxl makes (and reuses) the cell
                    continue
                if sid and sid not in styles:
                    styles[sid] = (copy(cell.font), copy(cell.fill), copy(cell.border), copy(cell.alignment),
                                   copy(cell.protection), cell.number_format)
                cells.append(_Spec((value, text, sid)))
            while cells and cells[-1] is None:
                cells.pop()
            rows.append(cells)
        sheets.append((ws.title, rows))
    source.close()
    t0, c0 = time.perf_counter(), time.process_time()
    wb = Workbook(write_only=True)
    font = Font(name="DejaVu Sans", size=9, family=2)  # the report's default font (font 0)
    wb._fonts = IndexedList([font])
    for named in wb._named_styles:
        if named.name == "Normal":
            named.font = copy(font)
    shared: dict = {}  # style id -> the style array made once in this workbook
    for title, rows in sheets:
        ws = wb.create_sheet(title)
        for row in rows:
            cells = []
            for spec in row:
                if type(spec) is not _Spec:
                    cells.append(spec)
                    continue
                value, text, sid = spec
                cell = WriteOnlyCell(ws, value=value)
                if text:
                    cell.data_type = "s"
                if sid:
                    if sid in shared:
                        cell._style = copy(shared[sid])
                    else:
                        (cell.font, cell.fill, cell.border, cell.alignment, cell.protection,
                         cell.number_format) = styles[sid]
                        shared[sid] = copy(cell._style)
                cells.append(cell)
            ws.append(cells)
    wb.save(target)
    return time.perf_counter() - t0, time.process_time() - c0


if __name__ == "__main__":
    main()
