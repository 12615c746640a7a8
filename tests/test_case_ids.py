"""Case ids keep their stored type: no false duplicates, SPSS ids printed as whole numbers.

Outside references: pandas' own CSV reader keeps 17-digit integers exactly as int64, and
doubles hold every integer exactly only up to 2**53 (IEEE 754 binary64, 53-bit significand),
so 20260000000000001 and 20260000000000000 are the same double; pyreadstat writes the .sav
file (where every number is a double) that the fault listing is read from.
"""

from __future__ import annotations

import io

import pandas as pd
import pyreadstat

from skipwise.caseids import id_values
from skipwise.checkdata import check_data
from skipwise.classify import classify
from skipwise.errors import ProblemCode
from skipwise.io import read_survey
from skipwise.questionnaire import loads_questionnaire

Q = loads_questionnaire("format: 1\nsurvey: {name: t, case_id: id}\nsections:\n  - name: s\n    items:\n"
                        "      - {name: a, type: integer, range: [1, 2]}\n"
                        "      - {name: b, type: integer, asked_if: a == 1}\n")


def test_seventeen_digit_ids_are_not_false_duplicates():
    text = "id,a,b\n" + "".join(f"{20260000000000000 + i},2,\n" for i in range(40))
    data = pd.read_csv(io.StringIO(text))
    assert data["id"].dtype == "int64" and data["id"].nunique() == 40        # pandas keeps them exact
    assert data["id"].astype("float64").nunique() < 40                       # as doubles they collide
    assert [p.code for p in check_data(data, Q).errors] == []


def test_real_duplicates_and_blank_ids_still_found():
    data = pd.DataFrame({"id": ["A1", "A1 ", "", None, "B"], "a": [2] * 5, "b": [None] * 5})
    codes = sorted(p.code.value for p in check_data(data, Q).errors)
    assert codes == [ProblemCode.BAD_DATA.value, ProblemCode.DUPLICATE_CASE_ID.value]


def test_spss_ids_print_as_whole_numbers_in_the_fault_listing(tmp_path):
    path = tmp_path / "d.sav"
    pyreadstat.write_sav(pd.DataFrame({"id": [100197, 100198], "a": [2, 1], "b": [5, None]}), str(path))
    data = read_survey(path)
    assert data["id"].dtype == "float64"  # SPSS stores doubles
    listing = classify(data, Q).faults.to_csv(index=False)
    assert "100197," in listing and "100197.0" not in listing


def test_id_values_keep_text_and_fractional_numbers():
    assert list(id_values(pd.Series([1.5, 2.0]))) == [1.5, 2.0]
    assert list(id_values(pd.Series([" x ", "y"]))) == ["x", "y"]
