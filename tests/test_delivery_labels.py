"""Delivered files as a statistician opens them (issue 17, point 10): the same status labels in
every format, Stata label sets named after their variable, the outcome category as a labelled
number, and a variable the weighting derived delivered with its labels.

Outside readers used here:
- pyreadstat (``read_sav``/``read_dta`` metadata: ``variable_value_labels``, ``variable_to_label``);
- pandas' own Stata reader (``pandas.io.stata.StataReader``: ``value_labels()`` names each label
  set, and its ``_lbllist`` names the set each variable uses), independent of ReadStat;
- pandas' Parquet reader for the weighting file the demo's age band comes from.
The status numbers and letters are those of docs/statuses.md (docs/contract.md §1).
"""

from __future__ import annotations

import textwrap

import pandas as pd
import pyreadstat
import pytest
from typer.testing import CliRunner

from skipwise.cli import app

runner = CliRunner()

Q = textwrap.dedent("""\
    format: 1
    survey: {name: t, case_id: id}
    codes:
      - {value: -8, reason: dont_know, kind: nonresponse}
      - {value: -9, reason: refused, kind: nonresponse, label: Would not say}
      - {value: -1, reason: na, kind: structural}
    sections:
      - name: s
        items:
          - {name: tenure, type: categorical, values: {1: Owner, 2: Renter}}
          - {name: rooms, type: integer, range: [1, 20], asked_if: tenure == 1}
          - {name: size, type: categorical, values: {1: Small, 2: Large}}
    """)

WORDS = {"skipped": "Skipped: not asked (legitimate skip)", "item_missing": "Blank where asked, no code",
         "dont_know": "Don't know (nonresponse)", "refused": "Would not say (nonresponse)"}


@pytest.fixture()
def classified(tmp_path):
    q = tmp_path / "q.yaml"
    q.write_text(Q)
    data = tmp_path / "d.csv"
    pd.DataFrame({"id": [1, 2, 3, 4, 5], "tenure": [1, 2, -8, 1, 1], "rooms": [4, -1, -1, -9, None],
                  "size": [1, 2, 2, -9, 1]}).to_csv(data, index=False)
    outs = {}
    for suffix in ("sav", "dta"):
        out = tmp_path / f"rec.{suffix}"
        result = runner.invoke(app, ["classify", str(data), "-q", str(q), "-o", str(out), "--form", "recoded"])
        assert result.exit_code == 0, result.output
        outs[suffix] = out
    out = tmp_path / "cols.dta"
    result = runner.invoke(app, ["classify", str(data), "-q", str(q), "-o", str(out)])
    assert result.exit_code == 0, result.output
    outs["cols"] = out
    return outs


def test_status_labels_are_the_same_words_in_sav_and_dta(classified):
    _, sav = pyreadstat.read_sav(str(classified["sav"]), metadataonly=True)
    reader = pd.io.stata.StataReader(classified["dta"])  # pandas' own reader, not ReadStat
    reader.read(convert_categoricals=False)
    dta = reader.value_labels()
    # recoded .sav: -900 - number; recoded .dta: .a-.h for 2-9, .i-.z for 11-28 (docs/statuses.md).
    # pandas keys Stata's extended missing .a ... .z as 2147483621 + 1 ... + 26.
    numbers = {"skipped": 2, "item_missing": 3, "dont_know": 11, "refused": 12}
    letters = {"skipped": 1, "item_missing": 2, "dont_know": 9, "refused": 10}
    for status, words in WORDS.items():
        assert sav.variable_value_labels["rooms"][-900 - numbers[status]] == words
        assert dta["rooms"][2147483621 + letters[status]] == words
    assert all(v == v.strip() and "_" not in v for v in dta["rooms"].values())  # no raw tokens
    # the substantive labels are the questionnaire's in both
    assert sav.variable_value_labels["tenure"][1] == dta["tenure"][1] == "Owner"


def test_status_columns_carry_the_same_words(classified):
    reader = pd.io.stata.StataReader(classified["cols"])
    reader.read(convert_categoricals=False)
    labels = reader.value_labels()["rooms_status"]
    assert labels[1] == "Answered" and labels[2] == WORDS["skipped"] and labels[11] == WORDS["dont_know"]


