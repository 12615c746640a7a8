"""Handling suggestions (cut-offs are common practice, no source)."""

from __future__ import annotations

import pytest

from skipwise.diagnostics import ItemEvidence, SuggestionThresholds, suggest_handling


def _verdicts(ev, th=None):
    return {o.action: o.verdict for o in suggest_handling(ev, th).options}


@pytest.mark.parametrize("ev, association, expect", [
    (ItemEvidence(item="q", n_in_scope=500, n_nonresponse=0), "none", {"leave as is": "suggested"}),
    (ItemEvidence(item="q", n_in_scope=1000, n_nonresponse=20, model_p=0.6, auc=0.53, little_p=0.4),
     "none detected", {"leave as is": "suggested", "listwise deletion": "suggested"}),
    (ItemEvidence(item="q", n_in_scope=1000, n_nonresponse=200, model_p=1e-8, auc=0.78),
     "strong", {"multiple imputation": "suggested", "listwise deletion": "not advised",
                "nonresponse weighting": "possible", "leave as is": "not advised"}),
    (ItemEvidence(item="q", n_in_scope=100, n_nonresponse=55, model_p=0.3, auc=0.55),
     "none detected", {"drop the variable": "possible", "listwise deletion": "not advised"}),
    (ItemEvidence(item="q", n_in_scope=1000, n_nonresponse=4, model_p=0.01, auc=0.9),
     "untested", {"leave as is": "suggested"}),
], ids=["no-nonresponse", "small-mcar", "strong-mar", "high-rate", "few-nonrespondents"])
def test_suggestions(ev, association, expect):
    sug = suggest_handling(ev)
    assert sug.association == association
    got = _verdicts(ev)
    assert {k: got[k] for k in expect} == expect
    assert f"{ev.rate:.1%}" in sug.evidence


def test_thresholds_are_configurable():
    ev = ItemEvidence(item="q", n_in_scope=1000, n_nonresponse=80, model_p=0.5, auc=0.52)
    assert _verdicts(ev)["leave as is"] == "not advised"
    assert _verdicts(ev, SuggestionThresholds(low_rate=0.10))["leave as is"] == "suggested"


@pytest.mark.parametrize("ev, association", [
    # the AUC never flags: a high AUC with an unremarkable adjusted p-value is "none detected"
    (ItemEvidence(item="q", n_in_scope=300, n_nonresponse=20, model_p=0.01, adjusted_p=0.4, auc=0.85), "none detected"),
    (ItemEvidence(item="q", n_in_scope=300, n_nonresponse=20, model_p=0.001, adjusted_p=0.01, auc=0.62), "weak"),
    (ItemEvidence(item="q", n_in_scope=300, n_nonresponse=20, model_p=0.001, adjusted_p=0.01, auc=0.75), "strong"),
    # Little's joint p-value alone never flags one item
    (ItemEvidence(item="q", n_in_scope=300, n_nonresponse=20, little_p=1e-6), "untested"),
], ids=["auc-alone", "flag-small-effect", "flag-large-effect", "little-alone"])
def test_flag_rests_on_adjusted_test(ev, association):
    from skipwise.diagnostics.suggest import flagged

    sug = suggest_handling(ev)
    assert sug.association == association
    assert flagged(sug.association) == (association in ("weak", "strong"))
    assert (_verdicts(ev)["multiple imputation"] == "suggested") == flagged(association)
