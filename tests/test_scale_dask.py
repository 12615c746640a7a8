"""The dask engine against the in-memory engine on the same rows (docs/scale.md).

The reference is the in-memory classification of the whole file; identity means statuses cell
for cell, counts exactly and the one set of item rates to 1e-9. Clusters bind to 127.0.0.1 only,
pick free ports, and are stopped by the tests that start them.
"""

from __future__ import annotations

import os
import socket
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

pytest.importorskip("distributed")

from skipwise.classify import classify  # noqa: E402
from skipwise.classify.export import with_status_columns  # noqa: E402
from skipwise.cli import app  # noqa: E402
from skipwise.demo import generate  # noqa: E402
from skipwise.io import write_survey  # noqa: E402
from skipwise.questionnaire import load_questionnaire  # noqa: E402
from skipwise.rates import item_rates  # noqa: E402
from skipwise.scale import dask_client  # noqa: E402
from skipwise.scale.classify import classify_on_cluster  # noqa: E402

DEMO_Q = Path(__file__).parents[1] / "src/skipwise/demo/marrowby-2026.yaml"


@pytest.fixture(scope="module")
def survey(tmp_path_factory):
    root = tmp_path_factory.mktemp("scale")
    frame = generate().interviews
    parts = root / "parts"
    parts.mkdir()
    for i, rows in enumerate(np.array_split(np.arange(len(frame)), 3)):
        write_survey(frame.iloc[rows].reset_index(drop=True), parts / f"wave-{i}.parquet")
    whole = root / "whole.parquet"
    write_survey(frame, whole)
    return root, frame, load_questionnaire(DEMO_Q)


@pytest.fixture(scope="module")
def client():
    with dask_client(workers=2) as c:
        yield c


def _read_parts(folder: Path) -> pd.DataFrame:
    return pd.concat([pd.read_parquet(p) for p in sorted(folder.glob("part-*.parquet"))], ignore_index=True)


@pytest.mark.parametrize("source,partition_rows", [("parts", 250_000), ("whole.parquet", 250_000),
                                                   ("parts/wave-*.parquet", 250_000)],
                         ids=["folder", "one-file", "glob"])
def test_statuses_counts_and_rates_equal_the_in_memory_engine(survey, client, tmp_path, source, partition_rows):
    root, frame, q = survey
    res = classify_on_cluster(str(root / source), q, tmp_path / "out", client=client, partition_rows=partition_rows)
    cl = classify(frame, q)
    ref, _ = with_status_columns(frame, cl)
    got = _read_parts(tmp_path / "out")
    assert list(got.columns) == list(ref.columns)
    status = [c for c in ref.columns if c.endswith("_status")]
    np.testing.assert_array_equal(got[status].to_numpy(), ref[status].to_numpy())
    pd.testing.assert_frame_equal(res.counts, cl.counts().astype("int64"), check_names=False)
    mem = item_rates(cl).table()
    np.testing.assert_allclose(res.rates.table()["nonresponse_rate"], mem["nonresponse_rate"], atol=1e-9)
    assert res.faults == len(cl.faults) == len(_read_parts(tmp_path / "out_faults"))
    # the fault listing holds the same rows (partition by partition, so compared in one order)
    from skipwise.classify.export import fault_listing

    faults = _read_parts(tmp_path / "out_faults").astype(str)
    mem_faults = fault_listing(cl).astype(str)
    key = list(mem_faults.columns)
    assert sorted(faults[key].values.tolist()) == sorted(mem_faults.values.tolist())


def test_results_do_not_depend_on_the_partitioning(survey, client, tmp_path):
    root, frame, q = survey
    small = classify_on_cluster(root / "whole.parquet", q, tmp_path / "a", client=client, partition_rows=1)
    assert len(small.parts) == 1  # one row group in the file: it cannot be split further
    big = classify_on_cluster(root / "parts", q, tmp_path / "b", client=client)
    pd.testing.assert_frame_equal(small.counts, big.counts)
    assert _read_parts(tmp_path / "a").equals(_read_parts(tmp_path / "b"))


