"""Tests of `skipwise draft`: a questionnaire draft from a data file's metadata.

Outside references used here:
- pyreadstat's own reading of the SPSS dictionary (``pyreadstat.read_sav(metadataonly=True)``:
  variable labels, value labels, user-missing definitions) for the .sav round trip;
- pandas' own Stata reader (``pandas.read_stata(convert_missing=True)``, independent of ReadStat)
  for the extended missing letters of the .dta round trip;
- pandas' ``read_csv`` and ``Series.min/max`` for the observed CSV ranges;
- PyYAML's ``safe_load`` (the YAML 1.1 reading every loader uses) for the quoting of labels.
The frames themselves are invented.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import yaml
from hypothesis import given, settings
from hypothesis import strategies as st
from typer.testing import CliRunner

import pyreadstat
import skipwise.cli.cmd_draft  # noqa: F401  (registers the command)
from skipwise.cli.app import app
from skipwise.draft import draft_questionnaire, guess_code, render_draft, scalar
from skipwise.io import SurveyMeta, set_meta, write_survey
from skipwise.questionnaire import load_questionnaire, loads_questionnaire
from skipwise.questionnaire.model import CodeKind, ItemType

runner = CliRunner()


def _draft_file(data: Path, out: Path, *extra: str) -> str:
    result = runner.invoke(app, ["draft", str(data), "-o", str(out), *extra])
    assert result.exit_code == 0, result.output
    return out.read_text(encoding="utf-8")


def _code_values(item) -> set:
    return {c.value for c in item.codes}


# -- SPSS -----------------------------------------------------------------------------------------
def _write_sav(path: Path) -> None:
    df = pd.DataFrame({
        "resp": [101.0, 102.0, 103.0, 104.0, 105.0, 106.0],
        "q1": [1.0, 2.0, -9.0, 1.0, -8.0, 2.0],
        "q2": [3.0, 1.0, 2.0, -9.0, 2.0, 1.0],
        "age": [34.0, 61.0, -9.0, 45.0, 19.0, -98.0],
        "income": [1200.5, 2500.0, -8.0, -9.0, 800.25, 3100.0],
        "town": ["Eastholm", "Brackley Fen", "", "Eastholm", "Orrin", "Orrin"],
    })
    pyreadstat.write_sav(
        df, str(path),
        column_labels={"resp": "Respondent number", "q1": "Satisfied with the bus: yes or no?",
                       "q2": 'Rating "overall" # 1-3', "age": "Age in years", "income": "Net income",
                       "town": "Town"},
        variable_value_labels={
            "q1": {1: "Yes", 2: "No", -8: "Don't know", -9: "Refused"},
            "q2": {1: "Poor", 2: "Fair", 3: "Good", -9: "Refused"},
            "age": {-9: "Refused", -98: "Not applicable"},
            "income": {-8: "DK", -9: "Refused"},
        },
        missing_ranges={"q1": [-9, -8], "q2": [-9], "age": [-9, -98], "income": [{"lo": -9, "hi": -8}]},
    )


def test_sav_draft_round_trip_matches_spss_dictionary(tmp_path):
    sav = tmp_path / "bus.sav"
    _write_sav(sav)
    text = _draft_file(sav, tmp_path / "bus.yaml")
    q = load_questionnaire(tmp_path / "bus.yaml")
    _, ref = pyreadstat.read_sav(str(sav), metadataonly=True, user_missing=True)  # outside reference: the SPSS dictionary

    assert q.case_id == "resp"
    assert list(q.item_names) == [c for c in ref.column_names if c != "resp"]
    for it in q.items:
        assert it.label == ref.column_names_to_labels[it.name]
        missing = set()
        for entry in ref.missing_ranges.get(it.name, []):
            lo, hi = entry["lo"], entry["hi"]
            labelled = {k for k in ref.variable_value_labels.get(it.name, {}) if lo <= k <= hi}
            missing |= {lo, hi} if lo == hi else labelled
        # global codes apply to every item (docs/questionnaire-format.md), so they join the item's own declarations
        assert _code_values(it) == missing | {c.value for c in q.codes}, it.name
        labels = ref.variable_value_labels.get(it.name, {})
        if it.type is ItemType.CATEGORICAL:
            assert dict(it.values) == {k: v for k, v in labels.items() if k not in missing}
    types = {it.name: it.type for it in q.items}
    assert types == {"q1": ItemType.CATEGORICAL, "q2": ItemType.CATEGORICAL, "age": ItemType.INTEGER,
                     "income": ItemType.NUMBER, "town": ItemType.TEXT}
    # -9 "Refused" is declared in all 4 numeric items of 5: lifted to the global list
    assert [(c.value, c.reason, c.kind) for c in q.codes] == [(-9, "refused", CodeKind.NONRESPONSE)]
    assert {(c.value, c.reason, c.kind) for c in q.item("age").codes} == {
        (-9, "refused", CodeKind.NONRESPONSE), (-98, "not_applicable", CodeKind.STRUCTURAL)}
    # observed ranges of the non-code values (hand-read off the frame above)
    assert q.item("age").range == (19, 61)
    assert q.item("income").range == (800.25, 3100)
    assert text.count("# guessed: confirm kind") == 4  # global -9, q1 -8, age -98, income -8
    assert text.count("# asked_if: add the routing condition") == 1 + len(q.items)
    assert "# observed, confirm: widen to the valid range" in text
    assert "# first column whose values are all unique and filled: confirm" in text


# -- Stata ----------------------------------------------------------------------------------------
def test_dta_extended_missing_become_text_codes(tmp_path):
    df = pd.DataFrame({
        "case_no": [1, 2, 3, 4, 5],
        "trust": pd.Series([1.0, ".a", 3.0, ".b", 2.0], dtype=object),
        "hours": pd.Series([40.0, 12.0, ".a", 38.0, ".c"], dtype=object),
    })
    meta = SurveyMeta(column_labels={"trust": "Trust in the council", "hours": "Hours worked"},
                      value_labels={"trust": {1: "Low", 2: "Middle", 3: "High", ".a": "Don't know",
                                              ".b": "Refused"},
                                    "hours": {".a": "Don't know"}},
                      missing_values={"trust": [".a", ".b"], "hours": [".a", ".c"]})
    path = tmp_path / "council.dta"
    write_survey(set_meta(df, meta), path)
    ref = pd.read_stata(path, convert_missing=True, convert_categoricals=False)  # outside reference: pandas' Stata reader
    seen = {c: {str(v) for v in ref[c] if isinstance(v, pd.io.stata.StataMissingValue)} for c in ("trust", "hours")}
    assert seen == {"trust": {".a", ".b"}, "hours": {".a", ".c"}}

    q = loads_questionnaire(_draft_file(path, tmp_path / "council.yaml", "--case-id", "case_no"))
    assert q.case_id == "case_no"
    trust, hours = q.item("trust"), q.item("hours")
    assert trust.type is ItemType.CATEGORICAL and dict(trust.values) == {1: "Low", 2: "Middle", 3: "High"}
    assert _code_values(trust) == seen["trust"] and _code_values(hours) == seen["hours"]
    assert {c.value: c.reason for c in trust.codes} == {".a": "dont_know", ".b": "refused"}
    assert {c.value: c.reason for c in hours.codes} == {".a": "dont_know", ".c": "missing_c"}
    assert hours.type is ItemType.INTEGER and hours.range == (12, 40)


# -- CSV ------------------------------------------------------------------------------------------
def test_csv_types_and_observed_ranges(tmp_path):
    path = tmp_path / "plain.csv"
    path.write_text("id,visits,share,note,when\n"
                    "7,3,0.25,fine,2026-03-01\n8,0,0.5,\"a: b\",2026-03-04\n9,12,1.0,,2026-02-27\n",
                    encoding="utf-8")
    ref = pd.read_csv(path)  # outside reference: pandas' CSV reader
    q = loads_questionnaire(_draft_file(path, tmp_path / "plain.yaml", "--name", "plain-test"))
    assert q.name == "plain-test" and q.case_id == "id"
    assert {it.name: it.type for it in q.items} == {"visits": ItemType.INTEGER, "share": ItemType.NUMBER,
                                                  "note": ItemType.TEXT, "when": ItemType.TEXT}
    assert q.item("visits").range == (ref["visits"].min(), ref["visits"].max())
    assert q.item("share").range == (ref["share"].min(), ref["share"].max())
    assert q.codes == () and all(it.codes == () for it in q.items)


def test_datetime_column_is_a_date_item():
    df = pd.DataFrame({"k": ["a", "b", "c"],
                       "seen": pd.to_datetime(["2026-05-02", None, "2026-01-30"])})
    q = loads_questionnaire(render_draft(draft_questionnaire(df)))
    assert q.item("seen").type is ItemType.DATE and q.item("seen").range == ("2026-01-30", "2026-05-02")


# -- guesses --------------------------------------------------------------------------------------
@pytest.mark.parametrize("label, expected", [
    ("Don't know", ("dont_know", CodeKind.NONRESPONSE)),
    ("DON\u2019T KNOW", ("dont_know", CodeKind.NONRESPONSE)),
    ("DK/NA", ("dont_know", CodeKind.NONRESPONSE)),
    ("Refused", ("refused", CodeKind.NONRESPONSE)),
    ("Prefer not to say", ("refused", CodeKind.NONRESPONSE)),
    ("No answer", ("no_answer", CodeKind.NONRESPONSE)),
    ("Not applicable", ("not_applicable", CodeKind.STRUCTURAL)),
    ("INAPPLICABLE", ("not_applicable", CodeKind.STRUCTURAL)),
    ("No", None), ("Knows well", None), ("Donkey", None), ("Other", None),
], ids=["dk", "dk-curly", "dk-na", "refused", "prefer-not", "no-answer", "n-a", "inapplicable",
        "no", "knows", "donkey", "other"])
def test_guess_code(label, expected):
    # Common practice, no source: the wording of code labels in survey exports.
    assert guess_code(label) == expected


def test_labelled_code_without_missing_definition_and_code_inside_range():
    df = pd.DataFrame({"id": [1, 2, 3, 4], "temp": [-5.0, 0.0, 10.0, 3.0], "kids": [0, 2, 99, 1]})
    meta = SurveyMeta(value_labels={"temp": {0: "Not applicable"}, "kids": {99: "No answer"}})
    draft = draft_questionnaire(df, meta)
    text = render_draft(draft)
    q = loads_questionnaire(text)
    assert {c.value: c.reason for c in q.item("kids").codes} == {99: "no_answer"}
    assert q.item("kids").range == (0, 2)
    # 0 is a code but lies between the observed -5 and 10: no range, said in a comment
    assert q.item("temp").range is None and "# range: left out, code 0 lies among the observed values" in text


def test_shared_code_not_lifted_when_it_would_collide():
    df = pd.DataFrame({"id": [1, 2, 3], "a": [1, 2, -9], "b": [1, -9, 2], "c": [-9, -12, 4]})
    meta = SurveyMeta(missing_values={"a": [-9], "b": [-9]})
    q = loads_questionnaire(render_draft(draft_questionnaire(df, meta)))
    # -9 is in 2 of 3 items, but lies inside c's observed range [-12, 4]: kept per item
    assert q.codes == ()
    assert _code_values(q.item("a")) == {-9} and _code_values(q.item("c")) == set()


# -- quoting --------------------------------------------------------------------------------------
TRICKY = ["yes", "No", "on", "null", "~", "a: b", "x #y", "#x", "'quoted'", '"dq"', " lead", "trail ",
          "- dash", "[list]", "{map}", "1.5", "007", ".a", "@at", "%pct", "*star", "&amp", "!tag", "a\nb",
          "tab\there", "\u00e9t\u00e9 caf\u00e9", "\u2028sep", "", "True", "1e5", "0x1F", "12:30"]


@pytest.mark.parametrize("text", TRICKY, ids=[repr(t) for t in TRICKY])
def test_scalar_quoting_loads_back(text):
    # Reference: PyYAML's safe_load reads the scalar as the same string (block and flow context).
    assert yaml.safe_load(f"k: {scalar(text)}") == {"k": text}
    assert yaml.safe_load(f"- {{k: {scalar(text, flow=True)}}}") == [{"k": text}]


@settings(max_examples=60, deadline=None)
@given(st.text(st.characters(blacklist_categories=("Cs",)), max_size=20))
def test_scalar_quoting_property(text):
    assert yaml.safe_load(f"k: {scalar(text)}") == {"k": text}


def test_tricky_labels_and_names_survive_the_loader():
    df = pd.DataFrame({"id": [1, 2], "yes": [1, 2], "a: b": [1, 2], "q#3": ["x", "y"]})
    meta = SurveyMeta(column_labels={"yes": "No", "a: b": "Say: 'hi' # not a comment", "q#3": "off"},
                      value_labels={"yes": {1: "yes", 2: "Don\u2019t mind"}, "a: b": {1: "on", 2: "n"}})
    q = loads_questionnaire(render_draft(draft_questionnaire(df, meta, name="yes", title="No: title")))
    assert q.name == "yes" and q.title == "No: title"
    assert [(it.name, it.label) for it in q.items] == [("yes", "No"), ("a: b", "Say: 'hi' # not a comment"),
                                                       ("q#3", "off")]
    assert dict(q.item("yes").values) == {1: "yes", 2: "Don\u2019t mind"}
    assert dict(q.item("a: b").values) == {1: "on", 2: "n"}


# -- case id and command line ---------------------------------------------------------------------
def test_case_id_is_first_unique_filled_column():
    df = pd.DataFrame({"wave": [1, 1, 1], "hh": [5, None, 7], "pid": [10, 11, 12], "x": [1, 2, 3]})
    d = draft_questionnaire(df)
    assert d.case_id == "pid" and [it.name for it in d.items] == ["wave", "hh", "x"]


def test_no_unique_column_and_unknown_case_id(tmp_path):
    path = tmp_path / "dup.csv"
    path.write_text("a,b\n1,2\n1,2\n", encoding="utf-8")
    r = runner.invoke(app, ["draft", str(path), "-o", str(tmp_path / "d.yaml")])
    assert r.exit_code == 1 and "--case-id" in r.output
    r = runner.invoke(app, ["draft", str(path), "-o", str(tmp_path / "d.yaml"), "--case-id", "aa"])
    assert r.exit_code == 1 and "did you mean 'a'?" in r.output
    r = runner.invoke(app, ["draft", str(path), "-o", str(tmp_path / "d.yaml"), "--case-id", "a"])
    assert r.exit_code == 0 and "values are not all unique" in (tmp_path / "d.yaml").read_text()


def test_output_exists_needs_overwrite(tmp_path):
    path = tmp_path / "s.csv"
    path.write_text("id,v\n1,2\n2,3\n", encoding="utf-8")
    out = tmp_path / "s.yaml"
    out.write_text("keep me", encoding="utf-8")
    r = runner.invoke(app, ["draft", str(path), "-o", str(out)])
    assert r.exit_code == 1 and "already exists" in r.output and out.read_text() == "keep me"
    assert runner.invoke(app, ["draft", str(path), "-o", str(out), "--overwrite"]).exit_code == 0
    assert load_questionnaire(out).item_names == ("v",)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["s.csv", "s.yaml"]  # no temporary left behind


def test_draft_of_demo_like_frame_checks_clean(tmp_path):
    # The draft describes its own data: checking the data against it finds nothing.
    from skipwise.checkdata import check_data

    rng = np.random.default_rng(7)
    df = pd.DataFrame({"cid": np.arange(1, 41), "score": rng.integers(0, 11, 40).astype(float),
                       "grp": rng.choice([1.0, 2.0, -7.0], 40)})
    meta = SurveyMeta(value_labels={"grp": {1: "North", 2: "South", -7: "Refused"}})
    q = loads_questionnaire(render_draft(draft_questionnaire(df, meta)))
    assert check_data(df, q).problems == []


def test_comments_stay_on_their_line():
    # A label with a line break ends up in a comment (labels of non-whole values are listed there).
    df = pd.DataFrame({"id": [1, 2, 3], "w": [0.5, 1.25, 2.0]})
    meta = SurveyMeta(value_labels={"w": {0.5: "half\nkey: value", 2.0: "two\u2028x"}})
    text = render_draft(draft_questionnaire(df, meta, source="odd\nname.sav"))
    q = loads_questionnaire(text)
    assert q.item("w").type is ItemType.NUMBER and q.item("w").range == (0.5, 2)
    assert "# value labels not kept (non-whole values): 0.5 = half key: value; 2 = two x" in text
