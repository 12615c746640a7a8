"""No workbook cell written from data is a formula (formula injection).

Outside references: the file format itself (ECMA-376 Part 1, 18.3.1.4: a worksheet cell
``<c>`` holds a formula only in an ``<f>`` child element), read from the written zip with
the standard library, and openpyxl's reader (``data_type`` "f" for a formula cell).
"""

from __future__ import annotations

import re
import zipfile
from pathlib import Path

import numpy as np
import pandas as pd
import openpyxl
import pytest
from typer.testing import CliRunner

from skipwise.cli import app

EVIL = ['=1+1', '=HYPERLINK("http://example.invalid","click")', "=cmd|' /C calc'!A0", "=SUM(A1:A2)"]
Q = """\
format: 1
survey: {name: t, title: "=1+1", case_id: id}
context: [region, wt, disp]
codes: [{value: -9, reason: refused, kind: nonresponse, label: "=2+2"}]
sections:
  - name: s
    items:
      - {name: age, type: integer, range: [16, 99]}
      - {name: sat, type: categorical, label: "=3+3", values: {1: "=HYPERLINK(\\"http://example.invalid\\")", 2: "=1+1", 3: Fine}}
      - {name: note, type: text, optional: true}
"""
W = """\
format: 1
case_id: id
dispositions: {column: disp, categories: {I: [110], NC: [220]}}
base: {weight: wt}
nonresponse: {method: classes, classes: [region], min_respondents: 5}
"""


def formulas(path: Path) -> list[str]:
    """Every <f> element of every sheet, read from the zip itself."""
    found = []
    with zipfile.ZipFile(path) as z:
        for name in z.namelist():
            if name.startswith("xl/worksheets/") and name.endswith(".xml"):
                found += re.findall(r"<f[ >].*?</f>", z.read(name).decode("utf-8"))
    wb = openpyxl.load_workbook(path)
    found += [f"{ws.title}!{c.coordinate}" for ws in wb.worksheets for row in ws.iter_rows() for c in row
              if c.data_type == "f"]
    return found


@pytest.fixture(scope="module")
def inputs(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("formulas")
    rng = np.random.default_rng(3)
    n = 60
    region = np.where(rng.random(n) < 0.5, "=North", "South")  # a class label from data, too
    data = pd.DataFrame({"id": np.arange(1, n + 1), "region": region, "wt": 10.0,
                         "disp": np.where(np.arange(n) < 45, 110, 220),
                         "age": rng.integers(16, 90, n).astype(float), "sat": rng.integers(1, 4, n).astype(float),
                         "note": [EVIL[i % len(EVIL)] for i in range(n)]})
    data.loc[data["disp"] == 220, ["age", "sat", "note"]] = np.nan
    data.loc[:9, "sat"] = -9
    data.to_csv(folder / "d.csv", index=False)
    (folder / "q.yaml").write_text(Q, encoding="utf-8")
    (folder / "w.yaml").write_text(W, encoding="utf-8")
    return folder


@pytest.mark.parametrize("args, outputs", [
    (["classify", "{d}/d.csv", "-q", "{d}/q.yaml", "-o", "{o}/c.xlsx"], ["c.xlsx"]),
    (["report", "{d}/d.csv", "-q", "{d}/q.yaml", "-o", "{o}/r.xlsx"], ["r.xlsx"]),
    (["diagnose", "{d}/d.csv", "-q", "{d}/q.yaml", "-o", "{o}/g.xlsx"], ["g.xlsx"]),
    (["weigh", "{d}/d.csv", "--plan", "{d}/w.yaml", "-o", "{o}/w.xlsx", "--workbook", "{o}/ww.xlsx"],
     ["w.xlsx", "ww.xlsx"]),
])
def test_no_workbook_holds_a_formula(inputs, tmp_path, args, outputs):
    res = CliRunner().invoke(app, [a.replace("{d}", str(inputs)).replace("{o}", str(tmp_path)) for a in args])
    if res.exit_code != 0 and args[0] == "classify" and "xlsx" in res.output:
        pytest.skip("classify does not write .xlsx in this version")
    assert res.exit_code == 0, res.output
    for name in outputs:
        path = tmp_path / name
        assert formulas(path) == [], name
        texts = {c.value for ws in openpyxl.load_workbook(path).worksheets for row in ws.iter_rows()
                 for c in row if isinstance(c.value, str)}
        if args[0] in ("classify", "weigh") and name in ("c.xlsx", "w.xlsx"):
            assert set(EVIL) <= texts  # the answers are kept, as the text written