def test_a_folder_that_is_not_ours_is_refused_and_left_alone(survey, client, tmp_path):
    from skipwise.errors import SkipwiseError

    root, _, q = survey
    out = tmp_path / "mine"
    out.mkdir()
    (out / "notes.txt").write_text("keep me")
    with pytest.raises(SkipwiseError, match="not a skipwise parts folder"):
        classify_on_cluster(root / "parts", q, out, client=client)
    assert (out / "notes.txt").read_text() == "keep me" and len(list(out.iterdir())) == 1


def test_cli_refuses_sav_and_dta_outputs_and_other_inputs(survey, tmp_path):
    root, frame, _ = survey
    runner = CliRunner()
    for name in ("x.sav", "x.dta"):
        res = runner.invoke(app, ["classify", str(root / "parts"), "-q", str(DEMO_Q), "-o", str(tmp_path / name),
                                  "--engine", "dask"])
        assert res.exit_code == 1 and "writes Parquet or CSV only" in res.output, res.output
    xlsx = tmp_path / "d.xlsx"
    frame.head(5).to_excel(xlsx, index=False)
    res = runner.invoke(app, ["classify", str(xlsx), "-q", str(DEMO_Q), "-o", str(tmp_path / "o"),
                              "--engine", "dask", "--scheduler", "tcp://127.0.0.1:1"])
    assert res.exit_code == 1 and "the dask engine reads Parquet files" in res.output and "Traceback" not in res.output
    assert not (tmp_path / "o").exists()


def _in_memory(path: Path, q):
    """The in-memory engine's classified frame and metadata of a file (as `classify -o x.parquet` writes it)."""
    from skipwise.classify.delivery import delivery_meta
    from skipwise.io import get_meta, read_survey

    data = read_survey(path)
    cl = classify(data, q)
    ref, meta = with_status_columns(data, cl, delivery_meta(get_meta(data), q, data))
    return ref, meta, cl


@pytest.mark.parametrize("ext", [".sav", ".csv"])
def test_converted_sav_and_csv_equal_the_in_memory_engine(survey, client, tmp_path, ext):
    from skipwise.classify.delivery import delivery_meta
    from skipwise.io import get_meta, read_survey
    from skipwise.scale.convert import convert_to_parts

    root, frame, q = survey
    src = tmp_path / f"interviews{ext}"
    write_survey(frame, src, delivery_meta(get_meta(frame), q, frame))
    ref, ref_meta, cl = _in_memory(src, q)
    scratch = tmp_path / "scratch"
    scratch.mkdir()
    conv = convert_to_parts(src, scratch, partition_rows=600)
    assert len(conv.parts) == 4 and conv.rows == len(frame)  # 2249 rows in chunks of 600
    res = classify_on_cluster(src, q, tmp_path / "out", client=client, parts=conv.parts, meta=conv.meta,
                              dtypes=conv.dtypes)
    got = pd.concat([read_survey(p) for p in sorted((tmp_path / "out").glob("part-*.parquet"))], ignore_index=True)
    assert list(got.columns) == list(ref.columns)
    status = [c for c in ref.columns if c.endswith("_status")]
    np.testing.assert_array_equal(got[status].to_numpy(), ref[status].to_numpy())
    # the data cells too, in the whole file's column types (pandas' own comparison)
    pd.testing.assert_frame_equal(got.drop(columns=status), ref.drop(columns=status), check_dtype=True)
    pd.testing.assert_frame_equal(res.counts, cl.counts().astype("int64"), check_names=False)
    part_meta = get_meta(read_survey(sorted((tmp_path / "out").glob("part-*.parquet"))[1]))
    for field in ("value_labels", "missing_values", "missing_ranges", "column_labels", "measure"):
        assert getattr(part_meta, field) == getattr(ref_meta, field), field


