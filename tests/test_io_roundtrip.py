"""Round trips of survey files, checked against readers outside skipwise.

Outside references used here:
- pandas' own Stata reader (``pandas.read_stata`` / ``StataReader``), an implementation
  independent of pyreadstat/ReadStat, and its ``StataMissingValue`` letter decoding;
- pyreadstat's raw SPSS metadata and its ``user_missing=False`` reading (how SPSS applies
  the declared user-missing values);
- statsmodels' shipped Stata files ``data_missing.dta`` and ``time_series_examples.dta``;
- pyarrow's and openpyxl's own readers for Parquet and Excel;
- pandas' default CSV missing-value list (the behaviour we deliberately avoid).
The frames themselves are invented.
"""

from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import pyreadstat
from skipwise.io import (
    SUPPORTED_EXTENSIONS, MetadataWarning, SurveyMeta, get_meta, read_survey, set_meta, write_survey,
)

STATSMODELS_RESULTS = None
try:
    import statsmodels

    STATSMODELS_RESULTS = Path(statsmodels.__file__).parent / "iolib" / "tests" / "results"
except ImportError:  # pragma: no cover - statsmodels is an allowed dependency, but skip cleanly
    pass


def _spss_frame() -> tuple[pd.DataFrame, SurveyMeta]:
    df = pd.DataFrame({
        "resp_id": [101, 102, 103, 104, 105, 106],
        "q1": [1.0, 2.0, -91.0, -92.0, np.nan, 1.0],            # coded, with user-missing codes
        "income": [1200.5, -99.0, -97.0, 3400.0, np.nan, 10.25],  # user-missing range -99..-97
        "city": ["Orrinford", "NA", None, "None", "Vell", "Orrinford"],
        "visit": pd.to_datetime(["2026-01-05", "2026-02-10", None, "2026-03-01", "2026-03-15", "2026-04-30"]),
        "start": pd.to_datetime(["2026-01-05 09:30:00", "2026-02-10 14:05:10", "2026-02-11 08:00:00",
                                 None, "2026-03-15 18:45:59", "2026-04-30 07:00:01"]),
    })
    meta = SurveyMeta(
        file_label="Lake Orrin travel (invented)",
        column_labels={"q1": "Travelled last week", "income": "Monthly income", "city": "Home town"},
        value_labels={"q1": {1: "Yes", 2: "No", -91: "Skipped", -92: "Refused"},
                      "city": {"NA": "Not applicable (text answer)"}},
        missing_values={"q1": [-91, -92]},
        missing_ranges={"income": [(-99.0, -97.0)]},
        measure={"q1": "nominal", "income": "scale"},
    )
    return df, meta


def _expected_cells(df: pd.DataFrame) -> pd.DataFrame:
    # SPSS and Stata store numbers as doubles; datetimes come back at microsecond resolution.
    out = df.copy()
    out["resp_id"] = out["resp_id"].astype(float)
    for c in ("visit", "start"):
        out[c] = out[c].astype("datetime64[us]")
    return out


@pytest.mark.parametrize("ext", [".sav", ".zsav", ".SAV"], ids=["sav", "zsav", "upper-case"])
def test_spss_roundtrip_cells_labels_missing(tmp_path, ext):
    df, meta = _spss_frame()
    path = write_survey(df, tmp_path / f"lake{ext}", meta)
    back = read_survey(path)
    pd.testing.assert_frame_equal(back, _expected_cells(df), check_dtype=False)
    got = get_meta(back)
    assert got.source_format == ext[1:].lower()
    assert got.file_label == meta.file_label
    assert got.column_labels == meta.column_labels
    assert got.value_labels == meta.value_labels
    assert got.missing_values == meta.missing_values
    assert got.missing_ranges == meta.missing_ranges
    assert got.measure == meta.measure
    assert got.formats["visit"].startswith("DATE") and got.formats["start"].startswith("DATETIME")

    # Outside check: pyreadstat's raw SPSS dictionary, as another program would see it.
    _, raw = pyreadstat.read_sav(str(path), user_missing=True, metadataonly=True)
    assert raw.missing_ranges["q1"] == [{"lo": -91.0, "hi": -91.0}, {"lo": -92.0, "hi": -92.0}]
    assert raw.missing_ranges["income"] == [{"lo": -99.0, "hi": -97.0}]
    # How SPSS applies the declaration: with user-missing switched on, the codes become missing.
    applied, _ = pyreadstat.read_sav(str(path), user_missing=False)
    assert applied["q1"].isna().tolist() == [False, False, True, True, True, False]
    assert applied["income"].isna().tolist() == [False, True, True, False, True, False]


