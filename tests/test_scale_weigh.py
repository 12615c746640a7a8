"""``weigh`` on the dask engine against the in-memory engine on the same rows (docs/scale.md).

Identity (docs/scale.md): outcome counts exactly, rates and weights within 1e-9, the workbook's cells
equal (text exactly, numbers within 1e-9 and the same number format). The in-memory weighting is
itself checked against published formulas in tests/test_weighting_*.py; here one closed form is
also checked on the cluster's own output (post-stratification, Holt & Smith 1979). Invented data;
the cluster binds to 127.0.0.1 on free ports and is stopped at the end of the module.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from openpyxl import load_workbook
from typer.testing import CliRunner

pytest.importorskip("distributed")

from skipwise.cli import app  # noqa: E402
from skipwise.errors import SkipwiseError  # noqa: E402
from skipwise.io import write_survey  # noqa: E402
from skipwise.scale import dask_client  # noqa: E402
from skipwise.scale.sources import parquet_parts  # noqa: E402
from skipwise.scale.weigh_replicates import weigh_on_cluster  # noqa: E402
from skipwise.weighting.plan import load_plan  # noqa: E402
from skipwise.weighting.weigh import weigh  # noqa: E402
from skipwise.weighting.workbook import write_workbook  # noqa: E402

HEAD = """\
format: 1
case_id: rid
dispositions:
  column: dispo
  categories: {I: [110], P: [120], R: [210], NC: [220], O: [230], UH: [310], UO: [390], NE: [410]}
base:
  probability: p_sel
"""
MARGINS = """\
  tolerance: 1.0e-8
  margins:
    region: {north: 6000, south: 4000}
    agegrp: {young: 3000, mid: 4000, old: 3000}
"""
PLANS = {
    # classes with collapsing, raking, trimming at k x median (re-raked)
    "rake-trim": HEAD + """\
eligibility: {classes: [region]}
nonresponse: {method: classes, classes: [region, agegrp], min_respondents: 40, max_factor: 3.0}
calibration:
  method: rake
""" + MARGINS + """\
trimming: {median_multiple: 2.5}
""",
    # raking in every replicate of a stratified jackknife, with the full sample's collapsed classes
    "rake-jkn": HEAD + """\
nonresponse: {method: classes, classes: [region, agegrp], min_respondents: 40}
calibration:
  method: rake
""" + MARGINS + """\
replicates: {method: jackknife, psu: psu, strata: stratum}
estimates: {means: [age], proportions: [agegrp, note]}
""",
    # post-stratification, percentile trimming, Rao-Wu bootstrap with its seed, PSUs without strata
    "poststratify-bootstrap": HEAD + """\
nonresponse: {method: classes, classes: [agegrp]}
calibration:
  method: poststratify
  margins:
    agegrp: {young: 3000, mid: 4000, old: 3000}
trimming: {percentile: 97}
replicates: {method: bootstrap, psu: psu, count: 6, seed: 7}
""",
    # linear calibration to margins and a numeric total, no trimming, JK1 with the fpc
    "linear-jk1": HEAD + """\
nonresponse: {method: classes, classes: [region]}
calibration:
  method: linear
""" + MARGINS + """\
  totals: {age: 540000}
replicates: {method: jackknife, psu: psu, fpc: true, fraction: frac}
""",
    # trimming without calibration: the excess is spread over the cases below the cap
    "trim-spread": HEAD + """\
nonresponse: {method: classes, classes: [region, agegrp]}
trimming: {median_multiple: 1.8}
""",
    # bounded logit calibration (the calibration matrix is gathered)
    "logit": HEAD + """\
nonresponse: {method: classes, classes: [region]}
calibration:
  method: logit
  bounds: [0.3, 3.0]
""" + MARGINS,
    # propensity classes (the covariates are gathered), raking
    "propensity-classes": HEAD + """\
nonresponse: {method: propensity, covariates: [agegrp, age], propensity_use: classes, propensity_classes: 4}
calibration:
  method: rake
""" + MARGINS,
    # inverse propensity with bootstrap replicates: each replicate refits the model
    "propensity-inverse": HEAD + """\
