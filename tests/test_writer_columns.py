"""Column preparation of the writers: numbers and texts split once per distinct value.

Checked against pandas' own ``pd.to_numeric(errors="coerce")`` applied cell by cell (the reference
the preparation used before), and the written .dta read back by pandas' own Stata reader.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st

from hypothesis_scale import examples

from skipwise.io.writers_common import numbers_as_objects, split_numbers

CELLS = st.sampled_from([1.0, 2.5, -9.0, 3, ".a", ".b", "7", "x", None, np.nan, True, np.float64(4.0), 0.0, -0.0])


@settings(max_examples=examples(80), deadline=None)
@given(st.lists(CELLS, min_size=1, max_size=40))
def test_split_numbers_equals_to_numeric_cell_by_cell(cells):
    s = pd.Series(cells, dtype=object)
    num, rest, texts, codes = split_numbers(s)
    ref = pd.to_numeric(s, errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    np.testing.assert_array_equal(num, ref)
    numeric = ~np.isnan(ref)  # -0.0 stays -0.0 (to_numeric itself may drop the sign of a zero)
    assert list(np.signbit(num[numeric])) == [np.signbit(float(c)) for c in s[numeric]]
    np.testing.assert_array_equal(rest, (s.notna() & pd.isna(ref)).to_numpy())
    assert [texts[k] for k in codes[rest]] == [str(v) for v in s[rest]]
    objects = numbers_as_objects(s, num)
    np.testing.assert_array_equal(objects.astype(float), num)


def test_recoded_dta_letters_read_back_by_pandas(tmp_path):
    # pandas' Stata reader (a reference outside the project) sees the numbers and the letters
    from skipwise.io import SurveyMeta, write_survey

    frame = pd.DataFrame({"id": [1, 2, 3, 4], "q": pd.Series([1.0, ".a", 3, ".b"], dtype=object)})
    meta = SurveyMeta()
    meta.missing_values["q"] = [".a", ".b"]
    write_survey(frame, tmp_path / "x.dta", meta, overwrite=True)
    back = pd.read_stata(tmp_path / "x.dta", convert_missing=True)
    assert back["q"].iloc[0] == 1 and back["q"].iloc[2] == 3
    assert [str(back["q"].iloc[k]) for k in (1, 3)] == [".a", ".b"]


def test_dta_labels_of_letters_no_cell_holds_are_all_written(tmp_path):
    # The cells are written declaring only the letters each column holds, the label tables from
    # a file with every letter declared: every label must still be in the file.  Read back by
    # pandas' own Stata reader and pyreadstat's (references outside the project); the numbers of
    # the letters in a label table are Stata's: .a = 2,147,483,622, .b = .a + 1, ...
    # [Stata manual, "dta" file format, missing values].
    import pyreadstat
    from skipwise.io import SurveyMeta, write_survey

    frame = pd.DataFrame({
        "q": pd.Series([1.0, ".b", 2.0, 1.0], dtype=object),  # holds .b only
        "r": [1.0, 2.0, np.nan, 1.0],                           # holds no letter, labels letters only
        "s": pd.Series([".c", 5.0, ".c", 6.0], dtype=object),  # holds .c, no label for it
        "t": [1.0, 2.0, 3.0, 4.0],                              # no labels at all
    })
    meta = SurveyMeta()
    meta.value_labels["q"] = {1: "yes", 2: "no", ".a": "skipped", ".b": "refused", ".c": "don't know"}
    meta.value_labels["r"] = {".a": "skipped", ".c": "last letter"}
    meta.value_labels["s"] = {5: "five", ".a": "skipped"}
    for col in ("q", "r", "s"):
        meta.missing_values[col] = [".a", ".b", ".c"]
    write_survey(frame, tmp_path / "x.dta", meta, overwrite=True)

    with pd.io.stata.StataReader(tmp_path / "x.dta") as reader:
        tables = reader.value_labels()
        back = reader.read(convert_missing=True, convert_categoricals=False)
    a = 2_147_483_622
    assert tables == {"q": {1: "yes", 2: "no", a: "skipped", a + 1: "refused", a + 2: "don't know"},
                      "r": {a: "skipped", a + 2: "last letter"}, "s": {5: "five", a: "skipped"}}
    assert [str(v) for v in back["q"]] == ["1.0", ".b", "2.0", "1.0"]
    assert [str(v) for v in back["s"]] == [".c", "5.0", ".c", "6.0"]
    _, info = pyreadstat.read_dta(str(tmp_path / "x.dta"), user_missing=True)
    assert info.variable_value_labels["q"] == {1.0: "yes", 2.0: "no", "a": "skipped", "b": "refused",
                                              "c": "don't know"}
    assert info.variable_value_labels["r"] == {"a": "skipped", "c": "last letter"}
    assert info.variable_to_label == {"q": "q", "r": "r", "s": "s"}


LETTER_COLUMN = st.lists(st.one_of(st.floats(-1e6, 1e6, allow_nan=False), st.sampled_from([0.0, -0.0, ".a", ".c", ".z"]),
                                   st.none()), min_size=1, max_size=30)


@settings(max_examples=examples(30), deadline=None)
@given(LETTER_COLUMN)
def test_dta_column_of_floats_and_letters_read_back_by_pandas(tmp_path_factory, cells):
    # A recoded column (Python floats and letters) is written from its distinct values; pandas'
    # own Stata reader (a reference outside the project) must see every cell as stored.
    from skipwise.io import SurveyMeta, write_survey

    path = tmp_path_factory.mktemp("dta") / "x.dta"
    frame = pd.DataFrame({"q": pd.Series(cells + [1.0, ".a"], dtype=object)})  # always mixed
    meta = SurveyMeta()
    meta.missing_values["q"] = [".a", ".c", ".z"]
    write_survey(frame, path, meta, overwrite=True)
    back = pd.read_stata(path, convert_missing=True)["q"]
    for stored, read in zip(frame["q"], back):
        if stored is None:
            assert str(read) == "."
        elif isinstance(stored, str):
            assert str(read) == stored
        else:
            assert read == stored and np.signbit(read) == np.signbit(stored)  # -0.0 stays -0.0


def test_dta_column_with_hundreds_of_distinct_answers(tmp_path):
    # more distinct values than an int8 index holds, next to the letters
    from skipwise.io import SurveyMeta, write_survey

    cells = [float(v) for v in range(300)] + [".b"] * 3
    meta = SurveyMeta()
    meta.missing_values["q"] = [".b"]
    write_survey(pd.DataFrame({"q": pd.Series(cells, dtype=object)}), tmp_path / "x.dta", meta, overwrite=True)
    back = pd.read_stata(tmp_path / "x.dta", convert_missing=True)["q"]
    assert [float(v) for v in back[:300]] == cells[:300]
    assert [str(v) for v in back[300:]] == [".b"] * 3


def test_dta_categorical_of_numbers_and_letters_is_the_object_columns_file(tmp_path):
    # A recoded column may come as a categorical (numbers first, then letters, some unused): the
    # file must be the one written from the same cells as objects, byte for byte apart from the
    # write time, and pandas' own Stata reader must see the cells (a reference outside the project).
    from skipwise.io import SurveyMeta, write_survey

    cells = [1.0, ".b", 2.5, None, ".a", 1.0, ".b", -3.0]
    as_objects = pd.Series(cells, dtype=object)
    as_categories = pd.Series(pd.Categorical(cells, categories=[1.0, 2.5, -3.0, 9.0, ".a", ".b", ".h"]))
    letters_first = pd.Series(pd.Categorical(cells, categories=[".a", ".b", 1.0, 2.5, -3.0]))
    meta = SurveyMeta()
    meta.missing_values["q"] = [".a", ".b", ".h"]
    meta.value_labels["q"] = {1: "one", ".a": "skipped", ".h": "left blank"}
    files = []
    for k, column in enumerate((as_objects, as_categories, letters_first)):
        path = tmp_path / f"x{k}.dta"
        write_survey(pd.DataFrame({"q": column}), path, meta, overwrite=True)
        raw = bytearray(path.read_bytes())
        at = raw.index(b"<timestamp>")
        raw[at:at + 30] = b"\0" * 30  # the write time
        files.append(bytes(raw))
        back = pd.read_stata(path, convert_missing=True, convert_categoricals=False)["q"]
        assert [str(v) for v in back] == ["1.0", ".b", "2.5", ".", ".a", "1.0", ".b", "-3.0"]
    assert files[1] == files[0] and files[2] == files[0]


def test_dta_categorical_of_numbers_only_keeps_its_number_format(tmp_path):
    # read back by pyreadstat (a reference outside the project): the display format is the one given
    import pyreadstat
    from skipwise.io import SurveyMeta, write_survey

    meta = SurveyMeta()
    meta.formats["q"] = "%9.2f"
    frame = pd.DataFrame({"q": pd.Categorical([1.5, 2.0, None, 1.5])})
    write_survey(frame, tmp_path / "x.dta", meta, overwrite=True)
    back, info = pyreadstat.read_dta(str(tmp_path / "x.dta"))
    assert info.original_variable_types["q"] == "%9.2f"
    assert back["q"].tolist()[:2] == [1.5, 2.0] and np.isnan(back["q"].iloc[2])
