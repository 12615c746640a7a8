"""The invented demo scenario: determinism, sizes, internal consistency of the truth, design weights,
population totals, and agreement of the classifier with the generator's own ground truth."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import yaml
from hypothesis import given, settings
from hypothesis import strategies as hst
from numpy.testing import assert_allclose

from skipwise.classify import classify
from skipwise.demo import items as demo_items
from skipwise.demo.scenario import CONTEXT, N_HOUSEHOLDS, generate, questionnaire_path
from skipwise.errors import ProblemCode, SkipwiseError
from skipwise.questionnaire import load_questionnaire
from skipwise.questionnaire.model import CodeKind, ItemType
from skipwise.rules import ast

STATUSES = {"answered", "skipped", "dont_know", "refused", "item_missing", "wrong_code", "off_route",
            "gate_unknown", "breakoff", "invalid", "left_blank",   # docs/contract.md §1
            "prefer_not_to_say"}                                   # the scenario's web-only reason
INTERVIEWED = (110, 120, 212)


@pytest.fixture(scope="module")
def q():
    return load_questionnaire(questionnaire_path())


@pytest.fixture(scope="module")
def sc():
    return generate()   # the defaults: seed 2026, 5,000 addresses


@pytest.fixture(scope="module")
def small():
    return generate(seed=11, n_addresses=800)


def _leaves(q) -> set[str]:
    """Items no rule reads, found from the questionnaire's own parsed rules."""
    owner = q.column_owner
    read = {owner.get(name, name) for it in q.items if it.rule is not None for name, _ in ast.names(it.rule)}
    return {it.name for it in q.items} - read


def test_same_seed_same_scenario_other_seed_differs(small):
    again = generate(seed=11, n_addresses=800)
    pd.testing.assert_frame_equal(small.interviews, again.interviews)
    pd.testing.assert_frame_equal(small.truth_status, again.truth_status)
    pd.testing.assert_frame_equal(small.sample, again.sample)
    other = generate(seed=12, n_addresses=800)
    assert not small.sample["disposition"].equals(other.sample["disposition"])


@pytest.mark.parametrize("n", [400, 800, 5000], ids=["n400", "n800", "n5000"])
def test_sizes(n, q, sc):
    s = sc if n == 5000 else generate(seed=3, n_addresses=n)
    assert len(s.sample) == n
    assert s.sample["case_id"].is_unique
    assert s.n_households == N_HOUSEHOLDS
    assert s.sample["district"].nunique() == 4
    assert (s.sample.groupby("district")["psu"].nunique() == 25).all()
    interviewed = s.sample["disposition"].isin(INTERVIEWED)
    assert len(s.interviews) == interviewed.sum()
    assert list(s.interviews["case_id"]) == list(s.sample.loc[interviewed, "case_id"])
    assert list(s.interviews.columns) == [q.case_id, *CONTEXT, *q.columns]
    assert list(s.truth_status.columns) == list(q.item_names) and len(q.item_names) == 57
    assert s.truth_status.shape[0] == len(s.interviews)
    assert list(s.truth_values.columns) == list(q.columns)
    assert set(s.sample["disposition"]) <= {110, 120, 211, 212, 220, 230, 310, 390, 410}
    assert set(s.interviews["interview_mode"]) <= {1, 2}


def test_generator_items_match_the_questionnaire(q):
    assert demo_items.ITEM_NAMES == q.item_names
    assert demo_items.COLUMNS == q.columns
    assert set(demo_items.LEAVES) == _leaves(q)


def test_every_status_of_the_vocabulary_occurs(sc):
    seen = set(pd.unique(sc.truth_status.to_numpy().ravel()))
    assert seen == STATUSES


def test_truth_cells_hold_what_their_status_says(q, sc):
    data, truth = sc.interviews, sc.truth_status
    for it in q.items:
        st = truth[it.name].to_numpy(dtype=object)
        if it.type is ItemType.TEXT:  # the open comment box: a text, or blank
            blank = data[it.name].isna().to_numpy()
            assert set(st) <= {"answered", "left_blank", "breakoff"}, it.name
            assert blank[st != "answered"].all() and not blank[st == "answered"].any(), it.name
            continue
        cols = data[list(it.columns)].to_numpy(dtype=float)
        blank = np.isnan(cols).all(axis=1)
        codes = {float(c.value): c for c in it.codes}
        sub = {v for v, c in codes.items() if c.kind is CodeKind.SUBSTANTIVE}
        if it.type is ItemType.MULTI:
            valid = np.isin(cols, [0.0, 1.0]).all(axis=1)
        elif it.values is not None:
            valid = np.isin(cols[:, 0], [float(k) for k in it.values])
        else:
            lo, hi = it.range
            v = cols[:, 0]
            valid = ((v >= lo) & (v <= hi) & (np.floor(v) == v if it.type is ItemType.INTEGER else True)) | np.isin(v, list(sub))
        first = cols[:, 0]
        is_code = np.isin(first, [v for v, c in codes.items() if c.kind is not CodeKind.SUBSTANTIVE])
        assert valid[st == "answered"].all(), it.name
        assert (blank | (first == -1))[st == "skipped"].all(), it.name
        assert (cols[st == "dont_know"] == -7).all(), it.name
        assert (cols[st == "refused"] == -9).all(), it.name
        assert (cols[st == "prefer_not_to_say"] == -8).all(), it.name
        assert (first[st == "wrong_code"] == -1).all(), it.name
        assert blank[np.isin(st, ["item_missing", "breakoff"])].all(), it.name
        assert (blank | (first == -1))[st == "gate_unknown"].all(), it.name
        assert (~blank & ~valid & ~is_code)[st == "invalid"].all(), it.name
        assert (~blank & (valid | is_code))[st == "off_route"].all(), it.name