def test_single_file_outputs_csv_parts_and_auto_through_the_cli(survey, client, tmp_path, monkeypatch):
    from skipwise.io import read_survey

    root, frame, q = survey
    monkeypatch.setenv("SKIPWISE_SCHEDULER", client.scheduler.address)
    runner = CliRunner()
    ref, _, cl = _in_memory(root / "whole.parquet", q)
    mem_faults = pd.read_csv(_run_memory(root / "whole.parquet", tmp_path / "mem.parquet"))
    for name in ("one.parquet", "one.csv"):
        res = runner.invoke(app, ["classify", str(root / "parts"), "-q", str(DEMO_Q), "-o", str(tmp_path / name),
                                  "--engine", "dask"])
        assert res.exit_code == 0, res.output
        got = read_survey(tmp_path / name)
        if name.endswith(".csv"):  # pandas' CSV reader on both engines' files
            _run_memory(root / "whole.parquet", tmp_path / "mem.csv")
            pd.testing.assert_frame_equal(got, read_survey(tmp_path / "mem.csv"))
        else:
            pd.testing.assert_frame_equal(got, read_survey(tmp_path / "mem.parquet"))
        faults = pd.read_csv(tmp_path / f"{name}.faults.csv")
        assert sorted(faults.astype(str).values.tolist()) == sorted(mem_faults.astype(str).values.tolist())
    res = runner.invoke(app, ["classify", str(root / "parts"), "-q", str(DEMO_Q), "-o", str(tmp_path / "p"),
                              "--engine", "dask", "--parts", "csv"])
    assert res.exit_code == 0, res.output
    assert len(list((tmp_path / "p").glob("part-*.csv"))) == 3 and len(list((tmp_path / "p_faults").glob("*.csv"))) == 3
    # --engine auto: dask above the budget for an output that allows it, and it says so
    monkeypatch.setenv("SKIPWISE_MEMORY_BUDGET", "1KB")
    res = runner.invoke(app, ["classify", str(root / "whole.parquet"), "-q", str(DEMO_Q), "-o",
                              str(tmp_path / "auto.parquet"), "--engine", "auto"])
    assert res.exit_code == 0 and "using the dask engine" in res.output and "1 partitions" in res.output, res.output
    res = runner.invoke(app, ["classify", str(root / "whole.parquet"), "-q", str(DEMO_Q), "-o",
                              str(tmp_path / "auto.sav"), "--engine", "auto"])
    assert res.exit_code == 0 and "using the in-memory engine" in res.output and (tmp_path / "auto.sav").is_file()
    monkeypatch.setenv("SKIPWISE_MEMORY_BUDGET", "100GB")
    res = runner.invoke(app, ["classify", str(root / "whole.parquet"), "-q", str(DEMO_Q), "-o",
                              str(tmp_path / "auto2.parquet"), "--engine", "auto"])
    assert res.exit_code == 0 and "--engine auto" not in res.output and "partitions" not in res.output
    # DESIGN section 7: a folder OUT only with an explicit --engine dask, even for a folder DATA
    res = runner.invoke(app, ["classify", str(root / "parts"), "-q", str(DEMO_Q), "-o", str(tmp_path / "folder"),
                              "--engine", "auto"])
    assert res.exit_code != 0 and "--engine dask" in res.output and "Traceback" not in res.output, res.output
    assert not (tmp_path / "folder").exists() and not (tmp_path / "folder_faults").exists()


