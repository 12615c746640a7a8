"""Skip-consistent imputation: only in-universe nonresponse is filled and routing always holds."""

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from skipwise.classify import classify
from skipwise.classify import statuses as S
from skipwise.impute.skipaware import ItemRule, SkipAwareSpec, impute_skipaware
from skipwise.questionnaire import loads_questionnaire

QUESTIONNAIRE = """
format: 1
survey: {name: impute-test, case_id: id}
context: [region]
codes:
  - {value: -1, reason: routed_out, kind: structural}
  - {value: -8, reason: dont_know, kind: nonresponse}
  - {value: -9, reason: refused, kind: nonresponse}
breakoff: {min_run: 99}
sections:
  - name: main
    items:
      - {name: age, type: integer, range: [10, 90]}
      - {name: employed, type: categorical, values: {1: "Yes", 2: "No"}, asked_if: age >= 16}
      - {name: hours, type: number, range: [1, 80], asked_if: employed == 1}
      - {name: sat, type: categorical, values: {1: low, 2: mid, 3: high}}
"""
Q = loads_questionnaire(QUESTIONNAIRE)
ITEMS = ["age", "employed", "hours", "sat"]


def make_data(seed: int, n: int = 400) -> pd.DataFrame:
    """Invented data: routing obeyed, then holes of every kind punched in."""
    rng = np.random.default_rng(seed)
    age = rng.integers(10, 90, n).astype(float)
    emp = np.where(age >= 16, rng.choice([1.0, 2.0], n), -1.0)
    hours = np.where(emp == 1, np.round(rng.uniform(1, 80, n)), -1.0)
    df = pd.DataFrame({"id": np.arange(n), "region": rng.choice(["north", "south"], n), "age": age,
                       "employed": emp, "hours": hours, "sat": rng.choice([1.0, 2.0, 3.0], n)})
    gone = rng.random(n) < 0.2
    df.loc[gone, "age"] = rng.choice([np.nan, -9.0, -8.0], int(gone.sum()))
    df.loc[gone & (rng.random(n) < 0.6), ["employed", "hours"]] = np.nan     # -> gate_unknown
    dk = (rng.random(n) < 0.1) & (df["employed"] > 0)
    df.loc[dk, "employed"], df.loc[dk, "hours"] = -8.0, np.nan
    df.loc[(rng.random(n) < 0.15) & (df["employed"] == 1), "hours"] = np.nan     # -> item_missing
    df.loc[rng.random(n) < 0.1, "sat"] = rng.choice([np.nan, -9.0])
    return df


@pytest.fixture(scope="module")
def data():
    df = make_data(1)
    # Faults that must be left as they are: an answer off route and an invalid value.
    first_no = df.index[df["employed"] == 2][0]
    df.loc[first_no, "hours"] = 30.0
    df.loc[df.index[0], "sat"] = 7.0
    return df


def routing_holds(before, after, eligible):
    """No fillable status left in universe, no gate_unknown, and no new routing fault."""
    sb, sa = before[ITEMS], after[ITEMS]
    assert not sa.isin([*eligible, S.GATE_UNKNOWN]).any().any()
    new_fault = sa.isin(S.FAULT_STATUSES) & ~sb.isin(S.FAULT_STATUSES)
    assert not new_fault.any().any()


@pytest.mark.parametrize("method", ["hotdeck", "nearest", "pmm", "auto", "mode"],
                         ids=["hotdeck", "nearest", "pmm", "auto", "mode"])
def test_completed_data_obey_routing(data, method):
    spec = SkipAwareSpec(default=ItemRule(method=method, classes=("region",), covariates=("region",)),
                         m=2, seed=3)
    res = impute_skipaware(data, Q, spec)
    before = classify(data, Q).status
    eligible = (*Q.nonresponse_reasons, S.ITEM_MISSING)
    for d, imp in zip(res.datasets, res.imputed):
        after = classify(d, Q).status          # re-classified from scratch, not trusted from res
        routing_holds(before, after, eligible)
        # Only fillable or gate-unknown cells ever change; faults stay as they were.
        changed = (d[ITEMS] != data[ITEMS]) & ~(d[ITEMS].isna() & data[ITEMS].isna())
        may_change = before[ITEMS].isin([*eligible, S.GATE_UNKNOWN])
        assert not (changed & ~may_change).any().any()
        assert d.loc[data.index[0], "sat"] == 7.0
        assert (after[ITEMS].isin(S.FAULT_STATUSES) == before[ITEMS].isin(S.FAULT_STATUSES)).all().all()
        # Filled values obey the items (docs/questionnaire-format.md: values and range).
        assert set(d.loc[imp["sat"], "sat"]) <= {1.0, 2.0, 3.0}
        assert set(d.loc[imp["employed"], "employed"]) <= {1.0, 2.0}
        ages = d.loc[imp["age"], "age"]
        assert ((ages >= 10) & (ages <= 90) & (ages == np.round(ages))).all()
        assert (imp.sum() > 0).all()  # every item has fillable cells here, whatever the method


def test_gate_fill_respects_later_answers(data):
    # Age refused but employment answered: the case was asked about work, so the filled age must
    # be 16 or more (the rule `age >= 16`), however the donors are distributed.
    df = data.copy()
    asked = (df["employed"] > 0) & df["age"].isin([-9.0, -8.0])
    assert asked.sum() > 5
    res = impute_skipaware(df, Q, SkipAwareSpec(default=ItemRule(method="hotdeck"), m=3, seed=9))
    for d in res.datasets:
        assert (d.loc[asked, "age"] >= 16).all()


