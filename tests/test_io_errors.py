"""User errors of survey file reading and writing: clear SkipwiseErrors, inputs untouched.

The expected behaviour comes from the formats' own rules: SPSS's limit of three discrete
user-missing values [memory: SPSS Command Syntax Reference, MISSING VALUES] and Stata's
variable-naming rules [memory: Stata User's Guide, "Naming conventions"]; the cp1252 byte
0xE9 ("é") is not valid UTF-8 (Unicode Standard, UTF-8 well-formed sequences).
"""

from __future__ import annotations

import hashlib
import os
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import pyreadstat
from skipwise.errors import ProblemCode, SkipwiseError
from skipwise.io import SurveyMeta, read_survey, write_survey


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _leftovers(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if ".part" in p.name)


def _valid_sav(folder: Path) -> Path:
    df = pd.DataFrame({"q1": np.arange(200, dtype=float), "txt": ["answer"] * 200})
    return write_survey(df, folder / "full.sav", SurveyMeta(column_labels={"q1": "Q"}))


def _read_error(path: Path, **kwargs) -> SkipwiseError:
    with pytest.raises(SkipwiseError) as info:
        read_survey(path, **kwargs)
    return info.value


def test_missing_file(tmp_path):
    err = _read_error(tmp_path / "nowhere.sav")
    assert err.codes == [ProblemCode.FILE_NOT_FOUND]
    assert err.problems[0].file == str(tmp_path / "nowhere.sav")


def test_unknown_extension_lists_supported(tmp_path):
    path = tmp_path / "data.txt"
    path.write_text("a,b\n1,2\n")
    err = _read_error(path)
    assert err.codes == [ProblemCode.FILE_FORMAT]
    assert ".sav" in err.problems[0].hint and ".parquet" in err.problems[0].hint
    assert "data.txt" in str(err)


@pytest.mark.parametrize("content", [b"", b"\n"], ids=["zero-bytes", "blank-line"])
def test_empty_csv(tmp_path, content):
    path = tmp_path / "empty.csv"
    path.write_bytes(content)
    err = _read_error(path)
    assert err.codes == [ProblemCode.FILE_UNREADABLE]
    assert err.problems[0].file == str(path) and "empty" in err.problems[0].message