def _run_memory(data: Path, out: Path) -> Path:
    res = CliRunner().invoke(app, ["classify", str(data), "-q", str(DEMO_Q), "-o", str(out), "--overwrite"])
    assert res.exit_code == 0, res.output
    return out.with_name(out.name + ".faults.csv")


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def test_cli_against_a_real_scheduler_and_two_workers(survey, tmp_path):
    root, frame, q = survey
    port = _free_port()
    address = f"tcp://127.0.0.1:{port}"
    env = {**os.environ, "PYTHONPATH": os.pathsep.join(sys.path)}
    procs = [subprocess.Popen([sys.executable, "-m", "distributed.cli.dask_scheduler", "--host", "127.0.0.1",
                               "--port", str(port), "--dashboard-address", "127.0.0.1:0"],
                              stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env)]
    try:
        for _ in range(2):
            procs.append(subprocess.Popen([sys.executable, "-m", "distributed.cli.dask_worker", address,
                                           "--host", "127.0.0.1", "--nthreads", "1", "--nworkers", "1",
                                           "--dashboard-address", "127.0.0.1:0"],
                                          stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env))
        from distributed import Client

        deadline = time.monotonic() + 60
        while True:
            try:
                with Client(address, timeout="5s") as c:
                    if len(c.scheduler_info()["workers"]) == 2:
                        break
            except OSError:
                pass
            assert time.monotonic() < deadline, "the cluster did not start"
            time.sleep(0.5)
        out = tmp_path / "classified"
        res = CliRunner().invoke(app, ["classify", str(root / "parts"), "-q", str(DEMO_Q), "-o", str(out),
                                       "--engine", "dask", "--scheduler", address])
        assert res.exit_code == 0, res.output
        assert "in 3 partitions" in res.output
        cl = classify(frame, q)
        ref, _ = with_status_columns(frame, cl)
        got = _read_parts(out)
        np.testing.assert_array_equal(got["income_status"].to_numpy(), ref["income_status"].to_numpy())
        # report and check through the same scheduler: the in-memory engine's sheets and findings
        runner = CliRunner()
        res = runner.invoke(app, ["report", str(root / "parts"), "-q", str(DEMO_Q), "-o", str(tmp_path / "d.xlsx"),
                                  "--engine", "dask", "--scheduler", address, "--by", "district"])
        assert res.exit_code == 0 and "in 3 partitions" in res.output, res.output
        res = runner.invoke(app, ["report", str(root / "whole.parquet"), "-q", str(DEMO_Q), "-o",
                                  str(tmp_path / "m.xlsx"), "--by", "district"])
        assert res.exit_code == 0, res.output
        mem, dsk = _cells(tmp_path / "m.xlsx"), _cells(tmp_path / "d.xlsx")
        for sheet in ("Items", "Subgroups", "Patterns", "Completeness"):
            assert {k: v for k, v in mem.items() if k[0] == sheet} == {k: v for k, v in dsk.items() if k[0] == sheet}
        mem_check = runner.invoke(app, ["check", str(root / "whole.parquet"), "-q", str(DEMO_Q)])
        dask_check = runner.invoke(app, ["check", str(root / "parts"), "-q", str(DEMO_Q), "--engine", "dask",
                                         "--scheduler", address])
        assert dask_check.exit_code == mem_check.exit_code
        assert dask_check.stdout.splitlines()[:-2] == mem_check.stdout.splitlines()[:-2]
    finally:
        for p in procs:
            p.terminate()
        for p in procs:
            try:
                p.wait(timeout=20)
            except subprocess.TimeoutExpired:
                p.kill()


def _cells(path: Path) -> dict:
    """Every cell of every sheet: (sheet, coordinate) -> (value, number format), read by openpyxl."""
    import openpyxl

    wb = openpyxl.load_workbook(path)
    return {(ws.title, cell.coordinate): (cell.value, cell.number_format)
            for ws in wb.worksheets for row in ws.iter_rows() for cell in row if cell.value is not None}