def test_answered_cells_hold_the_true_value(q, sc):
    for it in q.items:
        ans = (sc.truth_status[it.name] == "answered").to_numpy()
        if it.type is ItemType.TEXT:
            assert (sc.interviews[it.name][ans] == sc.truth_values[it.name][ans]).all(), it.name
            continue
        for col in it.columns:
            assert_allclose(sc.interviews[col].to_numpy(float)[ans], sc.truth_values[col].to_numpy(float)[ans],
                            rtol=0, atol=0, err_msg=col)


def test_faults_only_on_leaf_items(q, sc):
    leaves = _leaves(q)
    for fault in ("off_route", "wrong_code", "invalid"):
        hit = [name for name in q.item_names if (sc.truth_status[name] == fault).any()]
        assert hit, fault
        assert set(hit) <= leaves, fault


def test_breakoffs(sc):
    bo = (sc.truth_status == "breakoff").to_numpy(dtype=bool)
    disp = sc.interviews["disposition"].to_numpy()
    per_case = bo.sum(axis=1)
    assert (per_case[np.isin(disp, (120, 212))] >= 4).all()   # the questionnaire's min_run 4
    assert (per_case[disp == 110] == 0).all()
    assert (sc.truth_status.loc[disp == 110, "recontact"] == "answered").all()
    # about 5 % of interviews break off
    assert 0.03 < np.isin(disp, (120, 212)).mean() < 0.07
    # every cell after a break-off cell is a break-off or skipped: the interview stopped
    after = np.logical_or.accumulate(bo, axis=1)
    later = sc.truth_status.to_numpy(dtype=object)[after]
    assert set(pd.unique(later)) <= {"breakoff", "skipped"}


def test_optional_comment_box(q, sc):
    """The closing comment box is optional (docs/contract.md §1): blanks are left_blank, never item nonresponse."""
    st = sc.truth_status["comment"]
    disp = sc.interviews["disposition"].to_numpy()
    done = disp == 110
    assert set(st[done]) == {"answered", "left_blank"}
    assert (st[~done] == "breakoff").all()            # blank after the break-off point
    assert 0.85 < (st[done] == "left_blank").mean() < 0.99   # most leave it blank
    assert q.item("comment").optional and q.item("comment").text.startswith("Is there anything else")


def test_pinned_reason_number_and_web_only_reason(q, sc):
    assert q.reason_numbers["prefer_not_to_say"] == 21   # pinned with number: in the questionnaire
    assert q.item("savings").code_for("prefer_not_to_say").number == 21
    st = sc.truth_status["savings"]
    web = (sc.interviews["interview_mode"] == 2).to_numpy()
    assert (st == "prefer_not_to_say").any()
    assert not (st[~web] == "prefer_not_to_say").any() and not (st[web] == "refused").any()


def test_design_weights_add_up_to_the_frame(sc):
    w = 1 / sc.sample["sel_prob"]
    # Horvitz & Thompson (1952): sum of 1/pi over the sample estimates the population count; with PPS
    # blocks and an equal take per block (self-weighting within a stratum) it reproduces each
    # stratum's frame size exactly (Cochran 1977, Sampling Techniques, §9A [memory]).
    assert_allclose(w.sum(), sc.n_frame_addresses, rtol=1e-9)
    occupied = sc.address_truth["occupied"].to_numpy()
    # Over the occupied addresses it estimates the 60,000 households: tolerance 3 % (about 7 standard
    # errors of a binomial share of vacant addresses in 5,000 draws; common practice, no source).
    assert_allclose(w[occupied].sum(), sc.n_households, rtol=0.03)
    by_district = w.groupby(sc.sample["district"]).sum()
    assert_allclose(by_district.sum(), sc.n_frame_addresses, rtol=1e-9)
    assert sc.sample["sel_prob"].between(0, 1, inclusive="right").all()


def test_population_totals_are_consistent(sc):
    tot = sc.population_totals
    assert set(tot) == {"district", "sex", "age_band"}
    sums = {k: sum(v.values()) for k, v in tot.items()}
    assert sums == {"district": N_HOUSEHOLDS, "sex": N_HOUSEHOLDS, "age_band": N_HOUSEHOLDS}
    assert set(tot["district"]) == {1, 2, 3, 4} and set(tot["age_band"]) == {1, 2, 3, 4}
    assert set(sc.true_means) >= {"income", "life_sat", "trips_week", "employed_share"}
    assert 0 < sc.true_means["employed_share"] < 1 and 0 <= sc.true_means["life_sat"] <= 10