def test_spss_more_than_three_codes_become_a_range(tmp_path):
    # SPSS limit of 3 discrete user-missing values [memory: SPSS Command Syntax Reference, MISSING VALUES].
    df = pd.DataFrame({"q1": [1.0, 2.0, -91.0, -92.0, -93.0, -94.0]})
    meta = SurveyMeta(missing_values={"q1": [-91, -92, -93, -94]},
                      value_labels={"q1": {1: "Yes", 2: "No", -91: "skipped", -92: "dont_know",
                                           -93: "refused", -94: "breakoff"}})
    with pytest.warns(MetadataWarning, match="range"):
        path = write_survey(df, tmp_path / "coded.sav", meta)
    _, raw = pyreadstat.read_sav(str(path), user_missing=True, metadataonly=True)
    assert raw.missing_ranges["q1"] == [{"lo": -94.0, "hi": -91.0}]
    assert raw.variable_value_labels["q1"] == {1.0: "Yes", 2.0: "No", -91.0: "skipped", -92.0: "dont_know",
                                                -93.0: "refused", -94.0: "breakoff"}
    applied, _ = pyreadstat.read_sav(str(path), user_missing=False)
    assert applied["q1"].isna().tolist() == [False, False, True, True, True, True]


def test_spss_three_status_codes_stay_discrete(tmp_path):
    df = pd.DataFrame({"q1": [1.0, -91.0, -92.0, -93.0]})
    meta = SurveyMeta(missing_values={"q1": [-91, -92, -93]},
                      value_labels={"q1": {-91: "skipped", -92: "refused", -93: "item_missing"}})
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no adaptation needed, so no warning
        back = read_survey(write_survey(df, tmp_path / "s.sav", meta))
    assert get_meta(back).missing_values == {"q1": [-91, -92, -93]}
    assert back["q1"].tolist() == [1.0, -91.0, -92.0, -93.0]


def _stata_frame() -> tuple[pd.DataFrame, SurveyMeta]:
    df = pd.DataFrame({
        "resp_id": [1, 2, 3, 4, 5],
        "q1": pd.Series([1.0, ".a", 2.0, ".b", np.nan], dtype=object),  # extended missing by letter
        "q2": [1.0, 2.0, -8.0, np.nan, 2.0],
        "note": ["fine", "NA", None, "None", "ok"],
        "visit": pd.to_datetime(["2026-05-01", None, "2026-05-03", "2026-05-04", "2026-05-05"]),
    })
    meta = SurveyMeta(
        file_label="Status-coded copy (invented)",
        column_labels={"q1": "Owns a boat", "q2": "Ferry use"},
        value_labels={"q1": {1: "Yes", 2: "No", ".a": "skipped", ".b": "refused"},
                      "q2": {1: "Often", 2: "Never", -8: "Don't know"}},
        missing_values={"q1": [".a", ".b"]},
    )
    return df, meta


