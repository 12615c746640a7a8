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
    (root / "in" / "weights.yaml").write_text(WEIGHTS, encoding="utf-8")
    (root / "in" / "impute.yaml").write_text(IMPUTE, encoding="utf-8")
    return root


WEIGHTS = """\
format: 1
case_id: case_id
dispositions:
  column: disposition
  categories: {I: [110], P: [120], R: [212]}
base: {probability: sel_prob}
nonresponse: {method: classes, classes: [district], min_respondents: 5}
calibration:
  method: rake
  margins:
    district: {1: 4200, 2: 6100, 3: 6400, 4: 5800}
trimming: {median_multiple: 3.5}
replicates: {method: bootstrap, psu: psu, strata: stratum, count: 6, seed: 7}
output: {prefix: wt_}
"""


IMPUTE = """\
format: 1
imputations: 2
seed: 11
default: {method: hotdeck, classes: [district]}
output: {form: stacked}
"""


def _plan(root: Path, name: str, engine: str, extra: str = "",
          report: str = "{by: [district], weight: wt, fault_rows: 50}", diagnose: str = "false") -> Path:
    text = (f"format: 1\ndata: in/survey.sav\nquestionnaire: in/q.yaml\n"
            f"report: {report}\ndiagnose: {diagnose}\n"
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


def _same_cells(ref: dict, got: dict, abs_tol: float = 1e-9) -> None:
    """Two workbooks' cells (from :func:`_cells`): the same places, number formats and values, numbers
    within 1e-9 relative (DESIGN section 7), ``abs_tol`` absolute."""
    assert ref.keys() == got.keys()
    for key, (value, fmt) in ref.items():
        other, other_fmt = got[key]
        assert fmt == other_fmt, key
        if isinstance(value, float) and isinstance(other, (int, float)):
            assert other == pytest.approx(value, rel=1e-9, abs=abs_tol), key
        else:
            assert other == value, key


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
    # the same bytes: item by item over the whole file, partitions joined in file order
    assert mem.files["faults"].read_bytes() == dask.files["faults"].read_bytes()
    assert len(pd.read_csv(mem.files["faults"])) == mem.manifest["summary"]["routing_faults"] > 0


def test_report_workbook_cells_equal(packages):
    mem, dask = packages
    ref, got = _cells(mem.files["item_report"]), _cells(dask.files["item_report"])
    _same_cells(ref, got, abs_tol=1e-12)


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


# --- stage 2: the weighting step -------------------------------------------------------------------

@pytest.fixture(scope="module")
def weighted(inputs, client):
    extra = "weighting: {plan: in/weights.yaml}\n"
    report = "{by: [district], fault_rows: 50}"  # the report's weight: the run's final weight
    mem = run_plan(_plan(inputs, "wmem", "", extra, report=report))
    dask = run_plan(_plan(inputs, "wdsk", _engine(client), extra, report=report))
    return mem, dask


def test_weights_within_1e_9_and_every_other_cell_equal(weighted):
    mem, dask = weighted
    ref = pd.read_parquet(mem.files["data_parquet"])
    got = pd.read_parquet(dask.files["data_parquet"])
    assert list(got.columns) == list(ref.columns)
    weights = [c for c in ref.columns if c.startswith("wt_")]
    assert "wt_final" in weights and "wt_rep001" in weights and "wt_outcome" in weights
    for col in weights:
        np.testing.assert_allclose(got[col].to_numpy(float), ref[col].to_numpy(float), rtol=1e-9, atol=1e-9,
                                   err_msg=col)
    pd.testing.assert_frame_equal(got.drop(columns=weights), ref.drop(columns=weights))
    assert dask.manifest["summary"]["respondents"] == mem.manifest["summary"]["respondents"]
    assert dask.manifest["summary"]["RR3"] == pytest.approx(mem.manifest["summary"]["RR3"], abs=1e-12)


@pytest.mark.parametrize("role", ["weighting_workbook", "item_report"])
def test_weighted_workbooks_cells_equal(weighted, role):
    mem, dask = weighted
    ref, got = _cells(mem.files[role]), _cells(dask.files[role])
    _same_cells(ref, got)


@pytest.mark.parametrize("role", ["codebook_md", "codebook_html", "codebook_xml"])
def test_weighted_codebook_text_equal(weighted, role):
    mem, dask = weighted
    ref = mem.files[role].read_text(encoding="utf-8")
    assert "wt_final" in ref
    got = dask.files[role].read_text(encoding="utf-8").replace("wdsk.yaml", "wmem.yaml")
    if role != "codebook_xml":
        assert got == ref
        return
    # The DDI XML writes a weight's minimum and maximum with 12 significant digits, and the two
    # engines' weights agree within 1e-9 (DESIGN section 7), not bit for bit: the text is compared
    # with every number within 1e-9 (relative), everything else character for character.
    import re

    split = re.compile(r"(-?\d+(?:\.\d+)?)")
    a, b = split.split(ref), split.split(got)
    assert len(a) == len(b)
    assert a[0::2] == b[0::2]
    for x, y in zip(a[1::2], b[1::2]):
        assert float(y) == pytest.approx(float(x), rel=1e-9, abs=1e-9), (x, y)
    assert sum(x != y for x, y in zip(a[1::2], b[1::2])) < 10  # only a few weight figures differ at all


def test_weighted_manifest_lists_every_file(weighted):
    _, dask = weighted
    listed = {o["file"] for o in dask.manifest["outputs"]}
    assert "weighting.xlsx" in listed
    assert {p.name for p in dask.folder.iterdir()} == listed | {"manifest.json"}


#: The interview split (share of the questionnaire's applicable items answered) and estimates from
#: the answered cells only: both need the run's questionnaire, which the dask run passes to weigh.
SPLIT_ESTIMATES = WEIGHTS.replace(
    "  categories: {I: [110], P: [120], R: [212]}\n",
    "  categories: {I: [110], P: [120], R: [212]}\n"
    "  interview_split: {applies_to: [I, P], breakoff_below: 0.5, complete_above: 0.95, breakoff_to: R}\n",
) + "estimates: {means: [hh_size, income], proportions: [tenure]}\n"


def test_interview_split_and_estimates_equal_the_in_memory_run(inputs, client):
    assert "interview_split" in SPLIT_ESTIMATES
    (inputs / "in" / "split.yaml").write_text(SPLIT_ESTIMATES, encoding="utf-8")
    extra = "weighting: {plan: in/split.yaml}\n"
    report = "{by: [district], fault_rows: 50}"
    mem = run_plan(_plan(inputs, "smem", "", extra, report=report))
    dask = run_plan(_plan(inputs, "sdsk", _engine(client), extra, report=report))
    ref = pd.read_parquet(mem.files["data_parquet"])
    got = pd.read_parquet(dask.files["data_parquet"])
    # the split moved completes (disposition 110) with under 95% of their items answered to partial
    assert ref.loc[ref["disposition"] == 110, "wt_outcome"].nunique() == 2
    pd.testing.assert_series_equal(got["wt_outcome"], ref["wt_outcome"])
    for col in [c for c in ref.columns if c.startswith("wt_") and c != "wt_outcome"]:
        np.testing.assert_allclose(got[col].to_numpy(float), ref[col].to_numpy(float), rtol=1e-9, atol=1e-9,
                                   err_msg=col)
    assert dask.manifest["summary"]["RR3"] == pytest.approx(mem.manifest["summary"]["RR3"], abs=1e-12)
    ref_cells, got_cells = _cells(mem.files["weighting_workbook"]), _cells(dask.files["weighting_workbook"])
    estimates = {k: v for k, v in ref_cells.items() if k[0] == "Estimates"}
    assert any(v[0] == "income" for v in estimates.values())  # the estimates sheet is there, with income
    _same_cells(ref_cells, got_cells)


# --- stage 3: diagnose and impute on gathered columns ----------------------------------------------

class _Recorder:
    def __init__(self):
        self.lines: list[str] = []

    def step(self, name, text):
        pass

    def info(self, text):
        self.lines.append(text)

    def progress(self, label, length):
        import contextlib

        return contextlib.nullcontext(lambda n: None)


@pytest.fixture(scope="module")
def gathered(inputs, client):
    extra = "weighting: {plan: in/weights.yaml}\nimputation: {plan: in/impute.yaml}\n"
    diagnose = "{aux: [district, stratum, interview_mode]}"
    mem = run_plan(_plan(inputs, "gmem", "", extra, diagnose=diagnose))
    rec = _Recorder()
    dask = run_plan(_plan(inputs, "gdsk", _engine(client), extra, diagnose=diagnose), reporter=rec)
    return mem, dask, rec.lines


def test_diagnostics_and_imputed_file_equal_the_in_memory_run(gathered):
    mem, dask, lines = gathered
    ref, got = _cells(mem.files["diagnostics"]), _cells(dask.files["diagnostics"])
    _same_cells(ref, got, abs_tol=1e-12)
    from skipwise.io import read_survey

    assert mem.files["imputed_1"].suffix == ".sav"  # the input's format: written on the client
    ref = read_survey(mem.files["imputed_1"])
    got = read_survey(dask.files["imputed_1"])
    weights = [c for c in ref.columns if c.startswith("wt_")]
    assert weights and list(got.columns) == list(ref.columns) and len(got) == 2 * 2249
    pd.testing.assert_frame_equal(got.drop(columns=weights), ref.drop(columns=weights))
    np.testing.assert_allclose(got[weights].to_numpy(float), ref[weights].to_numpy(float), rtol=1e-9, atol=1e-9)
    # the console says what was gathered: only the diagnostics' columns, the whole file for imputation
    notes = [x for x in lines if "gathered" in x]
    assert any(x.startswith("note: diagnose runs in memory") and "interview_mode" in x for x in notes)
    assert any(x.startswith("note: impute runs in memory") and "weight column(s)" in x for x in notes)


def test_a_gather_over_the_budget_is_refused_with_the_plan_line(inputs, client, monkeypatch):
    from skipwise.pipeline.run import StepFailed

    monkeypatch.setenv("SKIPWISE_GATHER_BUDGET", "1000")
    path = _plan(inputs, "gbig", _engine(client), diagnose="{aux: [district]}")
    with pytest.raises(StepFailed) as err:
        run_plan(path)
    text = str(err.value)
    line = next(i + 1 for i, t in enumerate(path.read_text().splitlines()) if t.startswith("diagnose:"))
    assert err.value.step == "diagnose"
    assert f"gbig.yaml:{line}" in text and "SKIPWISE_GATHER_BUDGET" in text and "diagnose: false" in text
    assert not (inputs / "gbig").exists()


def test_inputs_the_dask_engine_cannot_read_are_refused(inputs, client):
    from skipwise.errors import SkipwiseError
    from skipwise.pipeline.plan import load_run_plan

    (inputs / "in" / "book.xlsx").write_bytes(b"")  # only its name is looked at
    path = _plan(inputs, "xl", _engine(client))
    path.write_text(path.read_text().replace("in/survey.sav", "in/book.xlsx"))
    with pytest.raises(SkipwiseError) as err:
        load_run_plan(path)
    assert "xl.yaml:2" in str(err.value) and ".xlsx" in str(err.value)


class _Said:
    """A reporter that keeps what the run says."""

    def __init__(self):
        self.lines: list[str] = []

    def step(self, name, text):
        pass

    def info(self, text):
        self.lines.append(text)

    def progress(self, label, length):
        import contextlib

        return contextlib.nullcontext(lambda k: None)


def test_engine_auto_picks_dask_only_over_the_budget_and_for_outputs_it_writes_alike(inputs, client, packages,
                                                                                   monkeypatch):
    """DESIGN section 7: auto chooses dask above the memory budget for outputs that allow it, says so,
    and never changes the form of the output (a .sav status file keeps the run in memory)."""
    from skipwise.engine_spec import MEMORY_BUDGET_ENV

    auto = f"engine: {{kind: auto, scheduler: '{client.scheduler.address}', partition_rows: 800}}\n"
    said = _Said()
    fits = run_plan(_plan(inputs, "afit", auto), reporter=said)  # a 2,400-case file fits any machine
    assert fits.manifest["plan"]["engine"]["kind"] == "memory"
    assert not any("engine: auto" in line for line in said.lines)
    monkeypatch.setenv(MEMORY_BUDGET_ENV, "1000")  # 1 kB: over the budget
    said = _Said()
    over = run_plan(_plan(inputs, "aover", auto), reporter=said)  # status_columns: parquet and csv
    assert over.manifest["plan"]["engine"]["kind"] == "dask"
    assert any("engine: auto" in line and "using the dask engine" in line for line in said.lines), said.lines
    _, dask = packages  # the same plan run with engine: dask
    pd.testing.assert_frame_equal(pd.read_parquet(over.files["data_parquet"]),
                                  pd.read_parquet(dask.files["data_parquet"]))
    said = _Said()
    path = _plan(inputs, "asav", auto)
    path.write_text(path.read_text().replace("status_columns: [parquet, csv]", "status_columns: [input]"))
    kept = run_plan(path, reporter=said)  # a .sav status file: the dask engine does not write it
    assert kept.manifest["plan"]["engine"]["kind"] == "memory"
    assert any("writes Parquet or CSV only" in line and "in-memory engine" in line for line in said.lines), \
        said.lines
    assert (kept.folder / "survey.sav").exists()


# --- a separate weighting file: the demo scenario's sample file --------------------------------------

@pytest.fixture(scope="module")
def sampled(tmp_path_factory, client):
    """The demo's own plan (interviews .sav, every sampled address in sample_with_answers.parquet as the
    weighting file), run in memory and on the dask engine with the outputs both engines write."""
    import yaml

    from skipwise.demo import generate
    from skipwise.demo.plan import write_demo_plans

    root = tmp_path_factory.mktemp("run-dask-sample")
    scenario = generate()
    scenario.write(root / "data")
    doc = yaml.safe_load(write_demo_plans(scenario, root).read_text(encoding="utf-8"))
    doc["output"] = {"folder": "mem", "name": "survey", "status_columns": ["parquet", "csv"],
                     "timestamp": "2026-06-30T12:00:00"}
    doc["diagnose"] = False
    doc.pop("imputation")
    doc["report"]["fault_rows"] = 50
    (root / "mem.yaml").write_text(yaml.safe_dump(doc), encoding="utf-8")
    doc["output"]["folder"] = "dsk"
    doc["engine"] = {"kind": "dask", "scheduler": client.scheduler.address, "partition_rows": 800}
    (root / "dsk.yaml").write_text(yaml.safe_dump(doc), encoding="utf-8")
    said = _Said()
    dask = run_plan(root / "dsk.yaml", reporter=said)
    return run_plan(root / "mem.yaml"), dask, said


def test_a_separate_weighting_file_gives_the_in_memory_weights(sampled):
    mem, dask, said = sampled
    assert dask.manifest["engine"]["partitions"] == 3  # 2,249 interviews in parts of 800
    assert any("read on the client" in line for line in said.lines), said.lines
    ref, got = pd.read_parquet(mem.files["data_parquet"]), pd.read_parquet(dask.files["data_parquet"])
    assert list(got.columns) == list(ref.columns)
    made = [c for c in ref.columns if c.startswith("wt_")]
    assert {"wt_final", "wt_rep001", "age_band"} <= set(ref.columns)  # weights and a derived margin variable
    for col in made:
        np.testing.assert_allclose(got[col].to_numpy(float), ref[col].to_numpy(float), rtol=1e-9, atol=1e-9,
                                   err_msg=col)
    pd.testing.assert_frame_equal(got.drop(columns=made), ref.drop(columns=made))
    # the weighted weighting file (every sampled address), as in memory
    w_ref = pd.read_parquet(mem.files["weighted_frame"])
    w_got = pd.read_parquet(dask.files["weighted_frame"])
    assert len(w_ref) == 5000 and list(w_got.columns) == list(w_ref.columns)
    pd.testing.assert_frame_equal(w_got, w_ref, check_exact=False, rtol=1e-9, atol=1e-9)
    assert dask.manifest["summary"]["RR3"] == pytest.approx(mem.manifest["summary"]["RR3"], abs=1e-12)


@pytest.mark.parametrize("role", ["weighting_workbook", "item_report"])
def test_a_separate_weighting_file_gives_the_in_memory_workbooks(sampled, role):
    mem, dask, _ = sampled
    ref, got = _cells(mem.files[role]), _cells(dask.files[role])
    _same_cells(ref, got)


def test_a_weighting_file_over_the_gather_budget_is_refused_with_its_line(sampled, monkeypatch):
    from skipwise.errors import SkipwiseError
    from skipwise.scale.weigh import GATHER_BUDGET_ENV

    mem, dask, _ = sampled
    plan = Path(dask.manifest["plan"]["file"])
    monkeypatch.setenv(GATHER_BUDGET_ENV, "1000")
    doc = plan.read_text(encoding="utf-8").replace("folder: dsk", "folder: over")
    (plan.parent / "over.yaml").write_text(doc, encoding="utf-8")
    with pytest.raises(SkipwiseError) as err:
        run_plan(plan.parent / "over.yaml")
    text = str(err.value)
    assert "over.yaml:" in text and "weighting.data" in text and GATHER_BUDGET_ENV in text
    assert not (plan.parent / "over").exists()


@pytest.mark.parametrize("role", ["codebook_md", "codebook_html"])
def test_a_separate_weighting_file_gives_the_in_memory_codebook(sampled, role):
    mem, dask, _ = sampled
    ref = mem.files[role].read_text(encoding="utf-8")
    assert "wt_final" in ref and "age_band" in ref
    assert dask.files[role].read_text(encoding="utf-8").replace("dsk.yaml", "mem.yaml") == ref


def test_the_manifest_summary_has_the_in_memory_keys(gathered):
    mem, dask, _ = gathered
    ref, got = mem.manifest["summary"], dask.manifest["summary"]
    assert ref["imputations"] == got["imputations"] == 2
    assert set(got) - set(ref) == {"engine", "partitions"}  # the dask run also names its engine
    assert set(ref) <= set(got)


def test_interviews_missing_from_the_weighting_file_get_blank_weights_as_in_memory(sampled):
    """Interviews the weighting file lacks get blank weights (a note); the report counts them as weight 0,
    as the in-memory run does, instead of refusing the run's own weight."""
    mem, dask, _ = sampled
    root = Path(dask.manifest["plan"]["file"]).parent
    sample = pd.read_parquet(root / "data" / "sample_with_answers.parquet")
    interviews = pd.read_parquet(mem.files["data_parquet"])["case_id"]
    short = sample[~sample["case_id"].isin(interviews.iloc[[3, 900, 1700, 2100]])]
    assert len(short) == len(sample) - 4
    short.to_parquet(root / "data" / "sample_short.parquet", index=False)
    runs = {}
    for name in ("mem", "dsk"):
        text = (root / f"{name}.yaml").read_text(encoding="utf-8")
        text = text.replace("sample_with_answers.parquet", "sample_short.parquet").replace(
            f"folder: {name}", f"folder: short_{name}")
        (root / f"short_{name}.yaml").write_text(text, encoding="utf-8")
        runs[name] = run_plan(root / f"short_{name}.yaml")
    got = pd.read_parquet(runs["dsk"].files["data_parquet"])
    ref = pd.read_parquet(runs["mem"].files["data_parquet"])
    assert int(got["wt_final"].isna().sum()) == int(ref["wt_final"].isna().sum()) == 4
    np.testing.assert_allclose(got["wt_final"].to_numpy(float), ref["wt_final"].to_numpy(float), rtol=1e-9,
                               atol=1e-9)
    ref_cells, got_cells = _cells(runs["mem"].files["item_report"]), _cells(runs["dsk"].files["item_report"])
    _same_cells(ref_cells, got_cells)