@pytest.mark.parametrize("ext", [".sav", ".dta"], ids=["spss", "stata"])
def test_truncated_file(tmp_path, ext):
    df = pd.DataFrame({"q1": np.arange(200, dtype=float), "txt": ["answer"] * 200})
    full = write_survey(df, tmp_path / f"full{ext}")
    cut = tmp_path / f"cut{ext}"
    data = full.read_bytes()
    cut.write_bytes(data[: len(data) // 2])
    before = _digest(cut)
    err = _read_error(cut)
    assert err.codes == [ProblemCode.FILE_UNREADABLE]
    assert err.problems[0].file == str(cut) and "truncated" in err.problems[0].message
    assert _digest(cut) == before  # reading never modifies the input


def test_garbage_files_of_each_kind(tmp_path):
    for name in ("junk.sav", "junk.zsav", "junk.dta", "junk.xlsx", "junk.parquet"):
        path = tmp_path / name
        path.write_bytes(b"this is not a data file\n" * 10)
        err = _read_error(path)
        assert err.codes == [ProblemCode.FILE_UNREADABLE], name
        assert err.problems[0].file == str(path)


def test_wrong_encoding_then_right_one(tmp_path):
    path = tmp_path / "latin.csv"
    path.write_bytes("id,town\n1,Caf\u00e9 Orrin\n".encode("cp1252"))
    before = _digest(path)
    err = _read_error(path)
    assert err.codes == [ProblemCode.FILE_UNREADABLE]
    assert err.problems[0].file == str(path)
    assert "encoding" in err.problems[0].hint and "cp1252" in err.problems[0].hint
    assert read_survey(path, encoding="cp1252")["town"].tolist() == ["Caf\u00e9 Orrin"]
    assert _digest(path) == before


def test_unknown_column_named_with_suggestion(tmp_path):
    path = _valid_sav(tmp_path)
    err = _read_error(path, columns=["q1", "txet"])
    assert err.codes == [ProblemCode.MISSING_COLUMN]
    assert err.problems[0].item == "txet" and "txt" in err.problems[0].hint


def test_reading_leaves_every_format_unchanged(tmp_path):
    df = pd.DataFrame({"a": [1.0, 2.0], "b": ["x", "NA"]})
    for ext in (".sav", ".zsav", ".dta", ".csv", ".xlsx", ".parquet"):
        path = write_survey(df, tmp_path / f"f{ext}")
        before = _digest(path)
        read_survey(path)
        assert _digest(path) == before, ext


def test_forbidden_stata_names_leave_no_file(tmp_path):
    df = pd.DataFrame({"1st_answer": [1], "in": [2], "fine_name": [3], "x" * 33: [4]})
    target = tmp_path / "out.dta"
    with pytest.raises(SkipwiseError) as info:
        write_survey(df, target)
    assert sorted(p.item for p in info.value.problems) == sorted(["1st_answer", "in", "x" * 33])
    assert all(p.file == str(target) for p in info.value.problems)
    assert not target.exists() and _leftovers(tmp_path) == []


def test_failure_while_writing_keeps_existing_file(tmp_path, monkeypatch):
    target = _valid_sav(tmp_path)
    before = _digest(target)

    def broken_writer(df, dst_path, **kwargs):
        Path(dst_path).write_bytes(b"half a file")
        raise pyreadstat.PyreadstatError("disk trouble (simulated)")

    monkeypatch.setattr(pyreadstat, "write_sav", broken_writer)
    with pytest.raises(SkipwiseError) as info:
        write_survey(pd.DataFrame({"q1": [1.0]}), target)
    assert info.value.problems[0].file == str(target)
    assert _digest(target) == before and _leftovers(tmp_path) == []


def test_existing_output_kept_without_overwrite(tmp_path):
    target = _valid_sav(tmp_path)
    before = _digest(target)
    with pytest.raises(SkipwiseError) as info:
        write_survey(pd.DataFrame({"q1": [9.0]}), target, overwrite=False)
    assert info.value.codes == [ProblemCode.OUTPUT_EXISTS]
    assert _digest(target) == before


def test_too_many_spss_codes_that_would_catch_answers(tmp_path):
    # -95..-91 as a range would swallow the real answer -93 (e.g. a temperature), so refuse.
    df = pd.DataFrame({"q1": [-93.0, -91.0, -92.0, -94.0, -95.0]})
    meta = SurveyMeta(missing_values={"q1": [-91, -92, -94, -95]})
    target = tmp_path / "out.sav"
    with pytest.raises(SkipwiseError) as info:
        write_survey(df, target, meta)
    assert info.value.problems[0].item == "q1" and "-93" in info.value.problems[0].message
    assert not target.exists() and _leftovers(tmp_path) == []


@pytest.mark.parametrize(
    ("ext", "frame", "meta", "fragment"),
    [
        (".sav", pd.DataFrame({"q1": pd.Series([1.0, ".a"], dtype=object)}), None, "extended missing"),
        (".dta", pd.DataFrame({"t": ["a", "b"]}), SurveyMeta(value_labels={"t": {"a": "A"}}), "numeric column"),
        (".dta", pd.DataFrame({"q": [1.0, 2.5]}), SurveyMeta(value_labels={"q": {2.5: "half"}}), "whole numbers"),
        (".sav", pd.DataFrame({"q": pd.Series([1, "x"], dtype=object)}), None, "mixes numbers and text"),
        (".sav", pd.DataFrame({"t": ["a"]}), SurveyMeta(missing_values={"t": ["a", "b", "c", "d"]}), "at most 3"),
    ],
    ids=["letters-in-spss", "stata-text-labels", "stata-fraction-key", "mixed-column", "spss-text-missing"],
)
def test_data_the_format_cannot_hold(tmp_path, ext, frame, meta, fragment):
    target = tmp_path / f"out{ext}"
    with pytest.raises(SkipwiseError) as info:
        write_survey(frame, target, meta)
    assert info.value.codes == [ProblemCode.BAD_DATA]
    assert fragment in str(info.value) and str(target) in str(info.value)
    assert not target.exists() and _leftovers(tmp_path) == []


def test_write_unknown_extension(tmp_path):
    with pytest.raises(SkipwiseError) as info:
        write_survey(pd.DataFrame({"a": [1]}), tmp_path / "out.sas7bdat")
    assert info.value.codes == [ProblemCode.FILE_FORMAT]
    assert os.listdir(tmp_path) == []


def test_writer_modules_keep_the_public_import_path(tmp_path):
    # The writers are split by format family; the documented import path stays, with one
    # MetadataWarning class wherever it is imported from.
    import skipwise.io as io_package
    from skipwise.io.writers import MetadataWarning, write_survey as direct
    from skipwise.io.writers_common import MetadataWarning as common_warning

    assert direct is write_survey and MetadataWarning is io_package.MetadataWarning is common_warning
    meta = SurveyMeta(missing_values={"x": [-1, -2, -3, -4]})
    df = pd.DataFrame({"x": [1.0, -1.0, 2.0]})
    with pytest.warns(MetadataWarning, match="wrote the range"):  # SPSS: >3 codes become one range
        direct(df, tmp_path / "x.sav", meta)
    from skipwise.io import get_meta

    assert get_meta(read_survey(tmp_path / "x.sav")).missing_ranges == {"x": [(-4.0, -1.0)]}