@pytest.mark.parametrize("kind", ["parquet-row-groups", "sav", "csv"])
def test_report_workbook_equals_the_in_memory_engine(survey, client, tmp_path, kind):
    """docs/scale.md: formatted workbook cells equal (counts exactly, floats within 1e-9, same number format)."""
    import datetime as dt

    import pyarrow.parquet as pq

    from skipwise.classify.delivery import delivery_meta
    from skipwise.io import get_meta, read_survey
    from skipwise.report import write_item_report
    from skipwise.scale.convert import convert_to_parts
    from skipwise.scale.report import report_on_cluster
    from skipwise.scale.sources import parquet_parts

    root, frame, q = survey
    data = frame.assign(wt=1.0 / frame["sel_prob"])
    data.loc[data.index[::97], "wt"] = 0.0  # some weights of 0 (the Overview's note)
    meta = delivery_meta(get_meta(frame), q, frame)
    meta, dtypes = None, None
    if kind == "parquet-row-groups":
        src = tmp_path / "w.parquet"
        write_survey(data, tmp_path / "one.parquet")
        pq.write_table(pq.read_table(tmp_path / "one.parquet"), src, row_group_size=500)
        parts = parquet_parts(src, 500)
    else:
        src = tmp_path / f"w.{kind}"
        write_survey(data, src, delivery_meta(get_meta(data), q, data))
        scratch = tmp_path / "scratch"
        scratch.mkdir()
        conv = convert_to_parts(src, scratch, partition_rows=500)
        parts, meta, dtypes = conv.parts, conv.meta, conv.dtypes
    assert len(parts) == 5
    when = dt.datetime(2026, 6, 30, 12, 0)
    opts = dict(weight="wt", by=("district", "years_here"), fault_rows=40, top_items=6, input_path=src, written=when)
    write_item_report(read_survey(src), q, tmp_path / "mem.xlsx", **opts)
    res = report_on_cluster(parts, q, tmp_path / "dask.xlsx", client=client, meta=meta, dtypes=dtypes, **opts)
    assert res.counts.faults_total > 40  # the fault sheet is capped, the total counts them all
    mem, got = _cells(tmp_path / "mem.xlsx"), _cells(tmp_path / "dask.xlsx")
    assert mem.keys() == got.keys()
    for key, (value, fmt) in mem.items():
        other, other_fmt = got[key]
        assert fmt == other_fmt, key
        if isinstance(value, (int, float)) and isinstance(other, (int, float)) and not isinstance(value, bool):
            assert other == pytest.approx(value, rel=1e-9, abs=1e-12), key
        else:
            assert other == value, key


def test_check_findings_equal_the_in_memory_engine(survey, client, tmp_path):
    """Duplicate ids across partitions, blank ids and undeclared values: the same findings, word for word."""
    import pyarrow.parquet as pq

    from skipwise.checkdata import check_data
    from skipwise.io import read_survey
    from skipwise.scale.check import check_on_cluster
    from skipwise.scale.sources import parquet_parts

    root, frame, q = survey
    data = frame.copy()
    ids = data["case_id"].astype(object).to_numpy().copy()
    ids[1900], ids[2000], ids[2100] = ids[3], ids[3], ids[700]  # across partitions
    ids[[10, 1200]] = None
    data["case_id"] = ids
    data.loc[data.index[[5, 1500, 2200]], "hh_size"] = 77.0  # no declared code, outside the range
    write_survey(data, tmp_path / "one.parquet")
    src = tmp_path / "c.parquet"
    pq.write_table(pq.read_table(tmp_path / "one.parquet"), src, row_group_size=500)
    mem = check_data(read_survey(src), q, top=3)
    got = check_on_cluster(parquet_parts(src, 500), q, client=client, top=3)
    assert [p.code for p in mem.problems] == [p.code for p in got.problems]
    assert mem.to_rows() == got.to_rows()
    text = " ".join(r["detail"] for r in got.to_rows())
    assert "2 case id(s) occur more than once (5 rows)" in text and "2 row(s) have a blank case id (rows 11, 1201)" in text


def test_check_finds_a_duplicate_id_across_two_files_of_a_folder_as_in_memory(survey, client, tmp_path, monkeypatch):
    """A Parquet folder whose two files share a case id: `check --engine dask` prints the in-memory engine's
    finding on the whole file, word for word; the count is pandas' own (Series.duplicated(keep=False))."""
    root, frame, _ = survey
    data = frame.copy()
    data.loc[1500, "case_id"] = data.loc[7, "case_id"]  # row 7 in the first file, row 1500 in the second
    folder = tmp_path / "waves"
    folder.mkdir()
    write_survey(data.iloc[:1000].reset_index(drop=True), folder / "a.parquet")
    write_survey(data.iloc[1000:].reset_index(drop=True), folder / "b.parquet")
    write_survey(data, tmp_path / "whole.parquet")
    monkeypatch.setenv("SKIPWISE_SCHEDULER", client.scheduler.address)
    runner = CliRunner()
    mem = runner.invoke(app, ["check", str(tmp_path / "whole.parquet"), "-q", str(DEMO_Q)])
    dsk = runner.invoke(app, ["check", str(folder), "-q", str(DEMO_Q), "--engine", "dask"])
    assert mem.exit_code == dsk.exit_code == 1, dsk.output
    rows = int(data["case_id"].duplicated(keep=False).sum())
    line = f"1 case id(s) occur more than once ({rows} rows): {data.loc[7, 'case_id']}"
    assert rows == 2 and line in mem.stdout and line in dsk.stdout
    assert dsk.stdout.splitlines()[:-2] == mem.stdout.splitlines()[:-2]  # the last lines name the input