def test_stata_roundtrip_and_pandas_reader(tmp_path):
    df, meta = _stata_frame()
    path = write_survey(df, tmp_path / "lake.dta", meta)
    back = read_survey(path)
    expected = df.copy()
    expected["resp_id"] = expected["resp_id"].astype(float)
    expected["visit"] = expected["visit"].astype("datetime64[us]")
    pd.testing.assert_frame_equal(back, expected, check_dtype=False)
    got = get_meta(back)
    assert got.column_labels == meta.column_labels
    assert got.value_labels == meta.value_labels
    assert got.missing_values == {"q1": [".a", ".b"]}
    assert got.file_label == meta.file_label

    # Outside check: pandas' own Stata reader. pandas cannot combine convert_missing=True with
    # date conversion when a date is missing, so dates are checked in a second read.
    with pd.io.stata.StataReader(path, convert_missing=True, convert_categoricals=False,
                                 convert_dates=False) as reader:
        theirs = reader.read()
        var_labels = reader.variable_labels()
        label_sets = reader.value_labels()
        data_label = reader.data_label
    letters = [v.string if isinstance(v, pd.io.stata.StataMissingValue) else v for v in theirs["q1"]]
    assert letters == [1.0, ".a", 2.0, ".b", "."]  # "." is system missing, NaN in our frame
    q2 = [np.nan if isinstance(v, pd.io.stata.StataMissingValue) else v for v in theirs["q2"]]
    np.testing.assert_array_equal(q2, df["q2"].to_numpy())
    assert theirs["note"].tolist() == ["fine", "NA", "", "None", "ok"]  # Stata text has no missing
    assert var_labels["q1"] == "Owns a boat" and var_labels["q2"] == "Ferry use"
    assert data_label == meta.file_label
    # Value-label tables: pandas gives the extended-missing keys as Stata's integer codes;
    # StataMissingValue decodes them back to letters.
    decoded = [{(pd.io.stata.StataMissingValue(int(k)).string if k > 2_147_483_620 else int(k)): v
                for k, v in table.items()} for table in label_sets.values()]
    assert len(decoded) == len(meta.value_labels)
    assert all(table in decoded for table in meta.value_labels.values())
    dates = pd.read_stata(path, convert_missing=False, convert_categoricals=False)
    assert dates["visit"].astype("datetime64[us]").equals(expected["visit"])
    labelled = pd.read_stata(path, convert_categoricals=True)
    assert labelled["q2"].tolist()[:3] == ["Often", "Never", "Don't know"]


def test_stata_status_letters_declared_without_cells(tmp_path):
    # A status-coded copy may declare letters no cell uses yet; labels must still be written.
    df = pd.DataFrame({"q1": [1.0, 2.0, 1.0]})
    meta = SurveyMeta(missing_values={"q1": [".a", ".b"]},
                      value_labels={"q1": {1: "Yes", 2: "No", ".a": "skipped", ".b": "refused"}})
    back = read_survey(write_survey(df, tmp_path / "s.dta", meta))
    assert get_meta(back).value_labels["q1"] == meta.value_labels["q1"]
    with pd.io.stata.StataReader(tmp_path / "s.dta") as reader:
        reader.read()
        table = next(iter(reader.value_labels().values()))
    # [from pandas' StataMissingValue]: .a and .b in a label table are 2147483622 and 2147483623.
    assert table[2_147_483_622] == "skipped" and table[2_147_483_623] == "refused"


@pytest.mark.skipif(STATSMODELS_RESULTS is None or not (STATSMODELS_RESULTS / "data_missing.dta").exists(),
                    reason="statsmodels' Stata test file not installed")
def test_statsmodels_missing_of_every_type_matches_pandas():
    path = STATSMODELS_RESULTS / "data_missing.dta"
    before = path.read_bytes()
    ours = read_survey(path)
    theirs = pd.read_stata(path, convert_missing=True, convert_categoricals=False)
    assert list(ours.columns) == list(theirs.columns)  # float, double, byte, int, long storage
    for col in theirs.columns:
        expected = [v.string if isinstance(v, pd.io.stata.StataMissingValue) else v for v in theirs[col]]
        got = ["." if (isinstance(v, float) and np.isnan(v)) else v for v in ours[col]]
        assert got == expected, col
        # system missing stays NaN, any letter would come through as ".a"...".z"
        assert get_meta(ours).missing_values.get(col, []) == sorted({e for e in expected if e != "."})
    assert path.read_bytes() == before


@pytest.mark.skipif(STATSMODELS_RESULTS is None
                    or not (STATSMODELS_RESULTS / "time_series_examples.dta").exists(),
                    reason="statsmodels' Stata test file not installed")
