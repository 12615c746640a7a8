"""Delivered files as a statistician opens them: levels, display formats, labels from the questionnaire.

Every file is read back with pyreadstat (``variable_measure``, ``original_variable_types``,
``column_names_to_labels``, ``variable_value_labels``), an outside reader of the SPSS format.
The display-format rule (no decimals for whole numbers, enough for probabilities and weights) is
common practice, no source.
"""

from __future__ import annotations

import textwrap

import pandas as pd
import pyreadstat
import pytest
from typer.testing import CliRunner

from skipwise.cli import app
from skipwise.errors import SkipwiseError
from skipwise.io import write_survey
from skipwise.questionnaire.loader import loads_questionnaire

runner = CliRunner()

Q = textwrap.dedent("""\
    format: 1
    survey: {name: t, case_id: id}
    context: [sel_prob]
    codes: [{value: -1, reason: na, kind: structural}, {value: -9, reason: refused, kind: nonresponse, label: Refused}]
    sections:
      - name: s
        items:
          - {name: gate, label: Has a car, type: categorical, values: {1: "Yes", 2: "No"}}
          - {name: sat, label: Satisfaction, type: categorical, values: {1: Low, 2: Mid, 3: High}, level: ordinal}
          - {name: amount, label: Amount spent, type: number, range: [0, 100], asked_if: gate == 1}
    """)


@pytest.fixture()
def csv_start(tmp_path):
    q = tmp_path / "q.yaml"
    q.write_text(Q)
    data = tmp_path / "data.csv"
    pd.DataFrame({"id": [100001, 100002, 100003, 100004], "sel_prob": [0.049, 0.051, 0.049, 0.1],
                  "gate": [1, 2, 1, -9], "sat": [1, 3, 2, 2], "amount": [5.25, -1, -9, None]}).to_csv(data, index=False)
    return tmp_path, q, data


def test_sav_from_a_csv_gets_levels_formats_and_the_questionnaires_labels(csv_start):
    tmp, q, data = csv_start
    out = tmp / "out.sav"
    result = runner.invoke(app, ["classify", str(data), "-q", str(q), "-o", str(out)])
    assert result.exit_code == 0, result.output
    _, m = pyreadstat.read_sav(str(out), metadataonly=True)
    # Levels from the item types; `level: ordinal` overrides; statuses are categories.
    assert m.variable_measure["gate"] == "nominal" and m.variable_measure["sat"] == "ordinal"
    assert m.variable_measure["amount"] == "scale" and m.variable_measure["gate_status"] == "nominal"
    assert m.variable_measure["id"] == "nominal" and m.variable_measure["sel_prob"] == "scale"
    # Display formats from the data: whole numbers without decimals, probabilities with enough.
    fmt = m.original_variable_types
    assert fmt["id"] == "F6.0" and fmt["gate"] == "F2.0" and fmt["gate_status"].endswith(".0")
    assert fmt["sel_prob"] == "F5.3" and fmt["amount"] == "F5.2"
    # Variable and value labels from the questionnaire (a CSV has none of its own).
    assert m.column_names_to_labels["gate"] == "Has a car"
    assert m.variable_value_labels["gate"] == {1.0: "Yes", 2.0: "No", -1.0: "Na", -9.0: "Refused"}
    assert m.variable_value_labels["sat"][3.0] == "High"


def test_non_exact_weights_get_four_or_more_decimals(tmp_path):
    frame = pd.DataFrame({"w": [1 / 0.049, 1 / 0.051, 12.5], "p": [1 / 3, 0.25, 0.5], "n": [-901.0, 2.0, 3.0]})
    out = write_survey(frame, tmp_path / "w.sav")
    _, m = pyreadstat.read_sav(str(out), metadataonly=True)
    assert m.original_variable_types == {"w": "F7.4", "p": "F7.5", "n": "F4.0"}


def test_a_files_own_format_is_kept_and_widened_to_fit(tmp_path):
    from skipwise.io import SurveyMeta

    frame = pd.DataFrame({"x": [1.0, -911.0], "y": [2.5, 3.0]})
    meta = SurveyMeta(formats={"x": "F1.0", "y": "COMMA8.2"})
    _, m = pyreadstat.read_sav(str(write_survey(frame, tmp_path / "f.sav", meta)), metadataonly=True)
    assert m.original_variable_types == {"x": "F4.0", "y": "COMMA8.2"}


def test_a_bad_level_is_refused_with_the_choices():
    text = Q.replace("level: ordinal", "level: ordinl")
    with pytest.raises(SkipwiseError) as err:
        loads_questionnaire(text, file="q.yaml")
    assert "'level' of item 'sat' must be nominal, ordinal or scale" in err.value.render()
    assert "ordinal" in err.value.render()
