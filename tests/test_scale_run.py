"""``skipwise run`` with ``engine: dask`` against the in-memory run on the same rows (docs/scale.md).

The in-memory engine is the audited reference (its figures are checked against published
formulas and reference libraries in the other test files): the dask run must give the same
statuses cell for cell, the same report workbook cells, the same codebook text, weights within
1e-9, and a manifest listing every file of its package.  The cluster is a LocalCluster of two
workers bound to 127.0.0.1 on free ports (the scale tests' fixture), stopped at the end.
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

pytest.importorskip("distributed")

from skipwise.demo import generate  # noqa: E402
from skipwise.io import write_survey  # noqa: E402
from skipwise.pipeline.run import run_plan  # noqa: E402

DEMO_Q = Path(__file__).parents[1] / "src/skipwise/demo/marrowby-2026.yaml"


@pytest.fixture(scope="module")
def inputs(tmp_path_factory):
    """The demo's invented interviews as a .sav (converted to 3 partitions of 800 rows by the dask run)."""
    from skipwise.classify.delivery import delivery_meta
    from skipwise.io import get_meta
    from skipwise.questionnaire import load_questionnaire

    root = tmp_path_factory.mktemp("run-dask")
    (root / "in").mkdir()
    frame = generate().interviews
    # a weight rounded to 1/8 so that sums, means and standard deviations format stably
    frame = frame.assign(wt=np.round(8.0 / frame["sel_prob"]) / 8.0)
    q = load_questionnaire(DEMO_Q)
    write_survey(frame, root / "in" / "survey.sav", delivery_meta(get_meta(frame), q, frame))
    (root / "in" / "q.yaml").write_text(DEMO_Q.read_text(encoding="utf-8"), encoding="utf-8")
    return root


def _plan(root: Path, name: str, engine: str, extra: str = "") -> Path:
    text = (f"format: 1\ndata: in/survey.sav\nquestionnaire: in/q.yaml\n"
            "report: {by: [district], weight: wt, fault_rows: 50}\ndiagnose: false\n"
            f"output: {{folder: {name}, name: survey, status_columns: [parquet, csv], timestamp: '2026-06-30T12:00:00'}}\n"
            f"{engine}{extra}")
    path = root / f"{name}.yaml"
    path.write_text(text, encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def client():
    # a LocalCluster of two worker processes on 127.0.0.1, free ports (as in test_scale_dask.py)
    from skipwise.scale import dask_client

    with dask_client(workers=2) as c:
        yield c


def _engine(client) -> str:
    return f"engine: {{kind: dask, scheduler: '{client.scheduler.address}', partition_rows: 800}}\n"


@pytest.fixture(scope="module")
def packages(inputs, client):
    mem = run_plan(_plan(inputs, "mem", ""))
    dask = run_plan(_plan(inputs, "dsk", _engine(client)))
    return mem, dask


def _cells(path: Path) -> dict:
    import openpyxl

    wb = openpyxl.load_workbook(path)
    return {(ws.title, cell.coordinate): (cell.value, cell.number_format)
            for ws in wb.worksheets for row in ws.iter_rows() for cell in row if cell.value is not None}


def test_the_dask_run_used_three_partitions(packages):
    _, dask = packages
    assert dask.manifest["engine"] == {"kind": "dask", "partitions": 3, "partition_rows": 800}
    assert dask.manifest["summary"]["cases"] == 2249


def test_statuses_and_data_cell_for_cell(packages):
    mem, dask = packages
    ref = pd.read_parquet(mem.files["data_parquet"])
    got = pd.read_parquet(dask.files["data_parquet"])
    pd.testing.assert_frame_equal(got, ref)
    assert any(c.endswith("_status") for c in got.columns)
    assert mem.files["data_csv"].read_bytes() == dask.files["data_csv"].read_bytes()


def test_fault_listing_equal(packages):
    mem, dask = packages
    # the same rows and header; the dask listing is partition by partition (docs/scale.md), the
    # in-memory one item by item over the whole file
    ref = mem.files["faults"].read_text(encoding="utf-8").splitlines()
    got = dask.files["faults"].read_text(encoding="utf-8").splitlines()
    assert got[0] == ref[0] and sorted(got[1:]) == sorted(ref[1:])
    assert len(pd.read_csv(mem.files["faults"])) == mem.manifest["summary"]["routing_faults"] > 0


def test_report_workbook_cells_equal(packages):
    mem, dask = packages
    ref, got = _cells(mem.files["item_report"]), _cells(dask.files["item_report"])
    assert ref.keys() == got.keys()
    for key, (value, fmt) in ref.items():
        other, other_fmt = got[key]
        assert fmt == other_fmt, key
        if isinstance(value, float) and isinstance(other, (int, float)):
            assert other == pytest.approx(value, rel=1e-9, abs=1e-12), key
        else:
            assert other == value, key


@pytest.mark.parametrize("role", ["codebook_md", "codebook_html", "codebook_xml"])
def test_codebook_text_equal(packages, role):
    mem, dask = packages
    ref = mem.files[role].read_text(encoding="utf-8")
    assert "standard deviation" in ref or "stdev" in ref  # the statistics are there to compare
    # the one difference: the package names the plan file it was made by
    assert dask.files[role].read_text(encoding="utf-8").replace("dsk.yaml", "mem.yaml") == ref


def test_manifest_lists_every_file_with_its_hash(packages):
    _, dask = packages
    listed = {o["file"]: o["sha256"] for o in dask.manifest["outputs"]}
    present = {p.name for p in dask.folder.iterdir()}
    assert present == set(listed) | {"manifest.json"}
    for name, sha in listed.items():
        assert hashlib.sha256((dask.folder / name).read_bytes()).hexdigest() == sha, name
    on_disk = json.loads((dask.folder / "manifest.json").read_text(encoding="utf-8"))
    assert on_disk["outputs"] == dask.manifest["outputs"]


def test_pairwise_merge_of_moments_equals_numpy_on_the_whole_column():
    # Chan, Golub and LeVeque (1979) pairwise update against numpy's two-pass mean and
    # sample standard deviation (ddof=1) of the whole column
    from skipwise.scale.colstats import merge_moments, part_moments

    rng = np.random.default_rng(5)
    x = np.concatenate([rng.normal(1e6, 3.0, 700), [np.nan, np.inf], rng.normal(1e6, 40.0, 3), []])
    pieces = np.split(x, [1, 300, 701])  # uneven, one with a single value
    m = part_moments(pieces[0])
    for p in pieces[1:]:
        m = merge_moments(m, part_moments(p))
    valid = x[np.isfinite(x)]
    got = m.moments()
    assert got.n == len(valid) == 703
    assert got.mean == pytest.approx(valid.mean(), rel=1e-12)
    assert got.sd == pytest.approx(valid.std(ddof=1), rel=1e-9)
    assert (got.min, got.max) == (valid.min(), valid.max())
