"""`skipwise weigh` end to end on invented data."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
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
    assert {"Overview", "Outcome rates", "Margins", "Cautions", "Estimates", "Collapsing"} <= set(book.sheetnames)
    cautions = [r[0] for r in book["Cautions"].iter_rows(values_only=True)]
    assert any("missing not at random" in str(c) for c in cautions)
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
