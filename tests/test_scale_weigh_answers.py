"""``weigh`` with a questionnaire on the dask engine: the interview split, estimates from answered cells.

The reference is the in-memory engine on the same rows (itself checked against published formulas
in tests/test_weighting_*.py): ``weigh -q`` in memory classifies the whole file, splits interviews by
each case's share of applicable items answered and estimates from answered cells only. Identity
(docs/scale.md): counts exactly, weights and estimates within 1e-9, the workbook's cells equal.
Invented data; the cluster is test_scale_weigh's (2 workers on 127.0.0.1, free ports, stopped at the end).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

pytest.importorskip("distributed")

from skipwise.classify import classify  # noqa: E402
from skipwise.errors import SkipwiseError  # noqa: E402
from skipwise.io import write_survey  # noqa: E402
from skipwise.questionnaire import load_questionnaire  # noqa: E402
from skipwise.scale.sources import parquet_parts  # noqa: E402
from skipwise.scale.weigh_replicates import weigh_on_cluster  # noqa: E402
from skipwise.weighting.plan import load_plan  # noqa: E402
from skipwise.weighting.weigh import weigh  # noqa: E402
from skipwise.weighting.workbook import write_workbook  # noqa: E402
from test_scale_weigh import HEAD, MARGINS, _assert_same_workbook, _parts, client, make_frame  # noqa: E402,F401

QUESTIONNAIRE = """\
format: 1
survey: {name: ponds, title: Invented pond visits, case_id: rid}
context: [dispo]
codes:
  - {value: -9, reason: refused, kind: nonresponse}
sections:
  - name: visits
    asked_if: dispo in [110, 120]
    items:
      - {name: q1, type: integer, range: [0, 9]}
      - {name: q2, type: integer, range: [0, 9], asked_if: q1 >= 5}
      - {name: q3, type: number, range: [0, 100]}
      - {name: q4, type: integer, range: [1, 3]}
      - {name: q5, type: integer, range: [0, 9], optional: true}
"""
SPLIT = "  interview_split: {breakoff_below: 0.5, complete_above: 0.8, breakoff_to: R}\n"
PLANS = {
    # the split feeds classes, raking, trimming and a stratified jackknife
    "split-rake-jkn": HEAD.replace("  column: dispo\n", "  column: dispo\n" + SPLIT) + """\
nonresponse: {method: classes, classes: [region, agegrp], min_respondents: 30}
calibration:
  method: rake
""" + MARGINS + """\
trimming: {median_multiple: 2.5}
replicates: {method: jackknife, psu: psu, strata: stratum}
estimates: {means: [q3, age], proportions: [q4, q2]}
""",
    # no split: -q only makes the estimates use answered cells (q3 above its range is invalid)
    "answered-estimates": HEAD + """nonresponse: {method: classes, classes: [region]}
replicates: {method: jackknife, psu: psu}
estimates: {means: [q3, q1], proportions: [q4]}
""",
    # partials do not respond; break-offs count as other eligible; bootstrap replicates
    "split-partials-out": HEAD.replace("  column: dispo\n", "  column: dispo\n  partials_count_as_respondents: false\n"
                                       + SPLIT.replace("breakoff_to: R", "breakoff_to: O")) + """\
