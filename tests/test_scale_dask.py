"""The dask engine against the in-memory engine on the same rows (DESIGN: files larger than memory).

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
    faults = _read_parts(tmp_path / "out_faults").astype(str)
    mem_faults = cl.faults.astype(str)
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


def test_cli_refuses_single_file_outputs_and_non_parquet_input(survey, tmp_path):
    root, frame, _ = survey
    runner = CliRunner()
    res = runner.invoke(app, ["classify", str(root / "parts"), "-q", str(DEMO_Q), "-o", str(tmp_path / "x.sav"),
                              "--engine", "dask"])
    assert res.exit_code == 1 and "writes Parquet parts into a folder" in res.output
    csv = tmp_path / "d.csv"
    frame.head(5).to_csv(csv, index=False)
    res = runner.invoke(app, ["classify", str(csv), "-q", str(DEMO_Q), "-o", str(tmp_path / "o"),
                              "--engine", "dask", "--scheduler", "tcp://127.0.0.1:1"])
    assert res.exit_code == 1 and "Parquet input only" in res.output and "Traceback" not in res.output
    assert not (tmp_path / "o").exists()


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
    finally:
        for p in procs:
            p.terminate()
        for p in procs:
            try:
                p.wait(timeout=20)
            except subprocess.TimeoutExpired:
                p.kill()
