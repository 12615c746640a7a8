"""`skipwise demo` end to end on the invented scenario, checked against the generator's own truth."""

from __future__ import annotations

import hashlib

import numpy as np
import pandas as pd
import pyreadstat
import pytest
from typer.testing import CliRunner

from skipwise.cli import app
from skipwise.demo import generate
from skipwise.demo.compare import SPECIAL_CODES


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo")
    result = CliRunner().invoke(app, ["demo", "--out", str(out)])
    assert result.exit_code == 0, result.output
    return out, result.output, generate()


def test_demo_writes_every_output(demo):
    out, output, _ = demo
    # `skipwise demo` runs OUT/plan.yaml, whose hand-over package goes to OUT/package.
    for rel in ["data/marrowby-2026.sav", "data/marrowby-2026.dta", "data/truth_status.parquet",
                "package/marrowby-2026.sav", "package/marrowby-2026_faults.csv",
                "package/marrowby-2026_coded.dta", "package/item_report.xlsx", "package/diagnostics.xlsx",
                "package/sample_with_answers_weighted.parquet", "package/weighting.xlsx",
                "package/marrowby-2026_imputed.parquet"]:
        assert (out / rel).stat().st_size > 0, rel
    assert "statuses agree with the generator's truth in 100.00%" in output
    flagged_line = next(line for line in output.splitlines() if line.startswith("diagnostics flag"))
    assert "MCAR in the generator" not in flagged_line
    assert "hours_week (MAR" in flagged_line and "life_sat (MAR" in flagged_line


def test_status_file_matches_the_generators_truth(demo):
    out, _, scenario = demo
    # pyreadstat reads the status columns; the truth comes from the generator's own simulation.
    frame, meta = pyreadstat.read_sav(str(out / "package/marrowby-2026.sav"))
    labels = meta.variable_value_labels["life_sat_status"]
    got = frame["life_sat_status"].map(labels)
    assert (got.to_numpy() == scenario.truth_status["life_sat"].astype(str).to_numpy()).all()


def test_weighting_recovers_true_means_better_than_unweighted(demo):
    out, _, scenario = demo
    weighted = pd.read_parquet(out / "package/sample_with_answers_weighted.parquet")
    w = weighted["wt_final"].to_numpy()
    # Unit response depends on district, age and sex, the weighting variables; these items'
    # item nonresponse is MCAR in the generator, so weighting should move their means toward the truth.
    for item in ("trips_week", "exercise_days"):
        assert scenario.mechanisms[item] == "MCAR"
        x = pd.to_numeric(weighted[item], errors="coerce").to_numpy(dtype=float)
        ok = (w > 0) & np.isfinite(x) & ~np.isin(x, SPECIAL_CODES)
        truth = scenario.true_means[item]
        assert abs(np.average(x[ok], weights=w[ok]) - truth) < abs(x[ok].mean() - truth), item
    # Raking reproduces the invented population totals.
    for var, totals in scenario.population_totals.items():
        got = weighted[w > 0].groupby(var)["wt_final"].sum()
        np.testing.assert_allclose(got.loc[list(totals)].to_numpy(), list(totals.values()), rtol=1e-6)


def test_demo_never_modifies_its_inputs(demo, tmp_path):
    out, _, _ = demo
    sav = out / "data/marrowby-2026.sav"
    before = hashlib.sha256(sav.read_bytes()).hexdigest()
    result = CliRunner().invoke(app, ["classify", str(sav), "-q", "questionnaires/marrowby-2026.yaml",
                                      "-o", str(tmp_path / "x.parquet")])
    assert result.exit_code == 0, result.output
    assert hashlib.sha256(sav.read_bytes()).hexdigest() == before
