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
from sheetread import pairs, table

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
    assert [s for s in SHEETS if s in wb.sheetnames] == wb.sheetnames  # workbook order, none unknown
    assert "Sensitivity" in wb.sheetnames  # requested here
    assert len(wb["Items at a glance"]._charts) == 1
    glance = table(out, "Items at a glance", "Item").set_index("Item")
    raw = pd.read_csv(d)  # pandas' own CSV reader as the outside view of the file
    # legitimate skips leave the denominator: hours is in scope only for the employed
    assert glance.loc["hours", "In scope"] == (raw.employed == 1).sum()
    assert glance.loc["hours", "Nonresponse"] == (raw.hours == -8).sum()
    assert glance.loc["income", "Nonresponse"] == ((raw.income == -9) | raw.income.isna()).sum()
    # weighted tipping point, closed form δ* = (threshold − ȳ_r,w) W / W_m [computed]
    obs = raw.income >= 0
    yw = np.average(raw.income[obs], weights=raw.base_wt[obs])
    sens = pairs(out, "Sensitivity")
    assert_allclose(sens["Tipping point delta"], (30000 - yw) * raw.base_wt.sum() / raw.base_wt[~obs].sum(), rtol=1e-9)


def test_response_column_adds_unit_r_indicator(files):
    q, d, out = files
    res = CliRunner().invoke(app, ["diagnose", str(d), "-q", str(q), "-o", str(out), "--response", "responded",
                                   "--aux", "region,size_band", "--items", "income,rating"])
    assert res.exit_code == 0, res.output
    rep = table(out, "Representativeness", "Response")
    unit = rep[rep.Response == "unit response"].iloc[0]
    raw = pd.read_csv(d)
    assert_allclose(unit["Response rate"], raw.responded.mean(), rtol=1e-9)
    assert unit["Cases"] == len(raw)
    glance = table(out, "Items at a glance", "Item")
    assert set(glance["Item"]) == {"income", "rating"}
    assert glance.set_index("Item").loc["rating", "In scope"] == raw.responded.sum()


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
