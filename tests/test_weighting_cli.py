"""`skipwise weigh` end to end on invented data."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sheetread import table, texts
from numpy.testing import assert_allclose
from openpyxl import load_workbook
from typer.testing import CliRunner

from skipwise.cli import app
from skipwise.io import read_survey, write_survey
from skipwise.io.meta import SurveyMeta

from test_weighting_pipeline import PLAN, make_frame

runner = CliRunner()


@pytest.fixture()
def files(tmp_path):
    df = make_frame(600)
    meta = SurveyMeta(column_labels={"region": "Region of residence"},
                      value_labels={"owns_car": {1: "Yes", 2: "No"}}, missing_values={"score": [-9]})
    data = tmp_path / "survey.sav"
    write_survey(df, data, meta)
    plan = tmp_path / "plan.yaml"
    plan.write_text(PLAN.replace("  strata: stratum\n", "  strata: stratum\n") + "output:\n  prefix: w_\n")
    return tmp_path, data, plan


def test_weigh_writes_data_parquet_and_workbook(files):
    tmp, data, plan = files
    out = tmp / "weighted.sav"
    result = runner.invoke(app, ["weigh", str(data), "--plan", str(plan), "-o", str(out)])
    assert result.exit_code == 0, result.output
    assert "Kish design effect" in result.output and "MNAR" in result.output
    back = read_survey(out)
    pq = read_survey(tmp / "weighted.parquet")
    for frame in (back, pq):
        assert {"w_base", "w_final", "w_rep001", "region", "score"} <= set(frame.columns)
        meta = frame.attrs["survey_meta"]
        assert meta.column_labels["region"] == "Region of residence"
        assert meta.value_labels["owns_car"] == {1: "Yes", 2: "No"}
        assert_allclose(frame["w_final"].sum(), 10000, rtol=1e-8)
    assert back.attrs["survey_meta"].missing_values["score"] == [-9]
    book = load_workbook(tmp / "weighted_weights.xlsx", read_only=True)
    assert {"Overview", "Outcome rates", "Margins", "Estimates"} <= set(book.sheetnames)
    cautions = " ".join(texts(book, "Overview"))
    assert "missing not at" in cautions
    # refuses to overwrite without --overwrite
    again = runner.invoke(app, ["weigh", str(data), "--plan", str(plan), "-o", str(out)])
    assert again.exit_code == 1 and "already exists" in again.output


def test_weigh_plan_error_exit_1_with_line(files):
    tmp, data, plan = files
    plan.write_text(PLAN.replace("min_respondents", "min_respondent"))
    result = runner.invoke(app, ["weigh", str(data), "--plan", str(plan), "-o", str(tmp / "o.csv")])
    assert result.exit_code == 1
    assert "plan.yaml:21" in result.output and "did you mean 'min_respondents'?" in result.output


def test_weigh_help_mentions_caution():
    result = runner.invoke(app, ["weigh", "--help"])
    assert result.exit_code == 0 and "missing not at random" in result.output


def test_weigh_with_questionnaire_share_answered(tmp_path):
    # Interview split needs the classifier's share of applicable items answered.
    pytest.importorskip("skipwise.classify")
    q = tmp_path / "q.yaml"
    q.write_text(
        "format: 1\nsurvey: {name: t, title: T, case_id: rid}\ncontext: [dispo]\n"
        "codes:\n  - {value: -9, reason: refused, kind: nonresponse}\n"
        "sections:\n  - name: s\n    items:\n"
        + "".join(f"      - {{name: q{i}, type: integer, range: [0, 9]}}\n" for i in range(1, 6)))
    rows = [[1, 110, 1, 2, 3, 4, 5], [2, 110, 1, 2, 3, -9, -9], [3, 110, 1, -9, -9, -9, -9], [4, 220] + [None] * 5]
    df = pd.DataFrame(rows, columns=["rid", "dispo", "q1", "q2", "q3", "q4", "q5"])
    data = tmp_path / "d.csv"
    df.to_csv(data, index=False)
    plan = tmp_path / "p.yaml"
    plan.write_text("format: 1\ndispositions:\n  column: dispo\n  categories: {I: [110], NC: [220]}\n"
                    "  interview_split: {breakoff_below: 0.5, complete_above: 0.8}\n")
    out = tmp_path / "o.csv"
    result = runner.invoke(app, ["weigh", str(data), "--plan", str(plan), "-o", str(out), "-q", str(q)])
    assert result.exit_code == 0, result.output
    # shares 1.0, 0.6, 0.2 -> complete, partial, break-off (counted as R) [AAPOR example cut-points, memory]
    # delivered as the categories' numbers 1-8 in the standard's order I, P, R, NC, O, UH, UO, NE
    assert pd.read_csv(out)["wt_outcome"].tolist() == [1, 2, 3, 4]


def test_weigh_subprocess_smoke(files):
    import subprocess
    import sys

    tmp, data, plan = files
    out = tmp / "sub.parquet"
    proc = subprocess.run([sys.executable, "-c", "from skipwise.cli import main; main()", "weigh", str(data),
                           "--plan", str(plan), "-o", str(out)], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    assert out.exists() and (tmp / "sub_weights.xlsx").exists()
    bad = subprocess.run([sys.executable, "-c", "from skipwise.cli import main; main()", "weigh", str(data),
                          "--plan", str(tmp / "nope.yaml"), "-o", str(tmp / "x.csv")],
                         capture_output=True, text=True, timeout=60)
    assert bad.returncode == 1 and "not found" in bad.stderr and "Traceback" not in bad.stderr


def test_estimates_use_answered_cells_only_with_a_questionnaire(tmp_path):
    df = make_frame(600)
    # Invalid values (outside the range) and an answer given where the routing skips the item.
    df.loc[[3, 7, 11], "score"] = 777.0
    df["gate"] = 1
    df.loc[20, "gate"] = 2
    df.loc[20, "score"] = 99.0
    data = tmp_path / "survey.parquet"
    write_survey(df, data)
    plan = tmp_path / "plan.yaml"
    plan.write_text(PLAN)
    q = tmp_path / "q.yaml"
    q.write_text("format: 1\nsurvey: {name: t, case_id: rid}\n"
                 "context: [dispo, region, agegrp, p_sel, stratum, psu]\n"
                 "codes: [{value: -9, reason: refused, kind: nonresponse}]\n"
                 "sections:\n  - name: s\n    items:\n"
                 "      - {name: gate, type: categorical, values: {1: 'Yes', 2: 'No'}}\n"
                 "      - {name: score, type: number, range: [0, 100], asked_if: gate == 1}\n"
                 "      - {name: owns_car, type: categorical, values: {1: 'Yes', 2: 'No'}}\n")
    out = tmp_path / "w.parquet"
    result = runner.invoke(app, ["weigh", str(data), "--plan", str(plan), "-o", str(out), "-q", str(q)])
    assert result.exit_code == 0, result.output
    w = read_survey(out)["wt_final"].to_numpy()
    x = df["score"].to_numpy(dtype=float)
    # By hand: respondents (w > 0) whose score is a valid in-universe answer.
    ok = (w > 0) & (x >= 0) & (x <= 100) & (df["gate"].to_numpy() == 1)
    book = load_workbook(tmp_path / "w_weights.xlsx", read_only=True)
    means = table(book, "Estimates", "Variable").set_index("Variable")
    assert_allclose(means.loc["score", "Estimate"], np.average(x[ok], weights=w[ok]), rtol=1e-9)


def test_weigh_engine_auto_says_when_it_stays_in_memory(files, monkeypatch):
    # DESIGN §7: --engine auto never changes the form of the output; the dask engine writes no .sav,
    # so a .sav OUT stays in memory, and over the budget the console says so.
    tmp, data, plan = files
    monkeypatch.setenv("SKIPWISE_MEMORY_BUDGET", "1KB")
    out = tmp / "auto.sav"
    result = runner.invoke(app, ["weigh", str(data), "--plan", str(plan), "-o", str(out), "--engine", "auto"])
    assert result.exit_code == 0, result.output
    assert "--engine auto" in result.output and "using the in-memory engine" in result.output
    assert out.is_file()
    monkeypatch.setenv("SKIPWISE_MEMORY_BUDGET", "100GB")
    result = runner.invoke(app, ["weigh", str(data), "--plan", str(plan), "-o", str(tmp / "auto2.sav"),
                                 "--engine", "auto"])
    assert result.exit_code == 0 and "--engine auto" not in result.output, result.output