def test_unweighted_respondents_are_biased_by_age(sc):
    resp = sc.sample.loc[sc.sample["disposition"].isin(INTERVIEWED), "age_band"].dropna()
    share_old = (resp == 4).mean()
    pop_old = sc.population_totals["age_band"][4] / N_HOUSEHOLDS
    assert share_old > pop_old + 0.03


def test_mechanisms(q, sc):
    mech = sc.mechanisms
    assert set(mech) == set(q.item_names)
    assert set(mech.values()) <= {"MCAR", "MAR", "MNAR", "none"}
    assert mech["income"] == "MNAR" and mech["life_sat"] == "MAR" and mech["hours_week"] == "MAR"
    assert mech["trips_week"] == "MCAR" and mech["exercise_days"] == "MCAR"
    # MNAR by construction: income refused more often by the high earners
    st, true_inc = sc.truth_status["income"], sc.truth_values["income"]
    asked = st != "breakoff"
    high = true_inc >= true_inc[asked].quantile(0.75)
    ref_high = (st[asked & high] == "refused").mean()
    ref_low = (st[asked & ~high] == "refused").mean()
    assert ref_high > 2 * ref_low
    # items without nonresponse never carry a nonresponse status
    for name in (n for n, m in mech.items() if m == "none"):
        assert not sc.truth_status[name].isin(["dont_know", "refused"]).any(), name


@pytest.mark.parametrize("which", ["default", "small"])
def test_classifier_agrees_with_the_generators_truth(which, q, sc, small):
    """THE acceptance test: every cell's status as the classifier finds it equals the truth."""
    s = sc if which == "default" else small
    cl = classify(s.interviews, q)
    got, truth = cl.status.astype(str), s.truth_status.astype(str)
    disagree = got.to_numpy() != truth.to_numpy()
    where = [(q.item_names[j], truth.iat[i, j], got.iat[i, j]) for i, j in np.argwhere(disagree)[:5]]
    assert (got == truth).all().all(), f"first disagreements (item, truth, classifier): {where}"


def test_write_round_trips(tmp_path, small):
    from skipwise.io import read_survey
    paths = small.write(tmp_path)
    assert {"interviews_sav", "interviews_dta", "sample", "truth_status", "truth_values", "population_totals",
            "true_means", "mechanisms"} <= set(paths)
    assert all(p.exists() for p in paths.values())
    sav = read_survey(paths["interviews_sav"])
    # pyreadstat reads the file back (an outside reader): the same numbers, codes kept as values
    num = [c for c in small.interviews.columns if c != "comment"]   # the open text box is text
    assert_allclose(sav[num].to_numpy(float), small.interviews[num].to_numpy(float), rtol=0, atol=1e-12)
    assert (sav["comment"].fillna("").replace("", None).dropna().tolist()
            == small.interviews["comment"].dropna().tolist())
    meta = sav.attrs["survey_meta"]
    assert sorted(meta.missing_values["income"]) == [-9, -7, -1]
    assert meta.value_labels["district"][1] == "Fennick"
    dta = pd.read_stata(paths["interviews_dta"], convert_categoricals=False)   # pandas' own Stata reader
    assert_allclose(dta[num].to_numpy(float), small.interviews[num].to_numpy(float))
    back = yaml.safe_load(paths["population_totals"].read_text(encoding="utf-8"))
    assert back == small.population_totals
    status = pd.read_parquet(paths["truth_status"])
    assert (status.astype(str) == small.truth_status.astype(str)).all().all()


@pytest.mark.parametrize("n", [10, 1_000_000], ids=["too-small", "too-large"])
def test_unsupported_sample_size_is_a_user_error(n):
    with pytest.raises(SkipwiseError) as err:
        generate(n_addresses=n)
    assert err.value.problems[0].code is ProblemCode.BAD_VALUE


def test_processing_codes_by_mode(q, sc):
    """In-person exports store -1 in skipped cells, web exports leave them blank."""
    web = (sc.interviews["interview_mode"] == 2).to_numpy()
    for it in q.items:
        if it.type is ItemType.TEXT:
            continue  # the comment box has no routing: never skipped
        skipped = (sc.truth_status[it.name] == "skipped").to_numpy(dtype=bool)
        cells = sc.interviews[it.name if it.type is not ItemType.MULTI else it.columns[0]].to_numpy(float)
        assert np.isnan(cells[skipped & web]).all(), it.name
        assert (cells[skipped & ~web] == -1).all(), it.name


@settings(max_examples=3, deadline=None)
@given(seed=hst.integers(min_value=0, max_value=2**32 - 1))
def test_classifier_agrees_for_any_seed(seed):
    q = load_questionnaire(questionnaire_path())
    s = generate(seed=seed, n_addresses=400)
    assert (classify(s.interviews, q).status.astype(str) == s.truth_status.astype(str)).all().all()