def test_classify_gives_the_invalid_hint_from_the_counts_of_every_partition(client, tmp_path, monkeypatch):
    """The in-memory engine's hint when more than 1 % of the cells are invalid (skipwise.classify.hints),
    from the partitions' counts added up: the first file has no invalid cell, the second and third differ in
    their worst item, so only the whole file's counts give the in-memory figures and order. The number of
    invalid cells is pandas' own count of values outside [0, 10]."""
    from test_invalid_hint import Q  # the same two-item questionnaire as the in-memory hint's tests

    q = tmp_path / "q.yaml"
    q.write_text(Q)
    n = 1200
    frame = pd.DataFrame({"id": np.arange(1, n + 1), "a": np.ones(n, dtype=np.int64), "b": np.ones(n, dtype=np.int64)})
    frame.loc[[410, 500, 610, 700, 790, 805, 830, 860, 890, 900, 950], "b"] = 99   # second file
    frame.loc[[1000, 1010, 1020, 1030, 1040, 1050, 1060, 1070, 1080, 1090, 1100, 1110], "a"] = 99  # third file
    frame.loc[[1120, 1150, 1190], "b"] = 99
    folder = tmp_path / "waves"
    folder.mkdir()
    for i in range(3):
        write_survey(frame.iloc[400 * i:400 * (i + 1)].reset_index(drop=True), folder / f"w-{i}.parquet")
    write_survey(frame, tmp_path / "whole.parquet")
    invalid = int((frame[["a", "b"]] > 10).to_numpy().sum())
    assert invalid == 26 and invalid > 0.01 * 2 * n  # over 1 % of the file's cells
    monkeypatch.setenv("SKIPWISE_SCHEDULER", client.scheduler.address)
    runner = CliRunner()
    mem = runner.invoke(app, ["classify", str(tmp_path / "whole.parquet"), "-q", str(q), "-o", str(tmp_path / "m.csv")])
    dsk = runner.invoke(app, ["classify", str(folder), "-q", str(q), "-o", str(tmp_path / "d"), "--engine", "dask"])
    assert mem.exit_code == dsk.exit_code == 0, dsk.output
    hint = [line for line in mem.output.splitlines() if "are invalid" in line]
    assert len(hint) == 1 and f"{invalid} of {2 * n:,} cells (1.1%) are invalid" in hint[0] and "most in b, a" in hint[0]
    expected = hint[0].replace(str(tmp_path / "whole.parquet"), str(folder))
    assert [line for line in dsk.output.splitlines() if "are invalid" in line] == [expected]


def test_the_compression_of_an_spss_file_is_read_from_its_header(tmp_path):
    """Files written by pyreadstat with its own options: none, row (bytecode) and zlib compression (the
    SPSS header codes 0, 1 and 2); the conversion names the files that pyreadstat decompresses per chunk."""
    import pyreadstat

    from skipwise.scale.convert import sav_compression

    frame = pd.DataFrame({"id": np.arange(50.0), "v": np.ones(50)})
    for name, opts, code in (("plain.sav", {}, 0), ("rows.sav", {"row_compress": True}, 1),
                             ("z.zsav", {"compress": True}, 2)):
        pyreadstat.write_sav(frame, str(tmp_path / name), **opts)
        assert sav_compression(tmp_path / name) == code, name
    frame.to_csv(tmp_path / "d.csv", index=False)
    assert sav_compression(tmp_path / "d.csv") == 0


