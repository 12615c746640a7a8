"""Acceptance on the invented demo scenario: the flag rule against the generator's own mechanisms.

Flag definition (docs/diagnostics.md, "Flag rule"): an item is *flagged* (evidence against MCAR)
when it has at least 10 nonrespondents in scope and the likelihood-ratio p-value of its
nonresponse model on the default auxiliaries, Holm-adjusted across all items so tested, is
below 0.05.  The AUC never flags an item.

The generator (skipwise.demo.faults) is invented data, so these are acceptance checks of the
rule on known mechanisms, not checks of a computation against an outside source; the
computations themselves are checked in the other test_diagnostics_* files.
"""

from __future__ import annotations

import warnings

import pandas as pd
import pytest
from typer.testing import CliRunner

from skipwise.cli import app
from skipwise.demo import generate, questionnaire_path
from skipwise.diagnostics.report import DiagnoseOptions, run_diagnostics
from skipwise.diagnostics.survey import survey_inputs
from skipwise.questionnaire import load_questionnaire


@pytest.fixture(scope="module")
def demo():
    s = generate()  # default seed
    q = load_questionnaire(questionnaire_path())
    inputs = survey_inputs(s.interviews, q)  # classify + in-scope adapter + default auxiliaries, as the CLI
    rep = run_diagnostics(inputs.mframe, inputs.aux, options=DiagnoseOptions(little_items=inputs.little_items))
    return s, inputs, rep


def _flagged(rep) -> set[str]:
    return set(rep.summary.loc[rep.summary["flagged"].astype(bool), "item"])


def test_default_auxiliaries_include_context_and_core_items(demo):
    _, inputs, _ = demo
    aux = set(inputs.aux.columns)
    assert {"district", "interview_mode", "age", "sex"} <= aux
    assert "psu" not in aux and "case_id" not in aux


def test_no_mcar_item_is_flagged(demo):
    s, _, rep = demo
    mcar = {k for k, v in s.mechanisms.items() if v == "MCAR"}
    assert mcar & set(rep.summary["item"]), "the scenario has MCAR items with nonresponse"
    assert not (_flagged(rep) & mcar)
    # small samples with a high AUC (search_weeks: 3 nonrespondents of 70) are untested, not flagged
    sw = rep.summary.set_index("item").loc["search_weeks"]
    assert sw["association"] == "untested" and not sw["flagged"]


def test_strong_mar_item_is_flagged(demo):
    s, _, rep = demo
    assert s.mechanisms["life_sat"] == "MAR"
    assert "life_sat" in _flagged(rep)


def test_every_mar_item_is_flagged(demo):
    s, _, rep = demo
    mar = {k for k, v in s.mechanisms.items() if v == "MAR"}
    assert mar <= _flagged(rep)


def test_little_test_runs_on_the_demo(demo):
    _, inputs, rep = demo
    assert rep.little is not None, rep.notes
    assert rep.little.n_variables >= 5 and rep.little.df > 0
    # routing keeps the common scope to cases asked every chosen item; at least half of all cases
    # (MIN_SCOPE_SHARE, common practice, no source)
    assert rep.little.n_cases >= 0.5 * len(inputs.mframe.values)
    # the respondent's age is asked twice (age, m_age_1): only one of them may enter
    assert not {"age", "m_age_1"} <= set(rep.little.mean.index)


def test_cli_on_demo_emits_no_runtime_warning(tmp_path):
    s = generate(n_addresses=800)
    s.write(tmp_path)
    data = next(tmp_path.glob("*.sav"))
    out = tmp_path / "diag.xlsx"
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        res = CliRunner().invoke(app, ["diagnose", str(data), "-q", str(questionnaire_path()), "-o", str(out)])
    assert res.exit_code == 0, res.output
    runtime = [w for w in caught if issubclass(w.category, RuntimeWarning)]
    assert not runtime, [str(w.message) for w in runtime]
    assert "Little's MCAR test: d²" in res.output
    models = pd.read_excel(out, sheet_name="Nonresponse models", header=None).astype(str)
    assert models.apply(lambda c: c.str.contains("separation by")).to_numpy().any(), \
        "the small demo should exercise the separated-coefficient path (where the overflow was)"
