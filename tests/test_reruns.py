"""Byte-for-byte reruns: one fixed write time inside .sav, .dta and .xlsx files.

Outside references: pyreadstat reads the creation time back from the SPSS and Stata headers
(``metadata.creation_time``); openpyxl reads the workbook's core properties and Python's zipfile
the entry times.  The rerun test runs the same plan twice into two folders and compares the
SHA-256 of every file but manifest.json (the one place for run times and absolute paths).
"""

from __future__ import annotations

import datetime as dt
import hashlib
import zipfile

import openpyxl
import pandas as pd
import pyreadstat
import pytest
from typer.testing import CliRunner

from skipwise.cli import app
from skipwise.io import SurveyMeta, write_survey
from skipwise.io.stable import parse_timestamp, stamp_file, timestamp_of

runner = CliRunner()
WHEN = dt.datetime(2026, 3, 14, 9, 26, 53)
LATER = dt.datetime(2027, 11, 2, 17, 5, 0)


def _sha(path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.fixture()
def frame():
    return pd.DataFrame({"id": [1.0, 2.0, 3.0], "x": [0.5, -9.0, 2.25]})


@pytest.mark.parametrize("suffix", [".sav", ".zsav"])
def test_spss_header_time_is_set(tmp_path, frame, suffix):
    path = write_survey(frame, tmp_path / f"a{suffix}", SurveyMeta(missing_values={"x": [-9]}))
    stamp_file(path, WHEN)
    _, meta = pyreadstat.read_sav(str(path), metadataonly=True)
    assert meta.creation_time == WHEN  # pyreadstat reads the header's date and time fields
    df, _ = pyreadstat.read_sav(str(path), user_missing=True)
    assert df["x"].tolist() == [0.5, -9.0, 2.25]  # the data are untouched


def test_stata_header_time_is_set(tmp_path, frame):
    path = write_survey(frame, tmp_path / "a.dta")
    stamp_file(path, WHEN)
    _, meta = pyreadstat.read_dta(str(path), metadataonly=True)
    assert meta.creation_time == WHEN.replace(second=0)  # Stata's header holds minutes
    assert pd.read_stata(path)["x"].tolist() == [0.5, -9.0, 2.25]  # pandas' own reader


def test_workbook_times_are_fixed(tmp_path, frame):
    path = write_survey(frame, tmp_path / "a.xlsx")
    stamp_file(path, WHEN)
    props = openpyxl.load_workbook(path).properties
    assert props.created == WHEN and props.modified == WHEN
    with zipfile.ZipFile(path) as z:
        assert {i.date_time for i in z.infolist()} == {(2026, 3, 14, 9, 26, 52)}  # zip times: 2-second steps
    assert pd.read_excel(path)["x"].tolist() == [0.5, -9.0, 2.25]


@pytest.mark.parametrize("suffix", [".sav", ".zsav", ".dta", ".xlsx"])
def test_the_stamp_alone_decides_the_bytes(tmp_path, frame, suffix):
    a = write_survey(frame, tmp_path / f"a{suffix}")
    b = write_survey(frame, tmp_path / f"b{suffix}")
    stamp_file(a, WHEN)
    stamp_file(b, LATER)
    assert _sha(a) != _sha(b)  # the time is really in the file...
    stamp_file(b, WHEN)
    assert _sha(a) == _sha(b)  # ...and it is the only difference


def test_timestamps_parse_and_default_to_the_file_time(tmp_path):
    assert parse_timestamp("2026-03-14T09:26:53Z") == WHEN
    assert parse_timestamp("2026-03-14 10:26:53+01:00") == WHEN
    assert parse_timestamp("2026-03-14") == dt.datetime(2026, 3, 14)
    with pytest.raises(ValueError):
        parse_timestamp("last Tuesday")
    f = tmp_path / "d.csv"
    f.write_text("a\n1\n")
    import os

    os.utime(f, (WHEN.replace(tzinfo=dt.timezone.utc).timestamp(),) * 2)
    assert timestamp_of(f) == WHEN


def test_bad_plan_timestamp_is_reported_with_its_line(tmp_path):
    from skipwise.errors import SkipwiseError
    from skipwise.pipeline.plan import loads_run_plan

    (tmp_path / "d.csv").write_text("id\n1\n")
    (tmp_path / "q.yaml").write_text("x")
    text = "format: 1\ndata: d.csv\nquestionnaire: q.yaml\noutput:\n  folder: p\n  timestamp: soon\n"
    with pytest.raises(SkipwiseError) as err:
        loads_run_plan(text, tmp_path / "plan.yaml")
    assert "plan.yaml:6" in err.value.render() and "'output.timestamp' must be an ISO date" in err.value.render()
    ok = loads_run_plan(text.replace("soon", "2026-06-30T12:00:00"), tmp_path / "plan.yaml")
    assert ok.output.timestamp == "2026-06-30T12:00:00"
    unquoted = loads_run_plan(text.replace("soon", "2026-06-30"), tmp_path / "plan.yaml")
    assert parse_timestamp(unquoted.output.timestamp) == dt.datetime(2026, 6, 30)


def test_a_rerun_of_the_same_plan_gives_the_same_bytes(tmp_path):
    # The tiny invented plan of test_run_pipeline, run twice; the first package is moved aside.
    from test_run_pipeline import _project

    plan = _project(tmp_path)
    for _ in range(2):
        if (tmp_path / "package").exists():
            (tmp_path / "package").rename(tmp_path / "package2")  # keep the first run's package
        result = runner.invoke(app, ["run", str(plan)])
        assert result.exit_code == 0, result.output
    one, two = tmp_path / "package", tmp_path / "package2"
    names = sorted(p.name for p in one.iterdir())
    assert names == sorted(p.name for p in two.iterdir())
    assert {"pond.sav", "pond_coded.dta", "item_report.xlsx", "weighting.xlsx"} <= set(names)
    differ = [n for n in names if n != "manifest.json" and _sha(one / n) != _sha(two / n)]
    assert differ == []
    # The write time inside the files is the data file's own modification time.
    _, meta = pyreadstat.read_sav(str(one / "pond.sav"), metadataonly=True)
    assert meta.creation_time == timestamp_of(tmp_path / "in" / "pond.sav")
