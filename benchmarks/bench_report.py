"""Time the item-nonresponse workbook on a large invented file (prints figures; not a test).

Builds a synthetic questionnaire of ITEMS integer items (every tenth routed on the item before it),
random stored values for CASES cases (answers, blanks, don't-know and refusal codes, a few
out-of-range values), classifies them, then times only ``write_item_report`` with a weight and
one grouping column.  Floor, in the same run: the same cells with the same styles (font, fill,
border, alignment, number format) written by openpyxl in write-only mode, read back from the
report itself.  Target: at most 1.5x the floor.

Usage: python benchmarks/bench_report.py [CASES] [ITEMS]   (CASES default: 1,000,000 x SKIPWISE_BENCH_SCALE)
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

from _common import result, scaled
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
        t3 = time.perf_counter()
        write_item_report(data, q, out, classification=c, weight="wt", by=("region",))
        secs = time.perf_counter() - t3
        size = out.stat().st_size
        floor = openpyxl_floor(out, Path(tmp) / "floor.xlsx")
    print(f"routing faults in file:  {int(c.counts()[['off_route', 'wrong_code', 'invalid']].to_numpy().sum()):,}")
    print(f"write report:            {secs:8.1f} s; floor (openpyxl write-only, same cells) {floor:.1f} s")
    print(f"workbook size:           {size / 1e6:8.1f} MB")
    result(f"report {n:,} x {p}", f"{secs:.1f} s", f"{floor:.1f} s", secs / floor, "<= 1.5x floor",
           secs <= 1.5 * floor)


def openpyxl_floor(report: Path, target: Path) -> float:
    """Seconds to write the report's cells with their styles in openpyxl's write-only mode."""
    from copy import copy

    from openpyxl import Workbook, load_workbook
    from openpyxl.cell import WriteOnlyCell

    source = load_workbook(report, read_only=True)
    styles: dict = {}  # style id -> (font, fill, border, alignment, number format), copied once
    sheets = []
    for ws in source.worksheets:  # read (not timed): values and styles of every cell
        rows = []
        for row in ws.iter_rows():
            cells = []
            for cell in row:
                sid = getattr(cell, "style_id", 0)
                if cell.value is None and not sid:
                    continue
                if sid and sid not in styles:
                    styles[sid] = (copy(cell.font), copy(cell.fill), copy(cell.border), copy(cell.alignment),
                                   cell.number_format)
                cells.append((cell.value, styles.get(sid)))
            rows.append(cells)
        sheets.append((ws.title, rows))
    source.close()
    t0 = time.perf_counter()
    wb = Workbook(write_only=True)
    for title, rows in sheets:
        ws = wb.create_sheet(title)
        for row in rows:
            cells = []
            for value, style in row:
                cell = WriteOnlyCell(ws, value=value)
                if style is not None:
                    cell.font, cell.fill, cell.border, cell.alignment, cell.number_format = style
                cells.append(cell)
            ws.append(cells)
    wb.save(target)
    return time.perf_counter() - t0

if __name__ == "__main__":
    main()
