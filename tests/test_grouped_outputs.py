"""A command's several outputs appear together or not at all (DESIGN: outputs are published
all-or-nothing): weigh's data, its Parquet copy and its workbook, in memory and on the dask engine,
and impute's M completed files.  A failure is injected in the last file written; every earlier
file must keep its old bytes and no temporary file may stay.  Invented data.
"""

from __future__ import annotations

import pytest
from typer.testing import CliRunner

from skipwise.cli import app
from skipwise.errors import SkipwiseError

from test_impute_cli import files as impute_files  # noqa: F401
from test_weighting_cli import files as weigh_files  # noqa: F401

try:
    from test_scale_weigh import client, data  # noqa: F401  (fixtures: 2 workers on 127.0.0.1)
except pytest.skip.Exception:  # dask not installed
    pass

runner = CliRunner()


def _broken_workbook(res, path, **kwargs):
    path.write_bytes(b"half a workbook")
    raise SkipwiseError("the workbook could not be written")


def _names(folder):
    return sorted(p.name for p in folder.iterdir())


def test_weigh_in_memory_publishes_data_and_workbook_together(weigh_files, monkeypatch):
    tmp, data, plan = weigh_files
    out = tmp / "weighted.sav"
    olds = {tmp / "weighted.sav": b"old sav", tmp / "weighted.parquet": b"old parquet",
            tmp / "weighted_weights.xlsx": b"old book"}
    for path, old in olds.items():
        path.write_bytes(old)
    before = _names(tmp)
    from skipwise.weighting import workbook

    monkeypatch.setattr(workbook, "write_workbook", _broken_workbook)
    res = runner.invoke(app, ["weigh", str(data), "--plan", str(plan), "-o", str(out), "--overwrite"])
    assert res.exit_code == 1 and "could not be written" in res.output and "Traceback" not in res.output
    assert {p: p.read_bytes() for p in olds} == olds  # nothing replaced: not the data, not the Parquet copy
    assert _names(tmp) == before  # no temporary file left
    monkeypatch.undo()
    res = runner.invoke(app, ["weigh", str(data), "--plan", str(plan), "-o", str(out), "--overwrite"])
    assert res.exit_code == 0, res.output
    assert all(p.read_bytes() != old for p, old in olds.items()) and _names(tmp) == before


def test_impute_publishes_its_m_files_together(impute_files, monkeypatch):
    tmp, qf, data, plan = impute_files  # two imputations: done_1.sav and done_2.sav
    out = tmp / "done.sav"
    olds = {tmp / "done_1.sav": b"old first", tmp / "done_2.sav": b"old second"}
    for path, old in olds.items():
        path.write_bytes(old)
    before = _names(tmp)
    import skipwise.io as sio

    real, calls = sio.write_survey, []

    def second_fails(frame, path, *args, **kwargs):
        calls.append(path)
        if len(calls) == 2:
            raise SkipwiseError("the disk is full")
        return real(frame, path, *args, **kwargs)

    monkeypatch.setattr(sio, "write_survey", second_fails)
    args = ["impute", str(data), "-q", str(qf), "--plan", str(plan), "-o", str(out), "--overwrite"]
    res = runner.invoke(app, args)
    assert len(calls) == 2 and res.exit_code == 1 and "disk is full" in res.output
    assert {p: p.read_bytes() for p in olds} == olds  # the first file was written, but not published
    assert _names(tmp) == before
    monkeypatch.undo()
    assert runner.invoke(app, args).exit_code == 0
    assert all(p.read_bytes() != old for p, old in olds.items()) and _names(tmp) == before


@pytest.mark.parametrize("target", ["w.parquet", "w"])
def test_weigh_on_dask_publishes_data_and_workbook_together(target, tmp_path, monkeypatch, request):
    pytest.importorskip("distributed")
    from test_scale_weigh import PLANS

    root, _frame = request.getfixturevalue("data")  # test_scale_weigh's parts and 2-worker cluster
    client = request.getfixturevalue("client")
    plan = tmp_path / "plan.yaml"
    plan.write_text(PLANS["trim-spread"], encoding="utf-8")
    out, book = tmp_path / target, tmp_path / "w_weights.xlsx"
    book.write_bytes(b"old book")
    from skipwise.weighting import workbook

    monkeypatch.setattr(workbook, "write_workbook", _broken_workbook)
    args = ["weigh", str(root / "parts"), "-p", str(plan), "-o", str(out), "--engine", "dask", "--overwrite",
            "--scheduler", client.scheduler.address]
    res = runner.invoke(app, args)
    assert res.exit_code == 1 and "could not be written" in res.output and "Traceback" not in res.output
    assert not out.exists() and book.read_bytes() == b"old book"  # the data are not published either
    assert _names(tmp_path) == ["plan.yaml", "w_weights.xlsx"]
    monkeypatch.undo()
    res = runner.invoke(app, args)
    assert res.exit_code == 0, res.output
    assert out.exists() and book.read_bytes()[:2] == b"PK"
