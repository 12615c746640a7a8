"""`skipwise impute` through typer's CliRunner and one real subprocess."""

import subprocess
import sys

import pandas as pd
import pyreadstat
import pytest
from typer.testing import CliRunner

from skipwise.classify import classify
from skipwise.classify import statuses as S
from skipwise.cli import app
from skipwise.io import read_survey
from skipwise.questionnaire import loads_questionnaire
from tests.test_impute_skipaware import ITEMS, QUESTIONNAIRE, make_data

runner = CliRunner()


@pytest.fixture
def files(tmp_path):
    qf = tmp_path / "q.yaml"
    qf.write_text(QUESTIONNAIRE)
    df = make_data(4, n=150).drop(columns=["region"]).assign(region=1.0)
    data = tmp_path / "survey.sav"
    labels = {"sat": {1.0: "low", 2.0: "mid", 3.0: "high", -9.0: "Refused"}}
    pyreadstat.write_sav(df, str(data), variable_value_labels=labels,
                         column_labels={"sat": "Satisfaction"}, missing_ranges={"sat": [-9.0]})
    plan = tmp_path / "plan.yaml"
    plan.write_text("imputations: 2\nseed: 11\ndefault: {method: hotdeck, classes: [region]}\n")
    return tmp_path, qf, data, plan


def test_writes_m_files_with_flags_and_labels(files):
    tmp, qf, data, plan = files
    out = tmp / "done.sav"
    res = runner.invoke(app, ["impute", str(data), "-q", str(qf), "--plan", str(plan), "-o", str(out)])
    assert res.exit_code == 0, res.output
    assert "MNAR" in res.output
    q = loads_questionnaire(QUESTIONNAIRE)
    before = classify(read_survey(data), q).status
    for k in (1, 2):
        done = read_survey(tmp / f"done_{k}.sav")
        assert {f"{i}_imp" for i in ITEMS} <= set(done.columns)
        meta = done.attrs["survey_meta"]
        assert meta.column_labels["sat"] == "Satisfaction" and meta.value_labels["sat"][1] == "low"
        assert meta.value_labels["age_imp"][1] == "imputed"
        after = classify(done[read_survey(data).columns], q).status
        assert not after[ITEMS].isin([S.ITEM_MISSING, S.GATE_UNKNOWN, "refused", "dont_know"]).any().any()
        assert (done["sat_imp"] == 1).sum() == before["sat"].isin(["refused", "item_missing"]).sum()
    again = runner.invoke(app, ["impute", str(data), "-q", str(qf), "--plan", str(plan), "-o", str(out)])
    assert again.exit_code == 1 and "--overwrite" in again.output
    first = read_survey(tmp / "done_1.sav")
    ok = runner.invoke(app, ["impute", str(data), "-q", str(qf), "--plan", str(plan), "-o", str(out), "--overwrite"])
    assert ok.exit_code == 0
    # the rewritten file (same plan, same seed) equals the one read before the overwrite
    pd.testing.assert_frame_equal(read_survey(tmp / "done_1.sav"), first)


def test_stacked_csv_is_reproducible(files):
    tmp, qf, data, plan = files
    plan.write_text("imputations: 3\nseed: 5\noutput: {form: stacked}\n")
    outs = []
    for name in ("a.csv", "b.csv"):
        res = runner.invoke(app, ["impute", str(data), "-q", str(qf), "-p", str(plan), "-o", str(tmp / name)])
        assert res.exit_code == 0, res.output
        outs.append(pd.read_csv(tmp / name))
    assert outs[0].equals(outs[1]) and sorted(outs[0]["imputation"].unique()) == [1, 2, 3]


def test_bad_plan_exits_1_with_line(files):
    tmp, qf, data, plan = files
    plan.write_text("imputations: 2\ndefalt: {method: hotdeck}\n")
    res = runner.invoke(app, ["impute", str(data), "-q", str(qf), "-p", str(plan), "-o", str(tmp / "x.csv")])
    assert res.exit_code == 1 and "plan.yaml:2" in res.output and "did you mean 'default'" in res.output
    assert not (tmp / "x.csv").exists()


def test_help_and_usage():
    res = runner.invoke(app, ["impute", "--help"])
    assert res.exit_code == 0 and "missing not at random" in res.output
    assert runner.invoke(app, ["impute"]).exit_code == 2


def test_subprocess_smoke(files):
    tmp, qf, data, plan = files
    out = tmp / "smoke.parquet"
    proc = subprocess.run([sys.executable, "-m", "skipwise.cli", "impute", str(data), "-q", str(qf), "-p", str(plan),
                           "-o", str(out)], capture_output=True, text=True)
    if "No module named skipwise.cli.__main__" in proc.stderr:
        proc = subprocess.run([sys.executable, "-c", "from skipwise.cli import main; main()", "impute", str(data),
                               "-q", str(qf), "-p", str(plan), "-o", str(out)], capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    assert (tmp / "smoke_1.parquet").exists() and (tmp / "smoke_2.parquet").exists()
