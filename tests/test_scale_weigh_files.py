"""``weigh --engine dask`` into one ``.parquet`` or ``.csv`` file, against the in-memory engine's files.

The reference is ``skipwise weigh`` in memory on the same rows (its weighting is checked against
published formulas in tests/test_weighting_*.py, its writers against pandas' and pyarrow's readers
in tests/test_io_*.py): the same files (OUT, and for a CSV OUT the ``.parquet`` beside it) with the
same columns and types, values within 1e-9 (docs/scale.md). Invented data; the cluster is
test_scale_weigh's (2 workers on 127.0.0.1, free ports, stopped at the end of the module).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pyarrow.parquet as pq
import pytest
from typer.testing import CliRunner

pytest.importorskip("distributed")

from skipwise.cli import app  # noqa: E402
from skipwise.io import read_survey, write_survey  # noqa: E402
from test_scale_weigh import PLANS, _assert_same_workbook, client, data  # noqa: E402,F401

runner = CliRunner()


def _weigh(*args: str) -> str:
    res = runner.invoke(app, ["weigh", *args])
    assert res.exit_code == 0, res.output
    return res.output


def _same_table(got: pd.DataFrame, want: pd.DataFrame) -> None:
    assert list(got.columns) == list(want.columns)
    assert list(got.dtypes) == list(want.dtypes)
    floats = [c for c in want.columns if pd.api.types.is_float_dtype(want[c])]
    np.testing.assert_allclose(got[floats].to_numpy(), want[floats].to_numpy(), rtol=0, atol=1e-9)
    rest = [c for c in want.columns if c not in floats]
    pd.testing.assert_frame_equal(got[rest], want[rest])


@pytest.mark.parametrize("ext", [".parquet", ".csv"])
def test_one_file_out_equals_the_in_memory_files(data, client, tmp_path, ext):
    root, frame = data
    plan = tmp_path / "plan.yaml"
    plan.write_text(PLANS["rake-jkn"], encoding="utf-8")  # stages and 6 replicate columns, estimates
    whole = tmp_path / "whole.parquet"
    write_survey(frame, whole)
    _weigh(str(whole), "-p", str(plan), "-o", str(tmp_path / f"mem{ext}"))
    out = _weigh(str(root / "parts"), "-p", str(plan), "-o", str(tmp_path / f"dask{ext}"), "--engine", "dask",
                 "--scheduler", client.scheduler.address)
    files = [f"{ext}"] + ([".parquet"] if ext == ".csv" else [])
    for suffix in files:  # OUT, and the Parquet beside a CSV OUT, as in memory
        assert f"dask{suffix}" in out
        got, want = tmp_path / f"dask{suffix}", tmp_path / f"mem{suffix}"
        if suffix == ".csv":
            _same_table(pd.read_csv(got), pd.read_csv(want))
            assert got.read_text().splitlines()[0] == want.read_text().splitlines()[0]  # the header once
            assert len(got.read_text().splitlines()) == len(frame) + 1
        else:
            _same_table(pd.read_parquet(got), pd.read_parquet(want))
            assert pq.read_schema(got).equals(pq.read_schema(want), check_metadata=False)
            _same_table(read_survey(got), read_survey(want))   # as skipwise reads it back (labels, types)
            assert pq.ParquetFile(got).num_row_groups == 3      # one partition after the other
    _assert_same_workbook(tmp_path / "mem_weights.xlsx", tmp_path / "dask_weights.xlsx")
    assert sorted(p.name for p in tmp_path.iterdir() if p.name.startswith(".")) == []  # scratch removed


def test_one_file_out_is_published_all_or_nothing(data, client, tmp_path, monkeypatch):
    root, _ = data
    plan = tmp_path / "plan.yaml"
    plan.write_text(PLANS["trim-spread"], encoding="utf-8")
    out = tmp_path / "w.csv"
    beside = tmp_path / "w.parquet"
    beside.write_bytes(b"older")
    args = [str(root / "parts"), "-p", str(plan), "-o", str(out), "--engine", "dask",
            "--scheduler", client.scheduler.address]
    res = runner.invoke(app, ["weigh", *args])
    assert res.exit_code == 1 and "exists" in res.output and "Traceback" not in res.output
    assert not out.exists() and beside.read_bytes() == b"older"   # refused before any work: nothing changed
    # a failure while the client joins the parts (the CSV is joined, the Parquet beside it fails) leaves
    # the old files as they were: no new CSV, no temporary file, no scratch folder
    from skipwise.errors import SkipwiseError
    from skipwise.scale import single

    def broken(parts, target):
        target.write_bytes(b"half")
        raise SkipwiseError("a part could not be joined")

    monkeypatch.setattr(single, "join_parquet", broken)
    res = runner.invoke(app, ["weigh", *args, "--overwrite"])
    assert res.exit_code == 1 and "could not be joined" in res.output and "Traceback" not in res.output
    assert not out.exists() and beside.read_bytes() == b"older"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["plan.yaml", "w.parquet"]
    monkeypatch.undo()
    _weigh(*args, "--overwrite")
    assert len(pd.read_csv(out)) == 900 and len(pd.read_parquet(beside)) == 900
    assert sorted(p.name for p in tmp_path.iterdir()) == ["plan.yaml", "w.csv", "w.parquet", "w_weights.xlsx"]
    res = runner.invoke(app, ["weigh", *args[:4], str(tmp_path / "w.sav"), *args[5:]])
    assert res.exit_code == 1 and "Parquet or CSV only" in res.output and not (tmp_path / "w.sav").exists()


def test_auto_weighs_a_folder_into_one_parquet_file_on_the_dask_engine(data, client, tmp_path):
    """DESIGN section 7: a .parquet OUT is the same form on both engines, so --engine auto may use dask."""
    root, frame = data
    plan = tmp_path / "plan.yaml"
    plan.write_text(PLANS["trim-spread"], encoding="utf-8")
    out = _weigh(str(root / "parts"), "-p", str(plan), "-o", str(tmp_path / "w.parquet"), "--engine", "auto",
                 "--scheduler", client.scheduler.address)
    assert "using the dask engine" in out
    assert len(read_survey(tmp_path / "w.parquet")) == len(frame)