@pytest.mark.parametrize("which", ["dta", "cols"])
def test_stata_label_sets_are_named_after_their_variable(classified, which):
    path = classified[which]
    reader = pd.io.stata.StataReader(path)
    frame = reader.read(convert_categoricals=False)
    used = dict(zip(frame.columns, reader._lbllist))  # the label set each variable names
    named = {v: s for v, s in used.items() if s}
    assert named and all(s == v for v, s in named.items()), named
    assert set(reader.value_labels()) == set(named)
    _, meta = pyreadstat.read_dta(str(path), metadataonly=True)  # ReadStat agrees
    assert meta.variable_to_label == {v: v for v in named}
    # pandas' categorical conversion uses the renamed sets: the labels still reach the values
    assert pd.read_stata(path)["tenure"].tolist()[:2] == ["Owner", "Renter"]


WEIGHTING_PLAN = textwrap.dedent("""\
    format: 1
    case_id: id
    dispositions:
      column: dispo
      categories: {I: [110], P: [120], R: [210], NC: [220], O: [230], UH: [310], UO: [320], NE: [410]}
    e: 0.8
    """)


def test_outcome_category_is_a_labelled_number(tmp_path):
    dispo = [110, 110, 120, 210, 220, 230, 310, 320, 410, 110]
    data = tmp_path / "d.csv"
    pd.DataFrame({"id": range(1, 11), "dispo": dispo}).to_csv(data, index=False)
    plan = tmp_path / "w.yaml"
    plan.write_text(WEIGHTING_PLAN)
    out = tmp_path / "w.sav"
    result = runner.invoke(app, ["weigh", str(data), "--plan", str(plan), "-o", str(out)])
    assert result.exit_code == 0, result.output
    df, meta = pyreadstat.read_sav(str(out))
    # the standard's order I, P, R, NC, O, UH, UO, NE as 1-8, mapped by hand from the plan above
    by_hand = {110: 1, 120: 2, 210: 3, 220: 4, 230: 5, 310: 6, 320: 7, 410: 8}
    assert df["wt_outcome"].tolist() == [by_hand[d] for d in dispo]
    labels = meta.variable_value_labels["wt_outcome"]
    assert sorted(labels) == list(range(1, 9)) and labels[1].startswith("I:") and labels[8].startswith("NE:")
    assert meta.variable_measure["wt_outcome"] == "nominal"


def test_demo_delivers_the_age_band_made_for_a_margin(demo_output):
    out, _ = demo_output
    frame = pd.read_parquet(out / "data" / "sample_with_answers.parquet")  # pandas' reader of the weighting file
    df, meta = pyreadstat.read_sav(str(out / "package" / "marrowby-2026.sav"))
    assert "age_band" in df.columns and "age_band" not in pd.read_parquet(out / "package" / "marrowby-2026.parquet"
                                                                            ).columns.difference(df.columns)
    # joined by case id: each interview's band is the weighting file's band
    expected = df["case_id"].map(frame.set_index("case_id")["age_band"])
    assert df["age_band"].fillna(-1).tolist() == expected.fillna(-1).tolist()
    # with its labels (the demo's age bands, src/skipwise/demo/population.py)
    assert meta.variable_value_labels["age_band"] == {1: "16-34", 2: "35-54", 3: "55-74", 4: "75+"}
    assert meta.column_names_to_labels["age_band"] == "Age band (calibration margin)"
    # the outcome category is a labelled number there too
    assert set(df["wt_outcome"].dropna()) <= set(range(1, 9))
    assert meta.variable_value_labels["wt_outcome"][1] == "I: complete interview"


def test_item_report_uses_the_same_words_as_the_files():
    # One wording everywhere: the workbook's status labels and the files' value labels.
    from skipwise.classify.delivery import status_value_labels
    from skipwise.questionnaire import loads_questionnaire
    from skipwise.rates import status_label

    q = loads_questionnaire(Q)
    for status in ("skipped", "item_missing", "dont_know", "refused"):
        assert status_label(status, q) == status_value_labels({status: 0}, q)[0] == WORDS[status]
