"""The fault listing written column by column holds the same cells as the cell-by-cell path.

The item report writes the long fault listing of the "Routing faults" sheet as XML made a whole
column at a time (:meth:`skipwise.sheetstyle.SheetWriter.columns`) instead of one openpyxl cell
object per value.  These tests write each workbook both ways (the cell-by-cell path is the one a
normal workbook takes, and the one the report took before) and read both back with openpyxl, cell
by cell: value, type, font, fill, border, alignment, protection and number format, on every sheet.
The listing itself is checked against the classification's own fault table (``Classification.faults``,
a pandas frame) read back from the file.  Outside references: openpyxl's reader, and the file
format (ECMA-376 Part 1, 18.3.1.4: a cell ``<c>`` holds a formula only in an ``<f>`` child).
"""

from __future__ import annotations

import datetime as dt
import re
import zipfile

import numpy as np
import openpyxl
import pandas as pd
import pytest

import skipwise.sheetstyle as st
from skipwise.classify import classify
from skipwise.questionnaire.loader import loads_questionnaire
from skipwise.report import write_item_report

WHEN = dt.datetime(2026, 12, 1, 12, 0, 0)

QTEXT = """
format: 1
survey: {name: rows-test, title: Fault rows, case_id: rid}
context: [wt, region]
codes:
  - {value: -1, reason: routed_out, kind: structural}
  - {value: -8, reason: dont_know, kind: nonresponse}
breakoff: {min_run: 3}
sections:
  - name: main
    items:
      - {name: a, label: Gate, type: categorical, values: {1: "Yes", 2: "No"}}
      - {name: b, type: integer, range: [0, 10], asked_if: a == 1}
      - {name: c, type: integer, range: [0, 10]}
      - {name: f, label: Free text, type: text, asked_if: a == 1}
"""

#: Stored texts a listing must keep as they are: formula-like, error values, spaces at the ends,
#: markup characters, line breaks, an empty text, accents.
ODD = ["ok", "=2+3", "#DIV/0!", " lead", "x&y<z>", "cr\rlf\n", "tab\tend ", "", "\u00e9t\u00e9", "#N/A", "="]


def _frame(n: int, ids) -> pd.DataFrame:
    rng = np.random.default_rng(11)
    a = rng.choice([1, 2, -8], n)
    b = rng.integers(0, 11, n).astype(float)
    b[rng.random(n) < 0.2] = 99  # invalid
    c = rng.integers(0, 11, n).astype(float)
    c[rng.random(n) < 0.1] = np.nan
    return pd.DataFrame({"rid": ids, "wt": rng.uniform(0.5, 2.0, n), "region": rng.choice(["N", "S"], n),
                         "a": a, "b": b, "c": c, "f": [ODD[i % len(ODD)] for i in range(n)]})


def _cells(path) -> dict:
    wb = openpyxl.load_workbook(path)
    out = {}
    for ws in wb.worksheets:
        for (r, c), cell in ws._cells.items():
            out[(ws.title, r, c)] = (cell.value, cell.data_type, repr(cell.font), repr(cell.fill), repr(cell.border),
                                     repr(cell.alignment), repr(cell.protection), cell.number_format)
    return out


def _both_ways(tmp_path, monkeypatch, df, q, **opts):
    sent = []
    real = st._Raw.__init__

    def spy(self, *a, **k):
        real(self, *a, **k)
        sent.append(self.count)

    monkeypatch.setattr(st._Raw, "__init__", spy)
    fast = write_item_report(df, q, tmp_path / "fast.xlsx", written=WHEN, **opts)
    assert sum(sent) > 0  # the column-by-column path was taken (the comparison below can fail)
    monkeypatch.setattr(st, "_raw_writer_ok", lambda ws: False)
    n_before = len(sent)
    slow = write_item_report(df, q, tmp_path / "slow.xlsx", written=WHEN, **opts)
    assert len(sent) == n_before  # ... and here it was not
    return fast, slow


def _text_ids(n: int) -> list[str]:
    ids = [f"ZQ-{i:04d}" for i in range(n)]
    ids[3], ids[9], ids[15], ids[21] = "=1+1", "#REF!", " sp ", "a&b<c>\"'"
    return ids


@pytest.mark.parametrize("ids, opts", [
    ("text", {"weight": "wt", "by": ("region",)}),
    ("int", {}),
    ("float", {"fault_rows": 150}),
    ("text", {"case_ids": False, "fault_rows": 40}),
], ids=["text-ids", "int-ids", "float-ids-capped", "no-ids"])
def test_every_cell_equals_the_cell_by_cell_path(tmp_path, monkeypatch, ids, opts):
    n = 600
    case_ids = {"text": _text_ids(n), "int": np.arange(10 ** 15, 10 ** 15 + n),
                "float": np.arange(n) * 1.5 + 0.25}[ids]
    q = loads_questionnaire(QTEXT)
    fast, slow = _both_ways(tmp_path, monkeypatch, _frame(n, case_ids), q, **opts)
    a, b = _cells(fast), _cells(slow)
    assert len(a) > 500
    assert [k for k in a.keys() | b.keys() if a.get(k) != b.get(k)] == []


def test_listing_against_the_classification_and_no_formula(tmp_path, monkeypatch):
    n = 400
    df = _frame(n, _text_ids(n))
    q = loads_questionnaire(QTEXT)
    fast, _ = _both_ways(tmp_path, monkeypatch, df, q)
    faults = classify(df, q).faults
    ws = openpyxl.load_workbook(fast)["Routing faults"]
    rows = [tuple(r) for r in ws.iter_rows(values_only=True)]
    top = next(i for i, r in enumerate(rows) if r[0] == "Case id")
    got = pd.DataFrame([r[:6] for r in rows[top + 1:top + 1 + len(faults)]],
                       columns=["case_id", "item", "status", "value", "rule", "inputs"])
    assert len(faults) > 200
    # file order, then interview order (as the sheet says), from the classifier's table
    order = {rid: i for i, rid in enumerate(df["rid"])}
    want = faults.assign(_row=faults["case_id"].map(order),
                         _item=faults["item"].map({"a": 0, "b": 1, "c": 2, "f": 3}))
    want = want.sort_values(["_row", "_item"], kind="stable").reset_index(drop=True)
    assert got["case_id"].tolist() == want["case_id"].tolist()
    assert got["item"].tolist() == want["item"].tolist()
    # an empty text reads back as no value
    norm = lambda s: [None if v == "" else v for v in s.astype(str)]  # noqa: E731
    assert got["value"].tolist() == norm(want["value"])
    assert all(g.endswith(f"({w})") for g, w in zip(got["status"], want["status"]))
    with zipfile.ZipFile(fast) as z:
        sheet = z.read("xl/worksheets/sheet3.xml").decode()
    assert "<f>" not in sheet and "<f " not in sheet  # no stored text became a formula
    assert re.search(r'<t xml:space="preserve"> lead</t>', sheet)  # spaces kept
