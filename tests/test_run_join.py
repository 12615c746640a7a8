"""`skipwise run`: the interview answers are joined to a dispositions-only sample file before weighting,
and the plan check names a weighting column that is in neither file before any step runs."""

from __future__ import annotations

import numpy as np
import pandas as pd
from typer.testing import CliRunner

from skipwise.cli import app
from skipwise.pipeline import run_plan
from test_run_pipeline import WEIGHTS, _project  # the tiny invented pond survey

runner = CliRunner()
ESTIMATES = WEIGHTS + "replicates: {method: jackknife, psu: id}\nestimates: {means: [mood]}\n"
# Estimates come with replicate standard errors: a delete-one jackknife over the 50 cases.


def _setup(root, weights: str):
    plan = _project(root)
    (root / "in/weights.yaml").write_text(weights, encoding="utf-8")
    text = plan.read_text().replace("imputation: {plan: in/impute.yaml}\n", "")
    plan.write_text(text, encoding="utf-8")
    return plan


def test_dispositions_only_sample_file_gets_the_answers_joined(tmp_path):
    plan = _setup(tmp_path, ESTIMATES)
    frame = pd.read_csv(tmp_path / "in/frame.csv")
    assert "mood" not in frame.columns  # the weighting file holds the design and dispositions only
    res = run_plan(plan)
    st = res.state
    assert st.joined_columns == ["mood"]
    est = st.weigh.estimates
    row = est[est.iloc[:, 0].astype(str).str.contains("mood")] if not est.empty else est
    assert len(row) >= 1
    # Outside reference: the weighted mean of the answered mood values with the final weights, by pandas
    # (ratio estimator sum(w y) / sum(w), Cochran 1977, ch. 6 [memory]).
    out = pd.read_csv(res.files["weighted_frame"])
    data = pd.read_spss(tmp_path / "in/pond.sav", convert_categoricals=False)
    mood = data.set_index("id")["mood"]
    y = out["id"].map(mood.where(mood >= 0))
    w = out["wt_final"].where(y.notna())
    expected = float((w * y).sum() / w.sum())
    numbers = row.select_dtypes("number").to_numpy().ravel()
    assert np.any(np.isclose(numbers, expected, rtol=1e-9)), (row, expected)
    assert "mood" not in out.columns  # the weighted sample file stays the file given, plus its weights


def test_estimate_in_neither_file_stops_the_run_at_the_plan(tmp_path):
    plan = _setup(tmp_path, WEIGHTS + "estimates: {means: [moood]}\n")
    result = runner.invoke(app, ["run", str(plan)])
    assert result.exit_code == 1
    assert "step 'plan'" in result.output and "estimate variable 'moood'" in result.output
    assert "did you mean 'mood'" in result.output
    assert "] read:" not in result.output  # caught before any step ran
    assert not (tmp_path / "package").exists()


def test_design_variable_only_in_the_interviews_is_refused(tmp_path):
    plan = _setup(tmp_path, WEIGHTS.replace("classes: [area]", "classes: [pet]"))
    result = runner.invoke(app, ["run", str(plan)])
    assert result.exit_code == 1
    assert "nonresponse class 'pet' is only in the interview file" in result.output


def test_report_weight_can_name_the_final_weight(tmp_path):
    plan = _setup(tmp_path, ESTIMATES)
    plan.write_text(plan.read_text().replace("report: {by: [area]}", "report: {by: [area], weight: wt_final}"))
    frame = pd.read_csv(tmp_path / "in/frame.csv")
    frame.loc[frame["id"].isin([1, 2, 3]), "disposition"] = 2  # three interviews the weighting treats as refusals
    frame.to_csv(tmp_path / "in/frame.csv", index=False)
    res = run_plan(plan)
    import openpyxl

    wb = openpyxl.load_workbook(res.files["item_report"])
    top = next(i for i, r in enumerate(wb["Items"].iter_rows(values_only=True), start=1) if r and r[0] == "Section")
    header = [c.value for c in wb["Items"][top]]
    assert "Item nonresponse rate (weighted)" in header and "Item nonresponse rate" in header
    notes = [r[1] for r in wb["Overview"].iter_rows(values_only=True) if r and r[0] == "Note"]
    # Outside reference: the zero weights counted by pandas in the delivered file
    final = pd.read_parquet(res.files["data_parquet"])
    zero = int((final["wt_final"].fillna(0) == 0).sum())
    assert zero == 3
    assert len(notes) == 1 and f"{zero:,} case(s) have weight 0 in 'wt_final'" in notes[0]
