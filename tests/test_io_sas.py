"""SAS input: transport files (.xpt) written by pyreadstat, read back by skipwise and by pandas.

The test files are made by pyreadstat's own writer (``pyreadstat.write_xport``), and the values
skipwise reads are checked against two outside readers: pyreadstat's ``read_xport`` and pandas'
``read_sas`` (an independent implementation of the transport format, version 5).

SAS special missing values: in a transport file a missing number is stored as 8 bytes whose first
byte is the missing value's character ('.' for plain missing, 'A'-'Z' or '_' for the special ones)
and the other 7 are zero [memory: SAS technical support note TS-140, "The record layout of a
data set in SAS transport (XPORT) format"].  pyreadstat has no writer argument for them, so the
tests write a plain missing value and change its first byte.

No ``.sas7bdat`` (nor ``.sas7bcat``) sample file ships in any installed package and pyreadstat
cannot write one.  ``tests/data/wave1.sas7bdat`` (16 KB, invented values) was made once with the
ReadStat 1.1.8 command-line tool (Debian package ``readstat``: ``readstat wave1.sav
wave1.sas7bdat``) from a ``.sav`` pyreadstat wrote; it is read here by skipwise and checked against
pyreadstat's ``read_sas7bdat`` and pandas' ``read_sas`` (an independent SAS7BDAT reader).
``tests/data/staff.sas7bdat`` with its format catalog ``staff.sas7bcat`` (invented values) was made
once by ReadStat 1.1.8's C library (Debian package ``libreadstat-dev``; ``tests/data/staff_sas.c``,
whose data file names the catalog's format ``YESNO`` on one variable); the labels skipwise reads are
checked against pyreadstat's own ``read_sas7bcat`` and the values against pandas' ``read_sas``.
"""

from __future__ import annotations

import textwrap
from pathlib import Path

import numpy as np
import pandas as pd
import pyreadstat
import pytest
from typer.testing import CliRunner

from skipwise.cli import app
from skipwise.errors import ProblemCode, SkipwiseError
from skipwise.io import MetadataWarning, get_meta, read_survey, write_survey
from skipwise.io.readers_sas import catalog_for

runner = CliRunner()
MISSING = bytes([0x2E, 0, 0, 0, 0, 0, 0, 0])  # a plain SAS missing number in transport format (TS-140)


def _xpt(path, frame, *, letters=(), version=5, **kw):
    """Write ``frame`` with pyreadstat; then turn the first NaN cells into the given special letters."""
    pyreadstat.write_xport(frame, str(path), file_format_version=version, **kw)
    data = bytearray(path.read_bytes())
    start = 0
    for letter in letters:
        at = data.index(MISSING, start)
        data[at] = ord(letter)
        start = at + 8
    path.write_bytes(bytes(data))
    return path


@pytest.fixture()
def xpt(tmp_path):
    frame = pd.DataFrame({
        "id": [101.0, 102.0, 103.0, 104.0, 105.0],
        "gate": [1.0, 2.0, 1.0, 1.0, 1.0],
        "spend": [12.5, np.nan, np.nan, np.nan, 40.0],
        "town": ["Orrin", "Marrow", "", "Orrin", "Vale"],
    })
    return _xpt(tmp_path / "survey.xpt", frame, letters="RD_", table_name="SURVEY", file_label="Test survey",
                column_labels={"spend": "Money spent", "gate": "Asked about spending"},
                variable_format={"spend": "8.2"})


def test_xpt_values_labels_and_special_missing(xpt):
    df = read_survey(xpt)
    meta = get_meta(df)
    # Special missing values stay as their letters (".R", ".D", "._"), like Stata's .a-.z.
    assert df["spend"].tolist() == [12.5, ".R", ".D", "._", 40.0]
    assert meta.missing_values == {"spend": [".D", ".R", "._"]}
    assert meta.column_labels == {"spend": "Money spent", "gate": "Asked about spending"}
    assert meta.file_label == "Test survey" and meta.source_format == "xpt"
    assert pd.isna(df["town"][2])  # an empty SAS text is the blank, as for SPSS and Stata
    # Outside readers: pandas' own transport reader sees the same numbers and a missing value
    # wherever skipwise keeps a letter; pyreadstat's public reader agrees on everything else.
    ref = pd.read_sas(xpt, format="xport", encoding="infer")
    nums = pd.to_numeric(df["spend"], errors="coerce")
    assert ref["spend"].isna().tolist() == nums.isna().tolist()
    assert np.allclose(ref["spend"].dropna(), nums.dropna())
    assert ref["id"].tolist() == df["id"].tolist()
    other, m = pyreadstat.read_xport(str(xpt))
    assert other["gate"].tolist() == df["gate"].tolist()
    assert m.column_names_to_labels["spend"] == meta.column_labels["spend"]


