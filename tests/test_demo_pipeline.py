"""`skipwise demo` end to end on the invented scenario, checked against the generator's own truth."""

from __future__ import annotations

import hashlib
import shutil

import numpy as np
import pandas as pd
import pyreadstat
import pytest
from typer.testing import CliRunner

from skipwise.cli import app
from skipwise.demo import generate
from skipwise.demo.compare import SPECIAL_CODES


@pytest.fixture(scope="module")
def demo(demo_output, tmp_path_factory):
    # A copy of the session's demo output: the rerun test below moves the package aside.
    source, output = demo_output
    out = tmp_path_factory.mktemp("demo") / "out"
    shutil.copytree(source, out)
    return out, output, generate()


def test_demo_writes_every_output(demo):
    out, output, _ = demo
    # `skipwise demo` runs OUT/plan.yaml, whose hand-over package goes to OUT/package.
    for rel in ["data/marrowby-2026.sav", "data/marrowby-2026.dta", "data/truth_status.parquet",
                "package/marrowby-2026.sav", "package/marrowby-2026_faults.csv",
                "package/marrowby-2026_coded.dta", "package/item_report.xlsx", "package/diagnostics.xlsx",
                "package/sample_with_answers_weighted.parquet", "package/weighting.xlsx",
                "package/marrowby-2026_imputed.parquet"]:
        assert (out / rel).stat().st_size > 0, rel
    assert "statuses agree with the generator's truth in 100.00%" in output
    flagged_line = next(line for line in output.splitlines() if line.startswith("diagnostics flag"))
    assert "MCAR in the generator" not in flagged_line
    assert "hours_week (MAR" in flagged_line and "life_sat (MAR" in flagged_line


def test_status_file_matches_the_generators_truth(demo):
    out, _, scenario = demo
    # pyreadstat reads the status columns; the truth comes from the generator's own simulation.
    frame, meta = pyreadstat.read_sav(str(out / "package/marrowby-2026.sav"))
    # status numbers -> tokens by the table of docs/statuses.md (the value labels are words for people)
    from skipwise.classify.statuses import STATUS_NUMBERS
    from skipwise.questionnaire import load_questionnaire

    q = load_questionnaire(out / "marrowby-2026.yaml")
    by_number = {n: s for s, n in {**STATUS_NUMBERS, **q.reason_numbers}.items()}
    assert set(meta.variable_value_labels["life_sat_status"]) <= set(by_number)
    got = frame["life_sat_status"].map(by_number)
    assert (got.to_numpy() == scenario.truth_status["life_sat"].astype(str).to_numpy()).all()


def test_weighting_recovers_true_means_better_than_unweighted(demo):
    out, _, scenario = demo
    weighted = pd.read_parquet(out / "package/sample_with_answers_weighted.parquet")
    w = weighted["wt_final"].to_numpy()
    # Unit response depends on district, age and sex, the weighting variables; these items'
    # item nonresponse is MCAR in the generator, so weighting should move their means toward the truth.
    for item in ("trips_week", "exercise_days"):
        assert scenario.mechanisms[item] == "MCAR"
        x = pd.to_numeric(weighted[item], errors="coerce").to_numpy(dtype=float)
        ok = (w > 0) & np.isfinite(x) & ~np.isin(x, SPECIAL_CODES)
        truth = scenario.true_means[item]
        assert abs(np.average(x[ok], weights=w[ok]) - truth) < abs(x[ok].mean() - truth), item
    # Raking reproduces the invented population totals.
    for var, totals in scenario.population_totals.items():
        got = weighted[w > 0].groupby(var)["wt_final"].sum()
        np.testing.assert_allclose(got.loc[list(totals)].to_numpy(), list(totals.values()), rtol=1e-6)


def test_demo_never_modifies_its_inputs(demo, tmp_path):
    out, _, _ = demo
    sav = out / "data/marrowby-2026.sav"
    before = hashlib.sha256(sav.read_bytes()).hexdigest()
    result = CliRunner().invoke(app, ["classify", str(sav), "-q", "questionnaires/marrowby-2026.yaml",
                                      "-o", str(tmp_path / "x.parquet")])
    assert result.exit_code == 0, result.output
    assert hashlib.sha256(sav.read_bytes()).hexdigest() == before


def test_the_runs_fault_listing_is_the_classify_commands_byte_for_byte(demo, tmp_path):
    # One output, one writer: the package's fault listing has the bytes `skipwise classify` writes.
    out, _, _ = demo
    result = CliRunner().invoke(app, ["classify", str(out / "data/marrowby-2026.sav"), "-q",
                                      "questionnaires/marrowby-2026.yaml", "-o", str(tmp_path / "x.parquet")])
    assert result.exit_code == 0, result.output
    mine = (tmp_path / "x.parquet.faults.csv").read_bytes()
    assert mine.count(b"\n") > 100  # the demo has routing faults to compare
    assert (out / "package/marrowby-2026_faults.csv").read_bytes() == mine


