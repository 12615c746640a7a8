"""The unit R-indicator over every sampled case, and what `--aux` / `--add-aux` do."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sheetread import table
import statsmodels.api as sm
from numpy.testing import assert_allclose
from typer.testing import CliRunner

from skipwise.cli import app

QUESTIONNAIRE = """\
format: 1
survey: {name: brackenmoor-sample, title: Brackenmoor full sample, case_id: cid}
context: [district, disposition, ward]
codes:
  - {value: -8, reason: dont_know, kind: nonresponse}
sections:
  - name: main
    items:
      - {name: age, type: integer, range: [16, 99]}
      - {name: sex, type: categorical, values: {1: "Female", 2: "Male"}}
      - {name: rating, type: integer, range: [1, 5]}
"""


def _full_sample(n: int = 1200, seed: int = 11) -> pd.DataFrame:
    # invented data: interviews (110, 120) carry answers, non-interviews (210, 310) frame columns only
    rng = np.random.default_rng(seed)
    district = rng.choice(["Ashby", "Brenfold", "Corrie", "Dunmere"], n)
    p = np.select([district == "Ashby", district == "Brenfold", district == "Corrie"], [0.7, 0.5, 0.35], 0.2)
    resp = rng.random(n) < p
    disp = np.where(resp, rng.choice([110, 120], n), rng.choice([210, 310], n))
    age = np.where(resp, rng.integers(16, 90, n), np.nan)
    sex = np.where(resp, rng.choice([1, 2], n), np.nan)
    rating = np.where(resp, rng.integers(1, 6, n), np.nan).astype(float)
    rating[resp & (rng.random(n) < 0.1)] = -8
    return pd.DataFrame({"cid": np.arange(1, n + 1), "district": district, "disposition": disp,
                         "ward": rng.integers(100, 160, n), "age": age, "sex": sex, "rating": rating})


@pytest.fixture()
def files(tmp_path):
    q = tmp_path / "q.yaml"
    q.write_text(QUESTIONNAIRE, encoding="utf-8")
    d = tmp_path / "sample.csv"
    _full_sample().to_csv(d, index=False)
    return q, d, tmp_path / "diag.xlsx"


def _run(q, d, out, *extra):
    return CliRunner().invoke(app, ["diagnose", str(d), "-q", str(q), "-o", str(out), "--response", "disposition",
                                    "--responded", "110", "--responded", "120", *extra])


def test_unit_r_indicator_uses_every_sampled_case(files):
    q, d, out = files
    res = _run(q, d, out)
    assert res.exit_code == 0, res.output
    # age and sex are blank for every nonrespondent: not default auxiliaries of the unit model
    assert "Auxiliaries: district" in res.output
    assert "age (blank for" in res.output
    raw = pd.read_csv(d)
    rep = table(out, "Representativeness", "Response")
    unit = rep[rep.Response == "unit response"].iloc[0]
    assert unit["Cases"] == len(raw) and unit["Left out (missing auxiliary)"] == 0
    # reference: statsmodels Logit of response on district over the full sample, and
    # R = 1 − 2 S(ρ̂) with S the standard deviation (N − 1 divisor) (Schouten, Cobben & Bethlehem, 2009)
    y = raw.disposition.isin([110, 120]).astype(float)
    x = sm.add_constant(pd.get_dummies(raw.district, drop_first=True).astype(float))
    rho = sm.Logit(y, x).fit(disp=0).predict(x)
    assert_allclose(unit["R-indicator"], 1 - 2 * np.std(rho, ddof=1), rtol=1e-6)
    assert_allclose(unit["Response rate"], y.mean(), rtol=1e-12)
    # the item models state how many cases entered them (respondents in scope)
    models = table(out, "Nonresponse models", "Item")
    assert {"Cases", "Left out (missing auxiliary)"} <= set(models.columns)


def test_explicit_aux_blank_for_nonrespondents_is_refused(files):
    q, d, out = files
    res = _run(q, d, out, "--aux", "district,age")
    assert res.exit_code == 1
    assert "'age'" in res.output and "unit nonrespondents" in res.output and "Traceback" not in res.output
    assert not out.exists()


def test_add_aux_adds_to_the_defaults(files):
    q, d, out = files
    res = CliRunner().invoke(app, ["diagnose", str(d), "-q", str(q), "-o", str(out), "--add-aux", "ward",
                                   "--items", "rating"])
    assert res.exit_code == 0, res.output
    line = next(ln for ln in res.output.splitlines() if ln.startswith("Auxiliaries:"))
    assert "district" in line and "ward" in line
    both = CliRunner().invoke(app, ["diagnose", str(d), "-q", str(q), "-o", str(out.with_name("b.xlsx")), "--aux", "district",
                                    "--add-aux", "ward"])
    assert both.exit_code == 1 and "--add-aux" in both.output