def test_xpt_version_8_is_read_too(tmp_path):
    frame = pd.DataFrame({"respondent_id": [1.0, 2.0], "a_long_variable_name": [np.nan, 3.0]})
    path = _xpt(tmp_path / "v8.xpt", frame, letters="Z", version=8)
    df = read_survey(path)
    assert df["a_long_variable_name"].tolist() == [".Z", 3.0]
    assert pyreadstat.read_xport(str(path))[0]["respondent_id"].tolist() == [1.0, 2.0]


Q = textwrap.dedent("""\
    format: 1
    survey: {name: sas-test, case_id: id}
    codes:
      - {value: ".R", reason: refused, kind: nonresponse}
      - {value: ".D", reason: dont_know, kind: nonresponse}
    sections:
      - name: main
        items:
          - {name: gate, type: categorical, values: {1: "Yes", 2: "No"}}
          - {name: spend, type: number, range: [0, 1000], asked_if: gate == 1}
          - {name: town, type: text}
    """)


def test_classify_reads_sas_and_writes_the_letters_to_stata(xpt, tmp_path):
    q = tmp_path / "q.yaml"
    q.write_text(Q)
    out = tmp_path / "c.dta"
    result = runner.invoke(app, ["classify", str(xpt), "-q", str(q), "-o", str(out)])
    assert result.exit_code == 1  # ._ has no Stata letter: refused with the column named
    assert "._ has no Stata equivalent" in result.output and "spend" in result.output
    assert not out.exists()
    parquet = tmp_path / "c.parquet"
    result = runner.invoke(app, ["classify", str(xpt), "-q", str(q), "-o", str(parquet)])
    assert result.exit_code == 0, result.output
    # ".R" on an off-route case is off_route, ".D" dont_know, "._" (no declared code) invalid.
    back = pd.read_parquet(parquet)  # pandas' own Parquet reader
    labels = get_meta(read_survey(parquet)).value_labels["spend_status"]
    # status numbers of docs/statuses.md: 1 answered, 6 off_route, 11 dont_know, 8 invalid; labels in words
    assert back["spend_status"].tolist() == [1, 6, 11, 8, 1]
    assert [labels[v] for v in back["spend_status"]] == [
        "Answered", "Answer or code where not asked (routing fault)", "Don't know (nonresponse)",
        "Value outside the item's values or range", "Answered"]
    # skipwise reads its own Parquet back with the letters restored.
    assert read_survey(parquet)["spend"].tolist() == [12.5, ".R", ".D", "._", 40.0]


def test_sas_letters_become_stata_letters(tmp_path):
    frame = pd.DataFrame({"id": [1.0, 2.0, 3.0], "x": [np.nan, np.nan, 5.0]})
    df = read_survey(_xpt(tmp_path / "s.xpt", frame, letters="AZ"))
    with pytest.warns(MetadataWarning, match="SAS special missing values .A-.Z were written as Stata"):
        out = write_survey(df, tmp_path / "s.dta", get_meta(df).with_column("x", value_labels={".A": "Refused", 5: "Five"}))
    # pandas' own Stata reader sees extended missing values .a and .z with their labels.
    back = pd.read_stata(out, convert_missing=True, convert_categoricals=False)
    assert [getattr(v, "string", v) for v in back["x"]] == [".a", ".z", 5]
    _, m = pyreadstat.read_dta(str(out), user_missing=True)
    assert set(m.value_labels[m.variable_to_label["x"]].values()) == {"Refused", "Five"}


def test_draft_from_xpt_proposes_the_letters_as_codes(xpt, tmp_path):
    out = tmp_path / "draft.yaml"
    result = runner.invoke(app, ["draft", str(xpt), "-o", str(out)])
    assert result.exit_code == 0, result.output
    text = out.read_text()
    assert 'value: ".R"' in text and "SAS special missing" in text


def test_run_plan_with_sas_input_needs_named_formats(xpt, tmp_path):
    from skipwise.pipeline.plan import loads_run_plan

    (tmp_path / "q.yaml").write_text(Q)
    plan = f"format: 1\ndata: {xpt.name}\nquestionnaire: q.yaml\noutput: {{folder: pkg}}\n"
    with pytest.raises(SkipwiseError) as err:
        loads_run_plan(plan, tmp_path / "plan.yaml")
    assert err.value.codes == [ProblemCode.FILE_FORMAT]
    assert "'input' would be SAS" in err.value.render() and "[dta, parquet]" in err.value.render()
    ok = loads_run_plan(plan.replace("{folder: pkg}", "{folder: pkg, status_columns: [sav, parquet]}"),
                        tmp_path / "plan.yaml")
    assert ok.formats("status_columns") == ("sav", "parquet")


# -- .sas7bdat ------------------------------------------------------------------------------------
SAS7BDAT = Path(__file__).parent / "data" / "wave1.sas7bdat"