def test_statsmodels_stata_dates_match_pandas():
    path = STATSMODELS_RESULTS / "time_series_examples.dta"
    ours = read_survey(path)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # pandas warns about the %tC column it leaves alone
        theirs = pd.read_stata(path)
    for col in ("datetime_c", "date"):  # %tc and %td
        assert ours[col].astype("datetime64[ms]").tolist() == theirs[col].astype("datetime64[ms]").tolist()
    assert get_meta(ours).formats["date"] == "%td"


def test_csv_keeps_na_and_none_as_answers(tmp_path):
    path = tmp_path / "answers.csv"
    path.write_text("resp_id,pet,age\n1,NA,34\n2,None,\n3,,51\n4,cat,n/a\n", encoding="utf-8")
    df = read_survey(path)
    assert df["pet"].tolist()[:2] == ["NA", "None"] and pd.isna(df.loc[2, "pet"])
    assert pd.api.types.is_numeric_dtype(df["resp_id"])
    # a column holding a non-numeric text ("n/a") stays text, so nothing is silently lost
    assert df.loc[0, "age"] == "34" and df.loc[3, "age"] == "n/a" and pd.isna(df.loc[1, "age"])
    # pandas' default missing-value list would have erased both answers (the behaviour we avoid).
    assert pd.read_csv(path)["pet"].isna().tolist()[:2] == [True, True]
    assert get_meta(df).source_format == "csv"


def test_csv_numeric_column_and_roundtrip(tmp_path):
    df = pd.DataFrame({"id": [1, 2, 3], "score": [1.5, np.nan, -9.0], "txt": ["NA", "x", None]})
    back = read_survey(write_survey(df, tmp_path / "d.csv"))
    pd.testing.assert_frame_equal(back, df, check_dtype=False)
    assert pd.api.types.is_float_dtype(back["score"])


def test_parquet_roundtrip_keeps_meta_and_letters(tmp_path):
    import pyarrow.parquet as pq

    df, meta = _stata_frame()
    meta.value_labels["q2"][2.5] = "Half"  # float key, kept as float
    meta.value_labels["note"] = {"NA": "text code"}
    meta.missing_ranges["q2"] = [(-9.0, -8.0)]
    path = write_survey(set_meta(df, meta), tmp_path / "lake.parquet")
    back = read_survey(path)
    pd.testing.assert_frame_equal(back, df, check_dtype=False)
    assert back["q1"].tolist()[:4] == [1.0, ".a", 2.0, ".b"]
    got = get_meta(back)
    assert got.source_format == "parquet"
    assert got.value_labels == meta.value_labels
    assert [type(k) for k in got.value_labels["q2"]] == [int, int, int, float]
    assert got.missing_ranges == meta.missing_ranges and got.missing_values == meta.missing_values
    # Outside check: pyarrow reads the same schema key and the plain columns.
    schema = pq.read_schema(path)
    assert b"skipwise.meta" in schema.metadata
    assert pd.read_parquet(path)["q2"].equals(df["q2"])


def test_xlsx_roundtrip_cells(tmp_path):
    import openpyxl

    df = pd.DataFrame({"id": [1, 2, 3], "answer": ["NA", None, "yes"], "score": [0.5, np.nan, 3.0],
                       "day": pd.to_datetime(["2026-01-01", "2026-01-02", None])})
    path = write_survey(df, tmp_path / "d.xlsx")
    back = read_survey(path)
    assert back["id"].tolist() == [1, 2, 3]
    assert back["answer"].tolist()[::2] == ["NA", "yes"] and pd.isna(back.loc[1, "answer"])
    np.testing.assert_allclose(back["score"], df["score"])  # exact up to float repr, tol 0
    assert back["day"].tolist()[:2] == [pd.Timestamp("2026-01-01"), pd.Timestamp("2026-01-02")]
    sheet = openpyxl.load_workbook(path).worksheets[0]  # outside reader
    assert [c.value for c in sheet[1]] == ["id", "answer", "score", "day"]
    assert sheet["B2"].value == "NA" and sheet["B3"].value is None


def test_read_columns_subset_and_meta(tmp_path):
    df, meta = _spss_frame()
    path = write_survey(df, tmp_path / "lake.sav", meta)
    back = read_survey(path, columns=["q1", "resp_id"])
    assert list(back.columns) == ["q1", "resp_id"]
    assert set(get_meta(back).columns()) <= {"q1", "resp_id"}
    assert get_meta(back).value_labels["q1"][-91] == "Skipped"


