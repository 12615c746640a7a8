"""Tests of `skipwise check`: a questionnaire against the data it describes.

The expected findings are hand-counted on the tiny inline frames (invented data), following
the declarations of docs/questionnaire-format.md (categories, ranges, codes, case id); duplicate counts are
cross-checked with pandas' own ``Series.duplicated`` (outside reference).
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

import skipwise.cli.cmd_check  # noqa: F401  (registers the command)
from skipwise.checkdata import DataCheck, check_data
from skipwise.cli.app import app
from skipwise.errors import ProblemCode
from skipwise.questionnaire import load_questionnaire, loads_questionnaire

runner = CliRunner()
FIELDS = ["kind", "item", "finding", "message"]

TINY = """\
format: 1
survey: {name: tiny, case_id: id}
context: [region]
codes:
  - {value: -1, reason: not_asked, kind: structural}
  - {value: -9, reason: refused, kind: nonresponse}
sections:
  - name: s
    items:
      - name: smoke
        type: categorical
        values: {1: "Yes", 2: "No"}
      - name: cigs
        type: integer
        range: [1, 60]
        asked_if: smoke == 1
        codes:
          - {value: 997, reason: varies, kind: substantive}
      - name: modes
        type: multi
        options: {car: Car, bus: Bus}
"""


def clean() -> pd.DataFrame:
    return pd.DataFrame({
        "id": [1, 2, 3, 4], "region": [1, 1, 2, 2],
        "smoke": [1, 2, -9, 1], "cigs": [10, -1, -1, 997],
        "modes_car": [1, 0, -9, 1], "modes_bus": [0, 1, -9, 0],
    })


def _frame(**changes) -> pd.DataFrame:
    df = clean()
    for col, values in changes.items():
        if values is None:
            df = df.drop(columns=col)
        else:
            df[col] = values
    return df


MISSING_HINT = "add the column to the data or remove it from the questionnaire"
CASES = [
    (clean(), []),
    (_frame(cigs=None, junk=[0, 0, 0, 0]), [
        ("error", "cigs", "missing-column", "column 'cigs' (an item) is not in the data"),
        ("note", "", "unused-code", "global code -1 (not_asked) occurs in none of the 2 item(s) it applies to"),
        ("note", "junk", "undeclared-column", "column 'junk' is not in the questionnaire"),
    ]),
    (_frame(smoke=[3, 7, 3, 1], cigs=[0, 61, 61, 61]), [
        ("error", "smoke", "undeclared-value",
         "3 cell(s) hold values that are no declared code and not valid (categories 1, 2): 3 (2), 7 (1)"),
        ("error", "cigs", "undeclared-value",
         "4 cell(s) hold values that are no declared code and not valid (integer range [1, 60]): 61 (3), 0 (1)"),
        ("note", "cigs", "unused-code", "code 997 (varies) never occurs in this item"),
        ("note", "", "unused-code", "global code -1 (not_asked) occurs in none of the 3 item(s) it applies to"),
    ]),
    (_frame(id=[5, 5, np.nan, 5]), [
        ("error", "id", "bad-data", "1 row(s) have a blank case id (rows 3)"),
        ("error", "id", "duplicate-case-id", "1 case id(s) occur more than once (3 rows): 5"),
    ]),
    (_frame(modes_bus=[0, 2, -9, 0], region=None), [
        ("error", "region", "missing-column", "column 'region' (a context or paradata column) is not in the data"),
        ("error", "modes", "undeclared-value", "column 'modes_bus': 1 cell(s) hold values that are no declared "
         "code and not valid (selected 1, unselected 0): 2 (1)"),
    ]),
]
IDS = ["clean", "missing-and-extra-column", "undeclared-values", "case-ids", "multi-and-context"]


@pytest.mark.parametrize("df, expected", CASES, ids=IDS)
def test_check_rows(df, expected):
    result = check_data(df, loads_questionnaire(TINY))
    assert result.to_rows(FIELDS) == expected
    assert result.ok is (not any(kind == "error" for kind, *_ in expected))


def _table(output: str) -> list[tuple[str, ...]]:
    lines = output.splitlines()
    if not lines or not lines[0].startswith("kind"):
        return []
    body = lines[2:lines.index("")]
    return [tuple(re.split(r" {2,}", ln, maxsplit=3)) for ln in body]


@pytest.mark.parametrize("df, expected", CASES, ids=IDS)
def test_check_command_table_and_exit(tmp_path, df, expected):
    data, qfile = tmp_path / "d.csv", tmp_path / "q.yaml"
    df.to_csv(data, index=False)
    qfile.write_text(TINY, encoding="utf-8")
    result = runner.invoke(app, ["check", str(data), "-q", str(qfile)])
    q = load_questionnaire(qfile)
    rows = check_data(pd.read_csv(data), q).to_rows(["kind", "item", "finding", "detail"])
    shown = [tuple(v or "-" for v in r) for r in rows]
    assert _table(result.output) == shown
    assert [r[:3] for r in shown] == [(k, i or "-", f) for k, i, f, _ in expected]
    errors = sum(k == "error" for k, *_ in expected)
    assert result.exit_code == (1 if errors else 0), result.output
    assert f"{errors} error(s), {len(expected) - errors} note(s)" in result.output
    if not expected:
        assert "The questionnaire and the data agree." in result.output


def test_duplicates_agree_with_pandas():
    ids = pd.Series(["a", "b", "a", "c", "b", "a", "d"])
    df = clean().iloc[[0, 1, 2, 3, 0, 1, 2]].reset_index(drop=True).assign(id=ids)
    result = check_data(df, loads_questionnaire(TINY), top=2)
    (p,) = [p for p in result.problems if p.code is ProblemCode.DUPLICATE_CASE_ID]
    ref = ids[ids.duplicated(keep=False)]  # outside reference: pandas' duplicated
    assert p.message == (f"{ref.nunique()} case id(s) occur more than once ({len(ref)} rows): "
                         "'a', 'b'")
    assert p.hint == "remove duplicate rows or correct the ids"


def test_notes_only_exit_zero(tmp_path):
    data, qfile = tmp_path / "d.csv", tmp_path / "q.yaml"
    clean().assign(extra=1).to_csv(data, index=False)
    qfile.write_text(TINY, encoding="utf-8")
    result = runner.invoke(app, ["check", str(data), "-q", str(qfile)])
    assert result.exit_code == 0 and "0 error(s), 1 note(s)" in result.output


def test_unreadable_inputs_are_user_errors(tmp_path):
    qfile = tmp_path / "q.yaml"
    qfile.write_text(TINY.replace("type: integer", "type: integr"), encoding="utf-8")
    data = tmp_path / "d.csv"
    clean().to_csv(data, index=False)
    r = runner.invoke(app, ["check", str(data), "-q", str(qfile)])
    assert r.exit_code == 1 and "did you mean 'integer'?" in r.output
    r = runner.invoke(app, ["check", str(tmp_path / "none.csv"), "-q", str(tmp_path / "none.yaml")])
    assert r.exit_code == 1 and "file not found" in r.output
    assert runner.invoke(app, ["check", str(data)]).exit_code == 2  # -q is required: usage error


def test_date_item_values():
    q = loads_questionnaire("""\
