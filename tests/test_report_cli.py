"""`skipwise report` through typer's CliRunner, reading a CSV written by pandas."""

from __future__ import annotations

import openpyxl
import pandas as pd
from typer.testing import CliRunner

import skipwise.cli.cmd_report  # noqa: F401  (registers the command)
from skipwise.cli.app import app

QTEXT = """\
format: 1
survey: {name: cli-test, title: CLI Test Survey, case_id: rid}
context: [wt, grp]
codes:
  - {value: -8, reason: dont_know, kind: nonresponse}
  - {value: -9, reason: refused, kind: nonresponse}
breakoff: {min_run: 9}
sections:
  - name: s
    items:
      - {name: a, type: categorical, values: {1: "Yes", 2: "No"}}
      - {name: b, type: integer, range: [0, 9], asked_if: a == 1}
      - {name: c, type: integer, range: [0, 9]}
"""


def _inputs(tmp_path):
    qpath = tmp_path / "q.yaml"
    qpath.write_text(QTEXT, encoding="utf-8")
    df = pd.DataFrame({
        "rid": ["KX-11", "KX-12", "KX-13", "KX-14"],
        "wt": [1.0, 2.0, 1.0, 4.0], "grp": [1, 1, 2, 2],
        "a": [1, 1, 2, 1], "b": [3, -8, None, None], "c": [1, -9, 2, 5],
    })
    data = tmp_path / "data.csv"
    df.to_csv(data, index=False)  # pandas writes the file; read back through read_survey
    return data, qpath


def test_report_command_writes_workbook(tmp_path):
    data, qpath = _inputs(tmp_path)
    out = tmp_path / "out.xlsx"
    res = CliRunner().invoke(app, ["report", str(data), "-q", str(qpath), "-o", str(out), "--weight", "wt",
                                   "--by", "grp", "--no-case-ids", "--top-items", "2", "--top-patterns", "3"])
    assert res.exit_code == 0, res.output
    assert "wrote" in res.output
    wb = openpyxl.load_workbook(out)
    items = wb["Items"]
    top = next(i for i, r in enumerate(items.iter_rows(values_only=True), start=1) if r and r[0] == "Section")
    header = [c.value for c in items[top]]
    rows = list(items.iter_rows(min_row=top + 1, values_only=True))
    b = rows[1]
    # Hand: b is asked of KX-11, KX-12, KX-14 (a == 1); dont_know 1, item_missing 1 -> 2/3; weighted (2+4)/(1+2+4).
    assert b[header.index("Item nonresponse rate")] == 2 / 3
    assert abs(b[header.index("Item nonresponse rate (weighted)")] - 6 / 7) < 1e-12
    sub_top = [i for i, r in enumerate(wb["Subgroups"].iter_rows(values_only=True), start=1) if r and r[0] == "Section"]
    assert [c.value for c in wb["Subgroups"][sub_top[1]]][-2:] == ["grp = 1", "grp = 2"]
    assert not any("KX-" in str(v) for ws in wb for row in ws.iter_rows(values_only=True) for v in row if v)


def test_report_command_refuses_existing_and_bad_weight(tmp_path):
    data, qpath = _inputs(tmp_path)
    out = tmp_path / "out.xlsx"
    out.write_bytes(b"x")
    res = CliRunner().invoke(app, ["report", str(data), "-q", str(qpath), "-o", str(out)])
    assert res.exit_code == 1 and "--overwrite" in res.output
    res = CliRunner().invoke(app, ["report", str(data), "-q", str(qpath), "-o", str(out), "--overwrite",
                                   "--weight", "wgt"])
    assert res.exit_code == 1 and "did you mean 'wt'" in res.output
    assert out.read_bytes() == b"x"


def test_report_help_has_cautions():
    res = CliRunner().invoke(app, ["report", "--help"], terminal_width=200)
    assert res.exit_code == 0
    text = " ".join(res.output.split())
    assert "MNAR" in text and "data protection" in text and "--no-case-ids" in text
