"""A numeric context covariate, read from every input format, in `impute` and in `run`.

Under pandas' copy-on-write the array behind a column read from a file can be read-only; the
predictor encoding must never write into it.  The files are written by the formats' own
writers (pyreadstat, pandas' to_stata / to_csv / to_parquet / to_excel), not by skipwise.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pyreadstat
import pytest
from typer.testing import CliRunner

from skipwise.classify import classify
from skipwise.classify import statuses as S
from skipwise.cli import app
from skipwise.io import read_survey
from skipwise.questionnaire import loads_questionnaire

QUESTIONNAIRE = """\
format: 1
survey: {name: kestlebeck-covariates, case_id: id}
context: [area, score]
codes:
  - {value: -9, reason: refused, kind: nonresponse}
sections:
  - name: main
    items:
      - {name: hours, type: number, range: [0, 80]}
      - {name: sat, type: categorical, values: {1: low, 2: mid, 3: high}}
"""
PLAN = "imputations: 2\nseed: 7\ndefault: {method: pmm, covariates: [score]}\nitems:\n  sat: {method: hotdeck, classes: [area]}\n"


def _frame(n: int = 120) -> pd.DataFrame:
    # invented data; score is a float column with no blank (the case where pandas hands out a view)
    rng = np.random.default_rng(5)
    score = rng.normal(50, 10, n).round(2)
    hours = np.round(score * 0.6 + rng.normal(0, 3, n)).clip(0, 80)
    hours[rng.random(n) < 0.15] = -9
    sat = rng.choice([1.0, 2.0, 3.0], n)
    sat[rng.random(n) < 0.1] = -9
    return pd.DataFrame({"id": np.arange(1, n + 1), "area": rng.choice([1.0, 2.0], n), "score": score,
                         "hours": hours, "sat": sat})


def _write(df: pd.DataFrame, path) -> None:
    ext = path.suffix
    if ext == ".sav":
        pyreadstat.write_sav(df, str(path))
    elif ext == ".dta":
        df.to_stata(path, write_index=False)
    elif ext == ".csv":
        df.to_csv(path, index=False)
    elif ext == ".parquet":
        df.to_parquet(path, index=False)
    else:
        df.to_excel(path, index=False)


@pytest.mark.parametrize("ext", [".sav", ".dta", ".csv", ".parquet", ".xlsx"])
def test_impute_with_numeric_context_covariate(tmp_path, ext):
    (tmp_path / "q.yaml").write_text(QUESTIONNAIRE)
    (tmp_path / "plan.yaml").write_text(PLAN)
    df = _frame()
    data = tmp_path / f"survey{ext}"
    _write(df, data)
    out = tmp_path / f"done{ext}"
    res = CliRunner().invoke(app, ["impute", str(data), "-q", str(tmp_path / "q.yaml"), "--plan",
                                   str(tmp_path / "plan.yaml"), "-o", str(out)])
    assert res.exit_code == 0, res.output
    q = loads_questionnaire(QUESTIONNAIRE)
    for k in (1, 2):
        done = read_survey(tmp_path / f"done_{k}{ext}")
        after = classify(done[list(df.columns)], q).status
        assert not after[["hours", "sat"]].isin(["refused", S.ITEM_MISSING]).any().any()
        # PMM gives only observed values (Little 1988): every filled hours value is a donor's answer
        filled = done.loc[done["hours_imp"] == 1, "hours"]
        assert len(filled) == (df.hours == -9).sum()
        assert set(filled) <= set(df.loc[df.hours != -9, "hours"])
    assert read_survey(data)["score"].equals(read_survey(data)["score"])  # input readable and unchanged


@pytest.mark.parametrize("ext", [".sav", ".parquet"])
def test_run_with_numeric_context_covariate(tmp_path, ext):
    (tmp_path / "q.yaml").write_text(QUESTIONNAIRE)
    (tmp_path / "impute.yaml").write_text(PLAN)
    data = tmp_path / f"survey{ext}"
    _write(_frame(), data)
    before = data.read_bytes()
    (tmp_path / "plan.yaml").write_text(
        f"format: 1\ndata: survey{ext}\nquestionnaire: q.yaml\nreport: false\ndiagnose: false\n"
        "imputation: {plan: impute.yaml}\noutput: {folder: package}\n")
    res = CliRunner().invoke(app, ["run", str(tmp_path / "plan.yaml")])
    assert res.exit_code == 0, res.output
    assert data.read_bytes() == before
    q = loads_questionnaire(QUESTIONNAIRE)
    for k in (1, 2):
        done = read_survey(tmp_path / "package" / f"survey_imputed_{k}{ext}")
        after = classify(done[list(_frame().columns)], q).status
        assert not after[["hours", "sat"]].isin(["refused", S.ITEM_MISSING]).any().any()