def test_the_conversion_says_what_a_sas_file_costs_in_chunks(tmp_path, capsys):
    """A .sas7bdat is not read once in chunks (docs/scale.md, benchmarks/bench_chunk_reread.py): the console
    says so and how to pay less, as for a compressed .sav; a .csv is read once."""
    from skipwise.cli.engine import dask_parts

    sas = Path(__file__).parent / "data" / "staff.sas7bdat"
    frame = pd.DataFrame({"id": np.arange(20.0), "v": np.ones(20)})
    frame.to_csv(tmp_path / "d.csv", index=False)
    for data, said, not_said in ((sas, "a larger --partition-rows", "read once"),
                                 (tmp_path / "d.csv", "read once", "--partition-rows")):
        with dask_parts(data, tmp_path / f"out_{data.stem}", 10) as (parts, _meta, _dtypes):
            assert len(parts) >= 1
        err = capsys.readouterr().err
        assert said in err and not_said not in err, err


def _arrow_file(frame: pd.DataFrame, path: Path, **opts) -> None:
    """``frame`` written by pyarrow itself (no pandas metadata, small row groups), as other tools write."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    pq.write_table(pa.Table.from_pandas(frame, preserve_index=False).replace_schema_metadata(None), path,
                   row_group_size=800, **opts)


@pytest.mark.parametrize("stats", [True, False], ids=["statistics", "no-statistics"])
def test_whole_file_types_of_integer_and_boolean_columns_with_blanks_in_some_row_groups(tmp_path, stats):
    # pandas' own reader of the whole file is the reference for the types: int with blanks -> float64,
    # bool with blanks -> object
    from skipwise.scale.sources import parquet_dtypes, parquet_parts, read_part

    n = 2400
    frame = pd.DataFrame({"id": np.arange(n), "late": pd.array([*range(1000), *[None] * (n - 1000)], "Int64"),
                          "flag": pd.array([True] * 1000 + [None] * (n - 1000), "boolean"),
                          "full": np.arange(n) % 7})
    _arrow_file(frame, tmp_path / "f.parquet", write_statistics=stats)
    parts = parquet_parts(tmp_path / "f.parquet", 800)
    assert parquet_dtypes(parts) == {"late": "float64", "flag": "object"}
    ref = pd.read_parquet(tmp_path / "f.parquet")  # pandas/pyarrow's whole-file types
    got = pd.concat([read_part(p, None, parquet_dtypes(parts)) for p in parts], ignore_index=True)
    assert list(got.dtypes) == list(ref.dtypes)
    assert str(ref["late"].dtype) == "float64" and str(ref["flag"].dtype) == "object"
    assert str(read_part(parts[0], None, parquet_dtypes(parts))["late"].dtype) == "float64"


def test_a_csv_out_from_arrow_written_parquet_equals_the_in_memory_csv(survey, client, tmp_path):
    """An integer column blank only in later partitions: every partition takes the whole file's type, so
    the CSV text is the in-memory engine's (3.0, not 3, in the rows before the first blank)."""
    _, frame, _ = survey
    frame = frame.assign(extra_int=pd.array([*range(1000), *[None] * (len(frame) - 1000)], "Int64"))
    src = tmp_path / "arrow.parquet"
    _arrow_file(frame, src)
    runner = CliRunner()
    mem = runner.invoke(app, ["classify", str(src), "-q", str(DEMO_Q), "-o", str(tmp_path / "m.csv")])
    assert mem.exit_code == 0, mem.output
    dsk = runner.invoke(app, ["classify", str(src), "-q", str(DEMO_Q), "-o", str(tmp_path / "d.csv"),
                              "--engine", "dask", "--scheduler", client.scheduler.address, "--partition-rows", "800"])
    assert dsk.exit_code == 0, dsk.output
    assert (tmp_path / "d.csv").read_bytes() == (tmp_path / "m.csv").read_bytes()