def test_items_routed_in_are_filled_and_routed_out_are_flagged(data):
    res = impute_skipaware(data, Q, SkipAwareSpec(m=1, seed=2, skip_fill="code"))
    before = classify(data, Q).status
    d, flags = res.datasets[0], res.flags(0)
    gate_unknown = before["hours"] == S.GATE_UNKNOWN
    came_in = gate_unknown & (d["employed"] == 1)
    went_out = gate_unknown & (d["employed"] != 1)
    assert came_in.any() and went_out.any()
    assert (flags.loc[came_in, "hours_imp"] == 1).all() and d.loc[came_in, "hours"].between(1, 80).all()
    assert (flags.loc[went_out, "hours_imp"] == 2).all() and (d.loc[went_out, "hours"] == -1).all()
    blank = impute_skipaware(data, Q, SkipAwareSpec(m=1, seed=2, skip_fill="blank")).datasets[0]
    assert blank.loc[went_out & data["hours"].isna(), "hours"].isna().all()
    # status is the input's classification, unchanged; `imputed` says what was filled.
    assert res.status.equals(before)
    assert res.table.loc["hours", "routed_out"] == went_out.sum()


def test_statuses_to_fill_are_configurable(data):
    res = impute_skipaware(data, Q, SkipAwareSpec(statuses=("refused",), m=1, seed=1))
    before = classify(data, Q).status
    imp = res.imputed[0]
    assert not (imp["sat"] & (before["sat"] != "refused")).any()
    assert (classify(res.datasets[0], Q).status["sat"] == S.ITEM_MISSING).sum() == (
        before["sat"] == S.ITEM_MISSING).sum()


def test_seeded_reproducible_and_stacked(data):
    a = impute_skipaware(data, Q, SkipAwareSpec(m=2, seed=5))
    b = impute_skipaware(data, Q, SkipAwareSpec(m=2, seed=5))
    assert a.datasets[0].equals(b.datasets[0]) and a.datasets[1].equals(b.datasets[1])
    assert not a.datasets[0].equals(a.datasets[1])
    s = a.stacked()
    assert len(s) == 2 * len(data) and list(s.columns[-5:]) == [*(f"{i}_imp" for i in ITEMS), "imputation"]


@settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.integers(0, 10_000), st.sampled_from(["hotdeck", "pmm", "auto", "nearest"]),
       st.sampled_from(["auto", "blank", "code"]))
def test_no_completed_file_breaks_routing(seed, method, skip_fill):
    df = make_data(seed, n=120)
    spec = SkipAwareSpec(default=ItemRule(method=method, covariates=("region",)), m=1, seed=seed,
                         skip_fill=skip_fill)
    res = impute_skipaware(df, Q, spec)
    routing_holds(classify(df, Q).status, classify(res.datasets[0], Q).status,
                  (*Q.nonresponse_reasons, S.ITEM_MISSING))
    observed = classify(df, Q).status[ITEMS] == S.ANSWERED
    pd.testing.assert_frame_equal(res.datasets[0][ITEMS].where(observed), df[ITEMS].where(observed))


FOLLOW_UP = """
format: 1
survey: {name: follow-up, case_id: id}
codes:
  - {value: -9, reason: refused, kind: nonresponse}
sections:
  - name: money
    items:
      - {name: income, type: number, range: [0, 100]}
      - {name: band, type: categorical, values: {1: low, 2: high}, asked_if: not answered(income)}
"""


def test_gate_whose_nonresponse_routes_a_follow_up_keeps_its_code():
    # band is asked *because* income was refused; filling income would put an answered band
    # off route, so such income cells stay refused. Where band is blank, income is filled and
    # band is routed out instead (flag 2).
    q = loads_questionnaire(FOLLOW_UP)
    df = pd.DataFrame({"id": range(8), "income": [10.0, 20, 30, 40, -9, -9, -9, -9],
                       "band": [np.nan] * 4 + [1.0, 2.0, np.nan, np.nan]})
    res = impute_skipaware(df, q, SkipAwareSpec(m=1, seed=0, max_redraws=2))
    d, flags = res.datasets[0], res.flags(0)
    assert (d.loc[4:5, "income"] == -9).all() and (flags.loc[4:5, "income_imp"] == 0).all()
    assert d.loc[6:7, "income"].between(0, 100).all() and (flags.loc[6:7, "band_imp"] == 2).all()
    after = classify(d, q).status
    assert not after.isin(S.FAULT_STATUSES).any().any()
    assert res.table.loc["income", "left_unfilled"] == 2 and any("follow-up" in n for n in res.notes)


def test_routing_faults_are_left_as_they_are_and_flagged(data):
    res = impute_skipaware(data, Q, SkipAwareSpec(m=1, seed=3, default=ItemRule(method="hotdeck")))
    flags = res.flags(0)
    # The fixture put an answer off route in `hours` and an invalid 7 in `sat` (stated by hand above).
    first_no = data.index[data["employed"] == 2][0]
    assert res.datasets[0].loc[first_no, "hours"] == 30.0 and flags.loc[first_no, "hours_imp"] == 3
    assert res.datasets[0].loc[data.index[0], "sat"] == 7.0 and flags.loc[data.index[0], "sat_imp"] == 3
    # Every fault cell, and only those, carries flag 3.
    faults = res.status[["age", "employed", "hours", "sat"]].isin(["off_route", "wrong_code", "invalid"])
    assert ((flags.to_numpy() == 3) == faults.to_numpy()).all()
