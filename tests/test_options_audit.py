"""Options that must not surprise: break-off detection off, the sensitivity item's type, and one
count of Little's variables in the console and the workbook."""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
from typer.testing import CliRunner

from skipwise.classify import classify
from skipwise.cli import app
from skipwise.questionnaire import loads_questionnaire
from tests.test_diagnostics_cli import QUESTIONNAIRE, _data

BREAKOFF_Q = """
format: 1
survey: {name: hollin-breakoff, case_id: id}
breakoff: BREAKOFF
sections:
  - name: main
    items:
      - {name: q1, type: integer, range: [1, 5]}
      - {name: q2, type: integer, range: [1, 5]}
      - {name: q3, type: integer, range: [1, 5]}
      - {name: q4, type: integer, range: [1, 5]}
"""


def test_breakoff_false_turns_detection_off():
    # case 2 answers q1 and leaves the rest blank: with min_run 2 the trailing blanks are a
    # break-off; with detection off they are blanks in universe, which the status table calls
    # item_missing (docs/contract.md, section 1)
    data = pd.DataFrame({"id": [1, 2], "q1": [1, 2], "q2": [3, np.nan], "q3": [4, np.nan], "q4": [5, np.nan]})
    on = classify(data, loads_questionnaire(BREAKOFF_Q.replace("BREAKOFF", "{min_run: 2}"))).status
    off = classify(data, loads_questionnaire(BREAKOFF_Q.replace("BREAKOFF", "false"))).status
    assert list(on.iloc[1].astype(str)) == ["answered", "breakoff", "breakoff", "breakoff"]
    assert list(off.iloc[1].astype(str)) == ["answered", "item_missing", "item_missing", "item_missing"]
    assert (off.iloc[0].astype(str) == "answered").all()


def test_sensitivity_refuses_a_categorical_item(tmp_path):
    q = tmp_path / "q.yaml"
    q.write_text(QUESTIONNAIRE, encoding="utf-8")
    d = tmp_path / "d.csv"
    _data().to_csv(d, index=False)
    res = CliRunner().invoke(app, ["diagnose", str(d), "-q", str(q), "-o", str(tmp_path / "x.xlsx"),
                                   "--sensitivity", "employed"])
    assert res.exit_code == 1 and "'employed' is categorical" in res.output and "Traceback" not in res.output
    assert not (tmp_path / "x.xlsx").exists()


def test_little_variables_one_count(tmp_path):
    q = tmp_path / "q.yaml"
    q.write_text(QUESTIONNAIRE, encoding="utf-8")
    d = tmp_path / "d.csv"
    _data().to_csv(d, index=False)
    out = tmp_path / "diag.xlsx"
    res = CliRunner().invoke(app, ["diagnose", str(d), "-q", str(q), "-o", str(out), "--aux", "region,base_wt"])
    assert res.exit_code == 0, res.output
    console = int(re.search(r"(\d+) variables\)", res.output).group(1))
    from sheetread import pairs as sheet_pairs, table, texts

    pairs = sheet_pairs(out, "MCAR test")
    assert int(pairs["Variables"]) == console
    # ... and so does the table of the test's variables: one row per variable
    assert len(table(out, "MCAR test", "Variable")) == console
    # the scope text (the sheet's explanation) names no other count of variables
    scope = " ".join(texts(out, "MCAR test")[1:5])
    assert "chosen variables" not in scope
    assert "base_wt" in scope   # the numeric auxiliary in the test is named