def test_demo_codebook_xml_is_valid_ddi_and_its_frequencies_match_the_delivered_file(demo):
    # Outside references: the published DDI-Codebook 2.5 schema (validated with lxml) and the
    # delivered .sav read back with pyreadstat, counted with pandas.
    from pathlib import Path

    etree = pytest.importorskip("lxml.etree")
    out, _, _ = demo
    schema = etree.XMLSchema(etree.parse(str(Path(__file__).parent / "standards/ddi-codebook-2.5/codebook.xsd")))
    doc = etree.parse(str(out / "package/codebook.xml"))
    assert schema.validate(doc), schema.error_log
    ns = {"d": "ddi:codebook:2_5"}
    frame, _ = pyreadstat.read_sav(str(out / "package/marrowby-2026.sav"), user_missing=True)
    variables = doc.findall("d:dataDscr/d:var", ns)
    assert [v.get("name") for v in variables] == list(frame.columns)
    checked = 0
    for var in variables:
        counts = frame[var.get("name")].value_counts()
        for cat in var.findall("d:catgry", ns):
            value = float(cat.findtext("d:catValu", namespaces=ns))
            freq = next(s for s in cat.findall("d:catStat", ns) if s.get("wgtd") != "wgtd")
            assert int(freq.text) == int(counts.get(value, 0)), (var.get("name"), value)
            checked += 1
    assert checked > 500
    from skipwise import load_questionnaire
    from skipwise.rules.words import universe_words

    q = load_questionnaire(out / "marrowby-2026.yaml")
    universes = {v.get("name"): v.findtext("d:universe", namespaces=ns) for v in variables}
    for item in q.items:
        assert universes[item.columns[0]] == universe_words(item, q), item.name


def test_demo_codebook_rates_equal_counts_of_the_delivered_status_columns(demo):
    # The reference: pandas counts of the `<item>_status` columns of the delivered .sav (pyreadstat),
    # with D as the package's rate definition states it (docs/statuses.md); items holding invalid
    # cells are skipped, since whether an invalid cell is in universe is not in the status column.
    etree = pytest.importorskip("lxml.etree")
    out, _, _ = demo
    ns = {"d": "ddi:codebook:2_5"}
    doc = etree.parse(str(out / "package/codebook.xml"))
    frame, meta = pyreadstat.read_sav(str(out / "package/marrowby-2026.sav"))
    checked = 0
    for var in doc.findall("d:dataDscr/d:var", ns):
        stats = {s.get("otherType"): float(s.text) for s in var.findall("d:sumStat", ns)
                 if s.get("type") == "other" and s.get("wgtd") != "wgtd"}
        col = f"{var.get('name')}_status"
        if "item-nonresponse-rate" not in stats or col not in frame.columns:
            continue
        # Status numbers are fixed by the contract: 1 answered, 2 skipped, 3 item_missing,
        # 4 gate_unknown, 5 breakoff, 6 off_route, 7 wrong_code, 8 invalid, 9 left_blank, 11+ reasons.
        number = frame[col].to_numpy()
        if (number == 8).any():
            continue
        in_d = np.isin(number, [1, 3, 7]) | (number >= 11)
        d = int(in_d.sum())
        nonresp = int((in_d & ((number == 3) | (number >= 11))).sum())
        assert stats["items-in-universe-D"] == d, col
        assert stats["item-nonresponse-rate"] == pytest.approx(nonresp / d, abs=1e-6), col
        checked += 1
    assert checked >= 20


def test_demo_codebook_carries_the_study_block_and_question_texts(demo):
    etree = pytest.importorskip("lxml.etree")
    out, _, _ = demo
    ns = {"d": "ddi:codebook:2_5"}
    doc = etree.parse(str(out / "package/codebook.xml"))
    dates = {d.get("event"): d.get("date") for d in doc.findall("d:stdyDscr/d:stdyInfo/d:sumDscr/d:collDate", ns)}
    assert dates == {"start": "2026-03-02", "end": "2026-05-29"}  # from the run plan's study block
    assert "stratified" in doc.findtext("d:stdyDscr/d:method/d:dataColl/d:sampProc", namespaces=ns)  # questionnaire's
    assert doc.findtext("d:dataDscr/d:var[@name='income']/d:qstn/d:qstnLit", namespaces=ns).startswith("What was")
    md = (out / "package/codebook.md").read_text()
    assert "| Fieldwork from | 2026-03-02 |" in md and "| question text | What was your household" in md


def test_a_rerun_of_the_demo_plan_gives_the_same_bytes(demo):
    out, _, _ = demo
    # Run the demo's own plan again (the first package moved aside) and compare every file's
    # SHA-256 but manifest.json's, the one place for run times and absolute paths.
    first = out / "package_first"
    (out / "package").rename(first)
    result = CliRunner().invoke(app, ["run", str(out / "plan.yaml")])
    assert result.exit_code == 0, result.output
    names = sorted(p.name for p in first.iterdir())
    assert names == sorted(p.name for p in (out / "package").iterdir())

    def sha(path):
        return hashlib.sha256(path.read_bytes()).hexdigest()

    assert [n for n in names if n != "manifest.json" and sha(first / n) != sha(out / "package" / n)] == []