nonresponse: {method: classes, classes: [region]}
replicates: {method: bootstrap, psu: psu, count: 5, seed: 4}
""",
}


def answers_frame(n: int = 900, seed: int = 11) -> pd.DataFrame:
    """test_scale_weigh's invented sample file with five answered items: refusals, blanks, off-route and
    out-of-range answers, so the share answered spreads over the cut-points."""
    frame = make_frame(n, seed)
    rng = np.random.default_rng(seed + 1)
    asked = frame["dispo"].isin([110, 120]).to_numpy()

    def item(values: np.ndarray, p_refused: float, p_blank: float) -> np.ndarray:
        u = rng.uniform(size=n)
        out = np.where(u < p_refused, -9.0, np.where(u < p_refused + p_blank, np.nan, values.astype(float)))
        return np.where(asked, out, np.nan)

    q1 = item(rng.integers(0, 10, n), 0.15, 0.15)
    q2 = item(rng.integers(0, 10, n), 0.1, 0.1)
    q2 = np.where((q1 >= 5) | (rng.uniform(size=n) < 0.1), q2, np.nan)  # a few answers off route
    q3 = item(np.round(rng.uniform(0, 120, n), 1), 0.2, 0.2)           # some above the range: invalid
    q4 = item(rng.integers(1, 4, n), 0.3, 0.2)
    q5 = item(rng.integers(0, 10, n), 0.0, 0.5)
    return frame.assign(q1=q1, q2=q2, q3=q3, q4=q4, q5=q5)


@pytest.fixture(scope="module")
def answers(tmp_path_factory):
    root = tmp_path_factory.mktemp("answers")
    frame = answers_frame()
    (root / "parts").mkdir()
    for i, rows in enumerate(np.split(np.arange(len(frame)), [250, 610])):  # uneven: PSUs span parts
        write_survey(frame.iloc[rows].reset_index(drop=True), root / "parts" / f"s-{i}.parquet")
    qfile = root / "q.yaml"
    qfile.write_text(QUESTIONNAIRE, encoding="utf-8")
    return root, frame, load_questionnaire(qfile)


def _in_memory(frame: pd.DataFrame, plan, q):
    """What ``skipwise weigh -q`` does in memory (cli/cmd_weigh.py): classify the whole file, then weigh."""
    from skipwise.pipeline.steps import answered_values

    cl = classify(frame, q)
    return weigh(frame, plan, share_answered=cl.cases["share_answered"],
                 estimate_values=answered_values(cl, frame, plan))


@pytest.mark.parametrize("name", list(PLANS))
def test_interview_split_on_partitions_equals_the_in_memory_engine(answers, client, tmp_path, name):
    root, frame, q = answers
    plan = load_plan(text=PLANS[name])
    mem = _in_memory(frame, plan, q)
    if plan.dispositions.split is not None:
        # the split changes something: partials and break-offs among the dispositions mapped to I
        assert 0 < mem.counts["P"] and mem.counts["I"] < (frame["dispo"] == 110).sum()
    res = weigh_on_cluster(root / "parts", plan, tmp_path / "out", client=client,
                           parts=parquet_parts(root / "parts"), questionnaire=q)
    got = _parts(tmp_path / "out")
    assert list(got.columns) == list(mem.data.columns)
    assert res.counts == mem.counts and res.counts_weighted == pytest.approx(mem.counts_weighted, rel=1e-12)
    assert (got["wt_outcome"].to_numpy() == mem.data["wt_outcome"].to_numpy()).all()
    weights = list(mem.weight_columns[1:])
    np.testing.assert_allclose(got[weights].to_numpy(), mem.data[weights].to_numpy(), rtol=0, atol=1e-9)
    pd.testing.assert_frame_equal(got[list(frame.columns)], mem.data[list(frame.columns)], check_dtype=False)
    assert res.estimates.empty == mem.estimates.empty
    if name == "split-rake-jkn":
        # a proportion's category missing from a partition still has that partition's cases in its denominator
        q2 = classify(frame, q).analysis_values()["q2"].where(mem.prepared.respondent)
        per_part = [set(q2.iloc[rows].dropna()) for rows in np.split(np.arange(len(frame)), [250, 610])]
        assert any(set(q2.dropna()) - found for found in per_part)
    if not mem.estimates.empty:  # from answered cells only: not the estimates of every stored value
        pd.testing.assert_frame_equal(res.estimates, mem.estimates, check_exact=False, rtol=0, atol=1e-9)
        stored = weigh(frame, load_plan(text=PLANS[name].replace(SPLIT, "")), share_answered=None) \
            if plan.dispositions.split is None else None
        if stored is not None:
            q3 = lambda e: e.set_index("variable").loc["q3", "estimate"]  # noqa: E731
            assert abs(q3(stored.estimates) - q3(res.estimates)) > 1.0  # invalid values above 100 left out
    write_workbook(mem, tmp_path / "mem.xlsx")
    write_workbook(res, tmp_path / "dask.xlsx")
    _assert_same_workbook(tmp_path / "mem.xlsx", tmp_path / "dask.xlsx")


def test_split_without_a_questionnaire_or_a_share_is_refused_as_in_memory(answers, client, tmp_path):
    root, frame, q = answers
    plan = load_plan(text=PLANS["split-partials-out"])
    with pytest.raises(SkipwiseError) as mem_err:
        weigh(frame, plan)
    with pytest.raises(SkipwiseError) as err:
        weigh_on_cluster(root / "parts", plan, tmp_path / "o", client=client, parts=parquet_parts(root / "parts"))
    assert str(err.value) == str(mem_err.value) and "-q QUESTIONNAIRE" in str(err.value)
    # dispositions 120 are outside the section's universe: no applicable item, no share answered
    narrow = load_questionnaire(_write(tmp_path / "narrow.yaml",
                                       QUESTIONNAIRE.replace("dispo in [110, 120]", "dispo == 110")))
    with pytest.raises(SkipwiseError) as mem_err:
        _in_memory(frame, plan, narrow)
    with pytest.raises(SkipwiseError) as err:
        weigh_on_cluster(root / "parts", plan, tmp_path / "o", client=client, parts=parquet_parts(root / "parts"),
                         questionnaire=narrow)
    n_partial = int((frame["dispo"] == 120).sum())
    assert f"{n_partial} case(s) have no share of items answered" in str(mem_err.value)
    # counted over every partition, the first five cases in file order, as the in-memory engine says
    assert mem_err.value.problems[0].message in [p.message for p in err.value.problems]
    assert not (tmp_path / "o").exists()


def _write(path: Path, text: str) -> Path:
    path.write_text(text, encoding="utf-8")
    return path


def test_cli_weighs_with_a_questionnaire_as_in_memory(answers, client, tmp_path):
    """``weigh -q --engine dask`` against ``weigh -q`` in memory (the reference) on the same rows: the same
    weights, outcomes and workbook cells; the questionnaire and the data are left as they were."""
    from typer.testing import CliRunner

    from skipwise.cli import app

    root, frame, _ = answers
    plan = _write(tmp_path / "plan.yaml", PLANS["split-rake-jkn"])
    whole = tmp_path / "whole.parquet"
    write_survey(frame, whole)
    runner = CliRunner()
    mem = runner.invoke(app, ["weigh", str(whole), "-p", str(plan), "-o", str(tmp_path / "mem.parquet"),
                              "-q", str(root / "q.yaml")])
    assert mem.exit_code == 0, mem.output
    before = (root / "q.yaml").read_bytes()
    res = runner.invoke(app, ["weigh", str(root / "parts"), "-p", str(plan), "-o", str(tmp_path / "w"),
                              "-q", str(root / "q.yaml"), "--engine", "dask", "--scheduler", client.scheduler.address])
    assert res.exit_code == 0, res.output
    assert "weighted 900 cases in 3 partitions" in res.output and "estimates (replicate standard errors)" in res.output
    assert (root / "q.yaml").read_bytes() == before
    want = pd.read_parquet(tmp_path / "mem.parquet")
    got = _parts(tmp_path / "w")
    assert list(got.columns) == list(want.columns)
    weights = [c for c in want.columns if c.startswith("wt_") and c != "wt_outcome"]
    np.testing.assert_allclose(got[weights].to_numpy(), want[weights].to_numpy(), rtol=0, atol=1e-9)
    assert (got["wt_outcome"].to_numpy() == want["wt_outcome"].to_numpy()).all()
    _assert_same_workbook(tmp_path / "mem_weights.xlsx", tmp_path / "w_weights.xlsx")
    # the estimate lines of the console too (same figures, printed to 4 places)
    assert [ln for ln in mem.output.splitlines() if " se " in ln] == [ln for ln in res.output.splitlines()
                                                                       if " se " in ln]


def test_a_chunked_sav_with_a_questionnaire_weighs_as_in_memory(answers, client, tmp_path):
    """One .sav (pyreadstat's writer, refusals declared as user-missing) converted in chunks of 250 rows and
    classified partition by partition, against ``weigh -q`` of the same .sav in memory (the reference)."""
    import pyreadstat
    from typer.testing import CliRunner

    from skipwise.cli import app

    root, frame, _ = answers
    src = tmp_path / "sample.sav"
    pyreadstat.write_sav(frame, str(src), row_compress=True,
                         missing_ranges={c: [-9] for c in ("q1", "q2", "q3", "q4", "q5")})
    plan = _write(tmp_path / "plan.yaml", PLANS["split-rake-jkn"])
    runner = CliRunner()
    args = ["-p", str(plan), "-q", str(root / "q.yaml")]
    mem = runner.invoke(app, ["weigh", str(src), *args, "-o", str(tmp_path / "mem.parquet")])
    assert mem.exit_code == 0, mem.output
    res = runner.invoke(app, ["weigh", str(src), *args, "-o", str(tmp_path / "dask.parquet"), "--engine", "dask",
                              "--scheduler", client.scheduler.address, "--partition-rows", "250"])
    assert res.exit_code == 0, res.output
    assert "weighted 900 cases in 4 partitions" in res.output
    want, got = pd.read_parquet(tmp_path / "mem.parquet"), pd.read_parquet(tmp_path / "dask.parquet")
    assert list(got.columns) == list(want.columns)
    weights = [c for c in want.columns if c.startswith("wt_") and c != "wt_outcome"]
    np.testing.assert_allclose(got[weights].to_numpy(), want[weights].to_numpy(), rtol=0, atol=1e-9)
    assert (got["wt_outcome"].to_numpy() == want["wt_outcome"].to_numpy()).all()
    _assert_same_workbook(tmp_path / "mem_weights.xlsx", tmp_path / "dask_weights.xlsx")


def test_a_category_only_some_partitions_hold_has_the_in_memory_proportion(client, tmp_path):
    """Without -q too: a proportion's denominator counts every partition's valid cases, also where the
    category does not occur (the in-memory engine's estimate on the same rows is the reference)."""
    frame = make_frame().assign(rare=lambda f: np.where(np.arange(len(f)) // 20 == 35, "y", "x"))  # rows 700-719
    for i, rows in enumerate(np.split(np.arange(len(frame)), [250, 610])):
        write_survey(frame.iloc[rows].reset_index(drop=True), tmp_path / f"s-{i}.parquet")
    plan = load_plan(text=HEAD + "nonresponse: {method: classes, classes: [region]}\n"
                                 "replicates: {method: jackknife, psu: psu}\nestimates: {proportions: [rare]}\n")
    mem = weigh(frame, plan)
    res = weigh_on_cluster(tmp_path, plan, tmp_path / "out", client=client, parts=parquet_parts(tmp_path))
    assert list(mem.estimates["category"]) == ["x", "y"]
    pd.testing.assert_frame_equal(res.estimates, mem.estimates, check_exact=False, rtol=0, atol=1e-9)
    assert res.estimates["estimate"].sum() == pytest.approx(1.0, abs=1e-12)  # the shares of one variable
