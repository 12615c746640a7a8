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