nonresponse: {method: propensity, covariates: [region, age]}
replicates: {method: bootstrap, psu: psu, strata: stratum, count: 4, seed: 3}
""",
}


def make_frame(n: int = 900, seed: int = 11) -> pd.DataFrame:
    """An invented sample file: dispositions, selection probabilities, strata and PSUs."""
    rng = np.random.default_rng(seed)
    region = rng.choice(["north", "south"], n, p=[0.55, 0.45])
    dispo = rng.choice([110, 120, 210, 220, 230, 310, 390, 410], n,
                       p=[0.45, 0.05, 0.15, 0.1, 0.03, 0.07, 0.05, 0.1])
    return pd.DataFrame({
        "rid": np.arange(1, n + 1), "dispo": dispo, "region": region,
        "agegrp": rng.choice(["young", "mid", "old"], n), "age": rng.integers(18, 90, n).astype(float),
        "p_sel": np.where(region == "north", 0.1, 0.08) * rng.uniform(0.6, 1.4, n).clip(max=1 / 0.14),
        "stratum": np.where(region == "north", 1, 2),
        "psu": rng.integers(0, 3, n) + np.where(region == "north", 0, 10),
        "frac": np.full(n, 0.02), "note": rng.choice(["a", "b", None], n),
    })


@pytest.fixture(scope="module")
def data(tmp_path_factory):
    root = tmp_path_factory.mktemp("weigh")
    frame = make_frame()
    parts = root / "parts"
    parts.mkdir()
    # uneven parts, so PSUs and classes span partitions
    for i, rows in enumerate(np.split(np.arange(len(frame)), [250, 610])):
        write_survey(frame.iloc[rows].reset_index(drop=True), parts / f"sample-{i}.parquet")
    return root, frame


@pytest.fixture(scope="module")
def client():
    with dask_client(workers=2) as c:
        yield c


def _parts(folder: Path) -> pd.DataFrame:
    return pd.concat([pd.read_parquet(p) for p in sorted(folder.glob("part-*.parquet"))], ignore_index=True)


def _cells(path: Path) -> dict:
    wb = load_workbook(path)
    return {(ws.title, c.coordinate): (c.value, c.number_format)
            for ws in wb.worksheets for row in ws.iter_rows() for c in row if c.value is not None}


def _assert_same_workbook(a: Path, b: Path) -> None:
    ca, cb = _cells(a), _cells(b)
    assert ca.keys() == cb.keys()
    for key, (va, fa) in ca.items():
        vb, fb = cb[key]
        assert fa == fb, key
        if isinstance(va, (int, float)) and isinstance(vb, (int, float)):
            assert va == pytest.approx(vb, rel=1e-9, abs=1e-9), key
        else:
            assert va == vb, key


@pytest.mark.parametrize("name", list(PLANS))
def test_weights_rates_and_workbook_equal_the_in_memory_engine(data, client, tmp_path, name):
    root, frame = data
    plan = load_plan(text=PLANS[name])
    mem = weigh(frame, plan)
    notes: list[str] = []
    res = weigh_on_cluster(root / "parts", plan, tmp_path / "out", client=client, parts=parquet_parts(root / "parts"),
                           note=notes.append)
    got = _parts(tmp_path / "out")
    assert list(got.columns) == list(mem.data.columns)
    assert res.weight_columns == mem.weight_columns
    assert (got[f"{plan.prefix}outcome"].to_numpy() == mem.data[f"{plan.prefix}outcome"].to_numpy()).all()
    weights = list(mem.weight_columns[1:])
    np.testing.assert_allclose(got[weights].to_numpy(), mem.data[weights].to_numpy(), rtol=0, atol=1e-9)
    pd.testing.assert_frame_equal(got[list(frame.columns)], mem.data[list(frame.columns)], check_dtype=False)
    assert res.counts == mem.counts                       # counts exactly
    for key, value in mem.rates.items():
        if isinstance(value, float):
            assert res.rates[key] == pytest.approx(value, abs=1e-9, nan_ok=True)
            assert res.rates_weighted[key] == pytest.approx(mem.rates_weighted[key], abs=1e-9, nan_ok=True)
    if not mem.estimates.empty:
        pd.testing.assert_frame_equal(res.estimates, mem.estimates, check_exact=False, rtol=0, atol=1e-9)
    assert res.estimates.empty == mem.estimates.empty
    write_workbook(mem, tmp_path / "mem.xlsx")
    write_workbook(res, tmp_path / "dask.xlsx")
    _assert_same_workbook(tmp_path / "mem.xlsx", tmp_path / "dask.xlsx")
    gathered = "logit" in name or "propensity" in name
    assert bool(notes) == gathered and all("gathered to the client" in n for n in notes)


def test_poststratified_weights_meet_the_closed_form(data, client, tmp_path):
    # Holt & Smith (1979): w = d * N_h / N^_h, with N^_h the sum of the starting weights d in category h
    root, _ = data
    plan = load_plan(text=HEAD + "calibration:\n  method: poststratify\n  margins:\n"
                                 "    region: {north: 6000, south: 4000}\n")
    weigh_on_cluster(root / "parts", plan, tmp_path / "ps", client=client, parts=parquet_parts(root / "parts"))
    got = _parts(tmp_path / "ps")
    resp = got["wt_outcome"].isin([1, 2])  # I and P (docs/weighting.md: outcome numbers 1-8)
    for h, n_h in (("north", 6000), ("south", 4000)):
        sel = resp & (got["region"] == h)
        d = got.loc[sel, "wt_nonresponse"]
        np.testing.assert_allclose(got.loc[sel, "wt_final"], d * n_h / d.sum(), rtol=1e-12)
        assert got.loc[sel, "wt_final"].sum() == pytest.approx(n_h, rel=1e-12)


def test_gathering_beyond_the_budget_is_refused(data, client, tmp_path, monkeypatch):
    root, _ = data
    monkeypatch.setenv("SKIPWISE_GATHER_BUDGET", "1000")
    with pytest.raises(SkipwiseError, match="memory budget") as err:
        weigh_on_cluster(root / "parts", load_plan(text=PLANS["logit"]), tmp_path / "x", client=client,
                         parts=parquet_parts(root / "parts"))
    assert "SKIPWISE_GATHER_BUDGET" in str(err.value)
    assert not (tmp_path / "x").exists()


def test_bad_data_problems_are_collected_over_all_partitions(data, client, tmp_path):
    root, frame = data
    bad = frame.copy()
    bad.loc[[3, 700], "p_sel"] = 0.0        # one bad probability in the first part, one in the last
    bad.loc[800, "dispo"] = 999             # a disposition the plan does not map
    folder = tmp_path / "bad"
    folder.mkdir()
    for i, rows in enumerate(np.split(np.arange(len(bad)), [250, 610])):
        write_survey(bad.iloc[rows].reset_index(drop=True), folder / f"b-{i}.parquet")
    plan = PLANS["trim-spread"] + "calibration:\n  method: rake\n  margins:\n    regoin: {north: 1}\n"
    with pytest.raises(SkipwiseError) as err:
        weigh_on_cluster(folder, load_plan(text=plan), tmp_path / "o", client=client, parts=parquet_parts(folder))
    text = str(err.value)
    assert text.count("not mapped") == 1      # one problem per disposition, counted over the file
    assert "2 case(s) have a missing, non-numeric or out-of-range selection probability" in text
    assert "[4, 701]" in text                 # their case ids
    assert "disposition '999' (1 case(s)) is not mapped" in text
    assert "margin variable 'regoin' is not a column of the data" in text and "region" in text


def test_cli_weighs_on_the_cluster_and_refuses_what_it_cannot_do(data, client, tmp_path):
    root, frame = data
    plan = tmp_path / "plan.yaml"
    plan.write_text(PLANS["trim-spread"], encoding="utf-8")
    runner = CliRunner()
    out = tmp_path / "weighted"
    res = runner.invoke(app, ["weigh", str(root / "parts"), "-p", str(plan), "-o", str(out), "--engine", "dask",
                              "--scheduler", client.scheduler.address])
    assert res.exit_code == 0, res.output
    assert "weighted 900 cases in 3 partitions" in res.output and "caution:" in res.output
    assert (tmp_path / "weighted_weights.xlsx").exists() and len(list(out.glob("part-*.parquet"))) == 3
    mem = weigh(frame, load_plan(plan))
    np.testing.assert_allclose(_parts(out)["wt_final"], mem.final, atol=1e-9)
    res = runner.invoke(app, ["weigh", str(root / "parts"), "-p", str(plan), "-o", str(tmp_path / "w.sav"),
                              "--engine", "dask"])
    assert res.exit_code == 1 and "OUT names a folder" in res.output and "Traceback" not in res.output
    split = tmp_path / "split.yaml"
    split.write_text(PLANS["trim-spread"].replace("  column: dispo\n", "  column: dispo\n  interview_split: {}\n"),
                     encoding="utf-8")
    res = runner.invoke(app, ["weigh", str(root / "parts"), "-p", str(split), "-o", str(tmp_path / "e"),
                              "--engine", "dask"])
    # as in memory: an interview split needs the questionnaire (the share of items answered)
    assert res.exit_code == 1 and "interview" in res.output and not (tmp_path / "e").exists()
    assert "pass -q QUESTIONNAIRE" in res.output and "Traceback" not in res.output


@pytest.mark.parametrize("ext", [".sav", ".csv"])
def test_a_chunked_sav_or_csv_weighs_as_in_memory(data, client, tmp_path, ext):
    """A .sav written by pyreadstat (or a CSV by pandas), converted in chunks of 250 rows: the in-memory
    engine's weights to 1e-9, its outcomes and its data cells in the whole file's column types (pandas' own
    comparison; in the CSV the first chunks read 'age' as whole numbers, the last as decimals)."""
    import pyreadstat

    from skipwise.io import read_survey

    _, frame = data
    sav_frame = frame.copy()
    sav_frame.loc[899, "age"] = 40.5   # whole numbers in the first chunks, a decimal in the last
    src = tmp_path / f"sample{ext}"
    if ext == ".sav":
        pyreadstat.write_sav(sav_frame, str(src), row_compress=True)
    else:
        sav_frame.to_csv(src, index=False, float_format="%.17g")
    plan_file = tmp_path / "plan.yaml"
    plan_file.write_text(PLANS["rake-jkn"], encoding="utf-8")
    before = src.read_bytes()
    out = tmp_path / "weighted"
    res = CliRunner().invoke(app, ["weigh", str(src), "-p", str(plan_file), "-o", str(out), "--engine", "dask",
                                   "--scheduler", client.scheduler.address, "--partition-rows", "250"])
    assert res.exit_code == 0, res.output
    assert "weighted 900 cases in 4 partitions" in res.output
    assert src.read_bytes() == before and not list(tmp_path.glob(".skipwise-parts-*"))  # scratch removed
    mem = weigh(read_survey(src), load_plan(plan_file))
    pieces = [read_survey(p) for p in sorted(out.glob("part-*.parquet"))]
    assert [str(p["age"].dtype) for p in pieces] == ["float64"] * 4  # every part in the whole file's type
    got = pd.concat(pieces, ignore_index=True)
    assert list(got.columns) == list(mem.data.columns)
    weights = list(mem.weight_columns[1:])
    assert len(weights) > 5  # the stages and the replicates
    np.testing.assert_allclose(got[weights].to_numpy(), mem.data[weights].to_numpy(), rtol=0, atol=1e-9)
    assert (got["wt_outcome"].to_numpy() == mem.data["wt_outcome"].to_numpy()).all()
    original = list(frame.columns)
    pd.testing.assert_frame_equal(got[original], mem.data[original], check_dtype=True)


def test_auto_with_a_folder_data_and_a_file_out_is_refused(data, tmp_path):
    """DESIGN section 7: --engine auto never changes the form of the output. Only the dask engine reads a
    folder of parts and it writes no .sav, so that OUT is refused, before any work, writing nothing (a
    .parquet OUT: tests/test_scale_weigh_files.py)."""
    root, _ = data
    plan = tmp_path / "plan.yaml"
    plan.write_text(PLANS["trim-spread"], encoding="utf-8")
    for name in ("w.sav", "w"):  # "w": a folder OUT needs an explicit --engine dask
        res = CliRunner().invoke(app, ["weigh", str(root / "parts"), "-p", str(plan), "-o", str(tmp_path / name),
                                       "--engine", "auto", "--scheduler", "tcp://127.0.0.1:1"])
        assert res.exit_code == 1 and "never changes the form of the output" in res.output, res.output
        assert "--engine dask" in res.output and "Traceback" not in res.output
    assert sorted(p.name for p in tmp_path.iterdir()) == ["plan.yaml"]