format: 1
survey: {name: d, case_id: id}
sections:
  - name: s
    items:
      - {name: visit, type: date, range: ["2026-01-01", "2026-06-30"]}
""")
    df = pd.DataFrame({"id": [1, 2, 3, 4], "visit": ["2026-02-01", "2025-12-31", "soon", None]})
    assert check_data(df, q).to_rows(FIELDS) == [
        ("error", "visit", "undeclared-value", "2 cell(s) hold values that are no declared code and not valid "
         "(date range ['2026-01-01', '2026-06-30']): '2025-12-31' (1), 'soon' (1)"),
    ]


# -- the demo questionnaire, with a hand-made frame -------------------------------------------------
DEMO = Path(__file__).resolve().parents[1] / "questionnaires" / "marrowby-2026.yaml"


def _demo_frame(q) -> pd.DataFrame:
    """Three invented cases, every column filled with a value the questionnaire allows."""
    cols: dict[str, list] = {q.case_id: [1, 2, 3]}
    for c in q.context:
        cols[c] = [1, 1, 2]
    for it in q.items:
        if it.type.value == "multi":
            for c in it.columns:
                cols[c] = [1, 0, 0]
        elif it.values:
            cols[it.name] = [list(it.values)[0]] * 3
        elif it.type.value == "text":
            cols[it.name] = ["A comment", None, None]
        else:
            cols[it.name] = [it.range[0]] * 3
    return pd.DataFrame(cols)


def test_demo_questionnaire_with_hand_made_frame():
    q = load_questionnaire(DEMO)
    df = _demo_frame(q)
    df.loc[:, "rent_month"] = [-1, -1, 400]      # not a renter: structural code
    df.loc[:, "income"] = [-7, 2100, -9]         # don't know, refused
    df.loc[:, "commute_minutes"] = [997, 20, 35]  # "varies": a substantive code
    df.loc[:, "savings"] = [1, -8, 2]              # "prefer not to say" (the web form's code)
    assert check_data(df, q).problems == []

    df.loc[:, "hh_size"] = [2, 9, 12]            # range 1..8
    df.loc[:, "tenure"] = [1, 3, 0]              # categories 1..4
    df.loc[:, "case_id"] = [1, 2, 1]
    df.loc[:, "commute_minutes"] = [25, 20, 35]   # 997 now never occurs
    df = df.drop(columns=["m_age_5"]).assign(interviewer=[7, 7, 8])
    result = check_data(df, q)
    assert result.to_rows(["kind", "item", "finding"]) == [
        ("error", "case_id", "duplicate-case-id"),
        ("error", "m_age_5", "missing-column"),
        ("error", "hh_size", "undeclared-value"),
        ("error", "tenure", "undeclared-value"),
        ("note", "commute_minutes", "unused-code"),
        ("note", "interviewer", "undeclared-column"),
    ]
    assert result.problems[2].message.endswith("(integer range [1, 8]): 9 (1), 12 (1)")
    assert not result.ok and isinstance(result, DataCheck)


def test_subprocess_smoke(tmp_path):
    import subprocess
    import sys

    data, qfile = tmp_path / "d.csv", tmp_path / "q.yaml"
    _frame(smoke=[1, 2, 5, 1]).to_csv(data, index=False)
    qfile.write_text(TINY, encoding="utf-8")
    proc = subprocess.run([sys.executable, "-c", "from skipwise.cli import main; main()", "check", str(data),
                           "-q", str(qfile)], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 1 and "Traceback" not in proc.stderr
    assert ("error", "smoke", "undeclared-value") == _table(proc.stdout)[0][:3]
