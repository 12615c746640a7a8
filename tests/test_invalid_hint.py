"""classify's hint when more than 1 % of cells are invalid (threshold: common practice, no source)."""

from __future__ import annotations

import textwrap

import pandas as pd
from typer.testing import CliRunner

from skipwise.classify import classify
from skipwise.classify.hints import invalid_hint
from skipwise.cli import app
from skipwise.questionnaire import loads_questionnaire

Q = textwrap.dedent("""\
    format: 1
    survey: {name: t, case_id: id}
    sections:
      - name: s
        items:
          - {name: a, type: integer, range: [0, 10]}
          - {name: b, type: integer, range: [0, 10]}
    """)


def _frame(n_invalid: int) -> pd.DataFrame:
    # 50 cases x 2 items = 100 cells; the first n_invalid cells of b hold 99 (outside the range)
    b = [99] * n_invalid + [1] * (50 - n_invalid)
    return pd.DataFrame({"id": range(1, 51), "a": [1] * 50, "b": b})


def test_threshold_is_more_than_one_percent():
    q = loads_questionnaire(Q)
    assert invalid_hint(classify(_frame(0), q)) is None
    assert invalid_hint(classify(_frame(1), q)) is None  # exactly 1 of 100 cells: not more than 1 %
    text = invalid_hint(classify(_frame(2), q), data="x.csv", questionnaire="q.yaml")
    assert text is not None and "2 of 100 cells (2.0%) are invalid" in text
    assert "skipwise check x.csv -q q.yaml" in text and "most in b" in text


def test_classify_prints_the_hint(tmp_path):
    (tmp_path / "q.yaml").write_text(Q)
    _frame(5).to_csv(tmp_path / "d.csv", index=False)
    result = CliRunner().invoke(app, ["classify", str(tmp_path / "d.csv"), "-q", str(tmp_path / "q.yaml"),
                                      "-o", str(tmp_path / "out.csv")])
    assert result.exit_code == 0, result.output
    assert "are invalid" in result.output and "skipwise check" in result.output
    _frame(0).to_csv(tmp_path / "clean.csv", index=False)
    result = CliRunner().invoke(app, ["classify", str(tmp_path / "clean.csv"), "-q", str(tmp_path / "q.yaml"),
                                      "-o", str(tmp_path / "out2.csv")])
    assert result.exit_code == 0 and "skipwise check" not in result.output
