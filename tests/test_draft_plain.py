"""`skipwise draft` from plain files (CSV, Parquet): categories from few distinct values and
pandas categoricals, nonresponse texts as codes, ranges that say where they come from.

Outside references used here:
- pandas' own readers (``pandas.read_csv``, ``pandas.read_parquet`` through pyarrow) for the
  distinct values, the categories of a categorical column and their order, and the observed
  minimum and maximum;
- the round trip: ``skipwise check`` of the very file the draft came from must find no error
  (the draft describes its own data).
The thresholds (12 distinct values, each seen twice on average; texts of at most 5 words as
codes) are the project's choice: common practice, no source.  The frames are invented.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

import skipwise.cli.cmd_check  # noqa: F401  (registers the command)
import skipwise.cli.cmd_draft  # noqa: F401
from skipwise.cli.app import app
from skipwise.draft import FEW_VALUES, draft_questionnaire, guess_data_code, render_draft
from skipwise.io import SurveyMeta
from skipwise.questionnaire import load_questionnaire, loads_questionnaire
from skipwise.questionnaire.model import CodeKind, ItemType

runner = CliRunner()


def _frame(n: int = 48) -> pd.DataFrame:
    rng = np.random.default_rng(11)
    age = rng.integers(18, 90, n).astype(object)
    age[[2, 9]] = "Refused"
    age[5] = "don`t know"
    return pd.DataFrame({
        "pid": np.arange(5001, 5001 + n),
        "tenure": rng.choice(["Owner", "Renter", "Other", "Refused", "Don't know"], n),
        "sat": rng.choice([1, 2, 3, 4, 5, -9], n),
        "age": age,
        "remark": [f"the bus was late on day {i}" for i in range(n)],
        "bus": rng.choice(["Yes", "No", "N/A", "DONT  KNOW", ""], n),
        "fare": np.round(rng.uniform(0.5, 9.5, n), 2),
    })


def _draft(data: Path, out: Path) -> str:
    result = runner.invoke(app, ["draft", str(data), "-o", str(out)])
    assert result.exit_code == 0, result.output
    return out.read_text(encoding="utf-8")


def _check_passes(data: Path, q: Path) -> None:
    result = runner.invoke(app, ["check", str(data), "-q", str(q)])
    assert result.exit_code == 0, result.output
    assert "0 error(s)" in result.output


def test_csv_draft_proposes_categories_and_text_codes_and_checks_clean(tmp_path):
    path = tmp_path / "bus.csv"
    _frame().to_csv(path, index=False)
    ref = pd.read_csv(path, keep_default_na=False, dtype=str)  # outside reference: pandas' CSV reader
    text = _draft(path, tmp_path / "bus.yaml")
    q = load_questionnaire(tmp_path / "bus.yaml")  # the project's loader
    types = {it.name: it.type for it in q.items}
    assert types == {"tenure": ItemType.CATEGORICAL, "sat": ItemType.CATEGORICAL, "age": ItemType.INTEGER,
                     "remark": ItemType.TEXT, "bus": ItemType.CATEGORICAL, "fare": ItemType.NUMBER}
    codes = {it.name: {c.value: (c.reason, c.kind) for c in it.codes} for it in q.items}
    assert codes["tenure"] == {"Refused": ("refused", CodeKind.NONRESPONSE),
                               "Don't know": ("dont_know", CodeKind.NONRESPONSE)}
    assert codes["age"] == {"Refused": ("refused", CodeKind.NONRESPONSE),
                            "don`t know": ("dont_know", CodeKind.NONRESPONSE)}
    assert codes["bus"] == {"N/A": ("not_applicable", CodeKind.STRUCTURAL),
                            "DONT  KNOW": ("dont_know", CodeKind.NONRESPONSE)}
    assert codes["sat"] == {} and codes["remark"] == {}  # -9 has no label: never a code from plain data
    # the categories are the distinct stored values that are not codes
    for name in ("tenure", "bus"):
        seen = set(ref[name]) - {""} - set(codes[name])
        assert set(q.item(name).values) == seen and all(q.item(name).values[v] == v for v in seen)
    assert set(q.item("sat").values) == {int(v) for v in ref["sat"]}
    numbers = pd.to_numeric(ref["age"], errors="coerce")
    assert q.item("age").range == (numbers.min(), numbers.max())
    # every guess is marked for review
    assert text.count("# guessed: confirm kind (text in the data)") == 6
    assert "range: [" in text and "# observed, confirm: widen to the valid range" in text
    assert "# confirm: -9 look(s) like a missing-value code, but no label says so" in text
    _check_passes(path, tmp_path / "bus.yaml")


def test_parquet_categorical_columns_keep_their_categories_and_order(tmp_path):
    df = _frame()
    df["tenure"] = pd.Categorical(df["tenure"], categories=["Owner", "Renter", "Other", "Never", "Refused",
                                                            "Don't know"])
    df["size"] = pd.Categorical(np.random.default_rng(2).choice(["small", "medium", "large"], len(df)),
                                categories=["small", "medium", "large"], ordered=True)
    df["age"] = pd.to_numeric(df["age"], errors="coerce")
    path = tmp_path / "bus.parquet"
    df.to_parquet(path)
    ref = pd.read_parquet(path)  # outside reference: pandas' Parquet reader (pyarrow)
    assert isinstance(ref["tenure"].dtype, pd.CategoricalDtype) and ref["size"].cat.ordered
    text = _draft(path, tmp_path / "bus.yaml")
    q = load_questionnaire(tmp_path / "bus.yaml")
    tenure, size = q.item("tenure"), q.item("size")
    assert tenure.type is size.type is ItemType.CATEGORICAL
    # every category, observed or not ("Never" occurs in no row), in the reader's order, codes aside
    assert list(tenure.values) == [c for c in ref["tenure"].cat.categories if c not in ("Refused", "Don't know")]
    assert {c.value for c in tenure.codes} == {"Refused", "Don't know"}
    assert list(size.values) == list(ref["size"].cat.categories) and size.level == "ordinal"
    assert "# values: the categories of the data's categorical column (ordered)" in text
    assert q.item("age").type is ItemType.INTEGER
    assert q.item("age").range == (ref["age"].min(), ref["age"].max())
    _check_passes(path, tmp_path / "bus.yaml")


def test_whole_number_categories_of_a_categorical_in_memory():
    # (pandas writes integer categories to Parquet but reads them back as plain integers)
    band = pd.Categorical([1, 2, 3, 1, 2], categories=[1, 2, 3, 4])
    q = loads_questionnaire(render_draft(draft_questionnaire(pd.DataFrame({"id": range(5), "band": band}))))
    assert q.item("band").type is ItemType.CATEGORICAL and list(q.item("band").values) == list(band.categories)
    assert q.item("band").level is None


def test_few_values_threshold():
    n = 4 * FEW_VALUES
    df = pd.DataFrame({"id": range(n),
                       "few": np.arange(n) % FEW_VALUES,            # 12 values, each 4 times
                       "many": np.arange(n) % (FEW_VALUES + 1),     # 13 values
                       "once": np.arange(n) % 7 + np.arange(n) // 7 * 0,  # 7 values, each about 7 times
                       "unique": [f"name {i}" for i in range(n)]})
    df.loc[: n // 2, "once"] = np.arange(n // 2 + 1) + 100      # now most values are seen once
    q = loads_questionnaire(render_draft(draft_questionnaire(df)))
    # reference for the counts: pandas' nunique
    assert df["few"].nunique() == FEW_VALUES and df["many"].nunique() == FEW_VALUES + 1
    assert q.item("few").type is ItemType.CATEGORICAL and len(q.item("few").values) == FEW_VALUES
    assert q.item("many").type is ItemType.INTEGER
    assert df["once"].nunique() * 2 > n and q.item("once").type is ItemType.INTEGER
    assert q.item("unique").type is ItemType.TEXT


def test_labelled_file_numbers_without_labels_stay_numbers():
    # In a file with value labels, an unlabelled whole-number column is a count, not categories.
    df = pd.DataFrame({"id": range(40), "kids": np.arange(40) % 4, "q": np.arange(40) % 2 + 1})
    q = loads_questionnaire(render_draft(draft_questionnaire(
        df, SurveyMeta(value_labels={"q": {1: "Yes", 2: "No"}}))))
    assert q.item("kids").type is ItemType.INTEGER and q.item("kids").range == (0, 3)
    assert q.item("q").type is ItemType.CATEGORICAL


def test_range_from_value_labels_and_widened_by_observed_values():
    df = pd.DataFrame({"id": range(6), "inside": [1, 2, 3, 4, 5, 2], "beyond": [0, 3, 12, 4, 5, 1]})
    meta = SurveyMeta(value_labels={"inside": {0: "None", 10: "Ten or more"}, "beyond": {0: "None", 10: "Ten"}})
    text = render_draft(draft_questionnaire(df, meta))
    q = loads_questionnaire(text)
    assert q.item("inside").range == (0, 10)     # the labelled span, though only 1-5 were observed
    assert q.item("beyond").range == (0, 12)     # 12 lies beyond the labels: widened, and said so
    assert "range: [0, 10]  # from the value labels\n" in text
    assert "range: [0, 12]  # from the value labels [0, 10], widened to the observed values: confirm" in text


@pytest.mark.parametrize("value, reason", [
    ("Don't know", "dont_know"), ("DONT KNOW", "dont_know"), ("don t know", "dont_know"),
    ("Don\u2019t   Know", "dont_know"), ("dk", "dont_know"), ("Refused", "refused"),
    ("prefer not to say", "refused"), ("Unknown", "no_answer"), ("No answer", "no_answer"),
    ("NA", "no_answer"), ("N/A", "not_applicable"), ("Not applicable", "not_applicable"),
    ("not stated", "not_stated"), ("Can't choose", "cannot_choose"),
    ("Owner", None), ("No", None), ("I refused to take the bus on most days", None),
])
def test_guess_data_code(value, reason):
    # Common practice, no source: the wordings of nonresponse in survey exports.
    guess = guess_data_code(value)
    assert (guess[0] if guess else None) == reason


def test_csv_born_draft_classifies_into_a_recoded_stata_file(tmp_path):
    # The draft's text codes on a number column and its text categories reach a recoded .dta:
    # numbers stay numbers, "Refused" becomes refused's letter .j (number 12, docs/statuses.md),
    # and a text-valued categorical keeps its cells beside a status column.
    path = tmp_path / "bus.csv"
    frame = _frame()
    frame.to_csv(path, index=False)
    _draft(path, tmp_path / "bus.yaml")
    out = tmp_path / "bus.dta"
    result = runner.invoke(app, ["classify", str(path), "-q", str(tmp_path / "bus.yaml"), "-o", str(out),
                                 "--form", "recoded"])
    assert result.exit_code == 0, result.output
    back = pd.read_stata(out, convert_missing=True, convert_categoricals=False)  # pandas' own Stata reader
    refused = frame["age"].eq("Refused").to_numpy()
    assert [str(v) for v in back["age"][refused]] == [".j"] * int(refused.sum())
    numbers = pd.to_numeric(frame["age"], errors="coerce")
    assert back["age"][~refused & numbers.notna().to_numpy()].astype(float).tolist() == numbers.dropna().tolist()
    assert back["tenure"].tolist() == frame["tenure"].tolist() and "tenure_status" in back.columns
