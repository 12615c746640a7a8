"""`skipwise diagnose` end to end on a small invented questionnaire and data file."""

from __future__ import annotations

import numpy as np
import openpyxl
import pandas as pd
import pytest
from numpy.testing import assert_allclose
from typer.testing import CliRunner

from skipwise.cli import app
from skipwise.diagnostics.workbook import SHEETS

QUESTIONNAIRE = """\
format: 1
survey: {name: fernhollow-test, title: Fernhollow test survey, case_id: rid}
context: [region, size_band, base_wt, responded]
codes:
  - {value: -1, reason: routed_out, kind: structural}
  - {value: -8, reason: dont_know, kind: nonresponse}
  - {value: -9, reason: refused, kind: nonresponse}
sections:
  - name: main
    items:
      - {name: age, type: integer, range: [16, 99]}
      - {name: employed, type: categorical, values: {1: "Yes", 2: "No"}}
      - {name: hours, type: number, range: [0, 80], asked_if: employed == 1}
      - {name: income, type: number, range: [0, 100000]}
      - {name: rating, type: integer, range: [1, 5]}
"""


def _data(n: int = 300, seed: int = 3) -> pd.DataFrame:
    # invented data (demo/property use only)
    rng = np.random.default_rng(seed)
    region = rng.choice(["north", "south", "west"], n)
    age = rng.integers(16, 90, n).astype(float)
    emp = np.where(rng.random(n) < 0.6, 1, 2).astype(float)
    hours = np.where(emp == 1, np.round(rng.normal(35, 8, n).clip(1, 80)), -1)
    hours = np.where((emp == 1) & (rng.random(n) < 0.1), -8, hours)
    income = np.round(20000 + 300 * (age - 16) + rng.normal(0, 5000, n)).clip(0, 99999)
    miss = rng.random(n) < 1 / (1 + np.exp(-(-2.5 + 0.04 * (age - 16) + (region == "west"))))
    income = np.where(miss, np.where(rng.random(n) < 0.5, -9, np.nan), income)
    rating = rng.integers(1, 6, n).astype(float)
    rating[rng.random(n) < 0.08] = np.nan
    resp = (rng.random(n) < np.where(region == "west", 0.6, 0.9)).astype(int)
    return pd.DataFrame({"rid": np.arange(1, n + 1), "region": region, "size_band": rng.choice([1, 2, 3], n),
                         "base_wt": rng.uniform(1, 3, n).round(3), "responded": resp, "age": age,
                         "employed": emp, "hours": hours, "income": income, "rating": rating})


@pytest.fixture()
def files(tmp_path):
    pytest.importorskip("skipwise.questionnaire")
    q = tmp_path / "q.yaml"
    q.write_text(QUESTIONNAIRE, encoding="utf-8")
    d = tmp_path / "d.csv"
    _data().to_csv(d, index=False)
    return q, d, tmp_path / "diag.xlsx"


def test_diagnose_writes_workbook(files):
    q, d, out = files
    res = CliRunner().invoke(app, ["diagnose", str(d), "-q", str(q), "-o", str(out), "--sensitivity", "income",
                                   "--threshold", "30000", "--weight", "base_wt"])
    assert res.exit_code == 0, res.output
    assert "Little's MCAR test" in res.output and "MNAR" in res.output
    wb = openpyxl.load_workbook(out)
    assert tuple(wb.sheetnames) == SHEETS
    assert len(wb["Items at a glance"]._charts) == 1
    glance = pd.read_excel(out, sheet_name="Items at a glance", header=3).set_index("item")
    raw = pd.read_csv(d)  # pandas' own CSV reader as the outside view of the file
    # legitimate skips leave the denominator: hours is in scope only for the employed
    assert glance.loc["hours", "in_scope"] == (raw.employed == 1).sum()
    assert glance.loc["hours", "nonresponse"] == (raw.hours == -8).sum()
    assert glance.loc["income", "nonresponse"] == ((raw.income == -9) | raw.income.isna()).sum()
    # weighted tipping point, closed form δ* = (threshold − ȳ_r,w) W / W_m [computed]
    obs = raw.income >= 0
    yw = np.average(raw.income[obs], weights=raw.base_wt[obs])
    sens = {r[0]: r[1] for r in wb["Sensitivity"].iter_rows(min_row=3, max_row=12, values_only=True) if r[0]}
    assert_allclose(sens["tipping point δ*"], (30000 - yw) * raw.base_wt.sum() / raw.base_wt[~obs].sum(), rtol=1e-9)


def test_response_column_adds_unit_r_indicator(files):
    q, d, out = files
    res = CliRunner().invoke(app, ["diagnose", str(d), "-q", str(q), "-o", str(out), "--response", "responded",
                                   "--aux", "region,size_band", "--items", "income,rating"])
    assert res.exit_code == 0, res.output
    rep = pd.read_excel(out, sheet_name="Representativeness", header=3)
    unit = rep[rep.response == "unit response"].iloc[0]
    raw = pd.read_csv(d)
    assert_allclose(unit["response_rate"], raw.responded.mean(), rtol=1e-9)
    assert unit["n"] == len(raw)
    glance = pd.read_excel(out, sheet_name="Items at a glance", header=3)
    assert set(glance["item"]) == {"income", "rating"}
    assert glance.set_index("item").loc["rating", "in_scope"] == raw.responded.sum()


@pytest.mark.parametrize("args, text", [
    (["--items", "incme"], "income"),
    (["--aux", "regoin"], "region"),
    (["--threshold", "3"], "--sensitivity"),
], ids=["unknown-item", "unknown-aux", "threshold-alone"])
def test_user_errors_exit_1(files, args, text):
    q, d, out = files
    res = CliRunner().invoke(app, ["diagnose", str(d), "-q", str(q), "-o", str(out), *args])
    assert res.exit_code == 1
    assert text in res.output and "Traceback" not in res.output
    assert not out.exists()


def test_existing_output_needs_overwrite(files):
    q, d, out = files
    out.write_bytes(b"keep")
    res = CliRunner().invoke(app, ["diagnose", str(d), "-q", str(q), "-o", str(out)])
    assert res.exit_code == 1 and out.read_bytes() == b"keep"