def test_sas7bdat_values_and_labels_equal_two_outside_readers():
    got = read_survey(SAS7BDAT)
    ref, ref_meta = pyreadstat.read_sas7bdat(str(SAS7BDAT))
    pandas_ref = pd.read_sas(SAS7BDAT, encoding="utf-8")
    assert list(got.columns) == ["id", "gate", "spend", "town"] == list(ref.columns)
    for col in ("id", "gate", "spend"):
        np.testing.assert_array_equal(got[col].to_numpy(dtype=float), ref[col].to_numpy(dtype=float))
        np.testing.assert_array_equal(got[col].to_numpy(dtype=float), pandas_ref[col].to_numpy(dtype=float))
    assert got["town"].tolist() == ref["town"].tolist() == pandas_ref["town"].tolist()
    labels = get_meta(got).column_labels
    assert labels["spend"] == ref_meta.column_names_to_labels["spend"] == "Amount spent"


def test_classify_reads_a_genuine_sas7bdat(tmp_path):
    q = tmp_path / "q.yaml"
    q.write_text(Q)
    out = tmp_path / "c.parquet"
    result = runner.invoke(app, ["classify", str(SAS7BDAT), "-q", str(q), "-o", str(out)])
    assert result.exit_code == 0, result.output
    # by hand (docs/statuses.md): gate 1 + 12.5 answered (1); gate 2 + blank skipped (2);
    # gate 1 + blank item_missing (3); 2000 outside [0, 1000] invalid (8); gate 2 + 40 off_route (6)
    assert pd.read_parquet(out)["spend_status"].tolist() == [1, 2, 3, 8, 6]
    assert SAS7BDAT.stat().st_size == 16384  # the input is never modified


# -- .sas7bcat: what can be tested without a genuine catalog --------------------------------------
def test_catalog_is_found_beside_the_data(tmp_path):
    data = tmp_path / "wave2.sas7bdat"
    data.write_bytes(b"x")
    assert catalog_for(data) is None
    (tmp_path / "formats.sas7bcat").write_bytes(b"x")
    assert catalog_for(data) == tmp_path / "formats.sas7bcat"  # the library-wide catalog SAS writes
    (tmp_path / "WAVE2.SAS7BCAT").write_bytes(b"x")
    assert catalog_for(data) == tmp_path / "WAVE2.SAS7BCAT"    # same stem wins; case ignored


def test_damaged_sas7bdat_and_missing_catalog_are_user_errors(tmp_path):
    data = tmp_path / "broken.sas7bdat"
    data.write_bytes(b"not a SAS data set" * 40)
    with pytest.raises(SkipwiseError) as err:
        read_survey(data)
    assert err.value.codes == [ProblemCode.FILE_UNREADABLE]
    assert "not a readable SAS data set (.sas7bdat)" in err.value.render()
    with pytest.raises(SkipwiseError) as err:
        read_survey(data, catalog=tmp_path / "nowhere.sas7bcat")
    assert err.value.codes == [ProblemCode.FILE_NOT_FOUND]
    with pytest.raises(SkipwiseError) as err:
        read_survey(tmp_path / "x.xpt", catalog=data)
    assert err.value.codes == [ProblemCode.FILE_NOT_FOUND]  # the data file is looked for first


def test_sas_output_is_refused_by_the_writer(tmp_path):
    with pytest.raises(SkipwiseError) as err:
        write_survey(pd.DataFrame({"a": [1]}), tmp_path / "a.xpt")
    assert "cannot carry value labels or missing-value definitions" in err.value.render()
    assert not (tmp_path / "a.xpt").exists()


def test_a_genuine_format_catalog_gives_the_value_labels_by_format_name():
    # Files written by ReadStat's C library (module docstring); references: pyreadstat's read_sas7bcat
    # for the catalog and pandas' read_sas (its own SAS7BDAT reader) for the values.
    data = Path(__file__).parent / "data" / "staff.sas7bdat"
    assert catalog_for(data) == data.with_suffix(".sas7bcat")
    _, cat = pyreadstat.read_sas7bcat(str(data.with_suffix(".sas7bcat")))
    reference = {int(k): v for k, v in next(iter(cat.value_labels.values())).items()}
    df = read_survey(data)
    meta = get_meta(df)
    assert meta.value_labels == {"mentor": reference} == {"mentor": {1: "Yes", 2: "No"}}
    assert meta.column_labels["mentor"] == "Has a mentor at school"
    assert meta.missing_values["mentor"] == [".R"]  # SAS special missing .R kept as its letter
    plain = pd.read_sas(data)
    answered = df["mentor"] != ".R"
    np.testing.assert_array_equal(df.loc[answered, "mentor"].astype(float), plain.loc[answered, "mentor"])
    assert plain["mentor"].isna().sum() == 1 and not answered.loc[plain["mentor"].isna()].any()