def test_meta_helpers():
    df = pd.DataFrame({"a": [1, 2]})
    assert get_meta(df) == SurveyMeta()
    meta = SurveyMeta(value_labels={"a": {1: "x"}}, column_labels={"a": "A", "b": "B"})
    assert set_meta(df, meta) is df
    copy = get_meta(df)
    copy.value_labels["a"][2] = "y"
    assert get_meta(df).value_labels == {"a": {1: "x"}}  # get_meta hands out a copy
    assert get_meta(df.copy()).column_labels == {"a": "A", "b": "B"}  # attrs travel with copies
    assert meta.subset(["a"]).column_labels == {"a": "A"}
    merged = meta.merged(SurveyMeta(column_labels={"a": "New"}, file_label="F"))
    assert merged.column_labels == {"a": "New", "b": "B"} and merged.file_label == "F"
    assert meta.with_column("s", label="status", value_labels={1: "answered"}).value_labels["s"] == {1: "answered"}
    assert meta.renamed({"a": "z"}).column_labels == {"z": "A", "b": "B"}
    assert set(SUPPORTED_EXTENSIONS) == {".sav", ".zsav", ".dta", ".csv", ".xlsx", ".parquet", ".sas7bdat", ".xpt"}


_keys = st.one_of(st.integers(-10**6, 10**6), st.floats(allow_nan=False, allow_infinity=False),
                  st.text(max_size=5))


@settings(max_examples=40, deadline=None)
@given(st.dictionaries(st.sampled_from(["q1", "q2"]), st.dictionaries(_keys, st.text(max_size=8), max_size=5)))
def test_meta_json_keeps_key_types(labels):
    meta = SurveyMeta(value_labels=labels, missing_values={c: list(v)[:2] for c, v in labels.items()})
    back = SurveyMeta.from_json(meta.to_json())
    assert back == meta
    for col, table in labels.items():
        assert [type(k) for k in back.value_labels[col]] == [type(k) for k in table]


def test_dta_column_of_only_extended_missing_letters(tmp_path):
    # A numeric item nobody answered, recoded by status: every cell is a letter.
    df = pd.DataFrame({"id": [1.0, 2.0], "never": pd.Series([".a", ".a"], dtype=object)})
    meta = SurveyMeta(value_labels={"never": {".a": "skipped"}}, missing_values={"never": [".a"]})
    path = write_survey(df, tmp_path / "x.dta", meta)
    # pandas' own Stata reader (independent implementation) sees extended missing .a in both cells.
    back = pd.read_stata(path, convert_missing=True, convert_categoricals=False)
    assert [v.string for v in back["never"]] == [".a", ".a"]


def test_dta_string_dtype_column_of_only_letters(tmp_path):
    df = pd.DataFrame({"id": [1.0, 2.0], "never": pd.Series([".b", None], dtype="str")})
    path = write_survey(df, tmp_path / "y.dta", SurveyMeta(missing_values={"never": [".b"]}))
    back = pd.read_stata(path, convert_missing=True, convert_categoricals=False)
    # with convert_missing=True, system missing comes back as the missing value "."
    assert [v.string for v in back["never"]] == [".b", "."]


def test_dta_numeric_column_whose_first_100_values_are_letters(tmp_path):
    # A rarely asked item recoded by status: letters in the first 100 rows, answers later.
    cells = [".a"] * 120 + [13.0, 7.0, None, ".h"]
    df = pd.DataFrame({"rare": pd.Series(cells, dtype=object)})
    meta = SurveyMeta(value_labels={"rare": {".a": "skipped", ".h": "refused"}}, missing_values={"rare": [".a", ".h"]})
    path = write_survey(df, tmp_path / "rare.dta", meta)
    # pandas' own Stata reader (independent implementation) reads numbers and letters back.
    back = pd.read_stata(path, convert_missing=True, convert_categoricals=False)
    got = [getattr(v, "string", v) for v in back["rare"]]
    assert got[118:] == [".a", ".a", 13.0, 7.0, ".", ".h"]
