"""The one item-rate function against counts worked out by hand, row by row (docs/contract.md §2)."""

from __future__ import annotations

import dataclasses
import textwrap

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from skipwise.classify import classify
from skipwise.questionnaire import loads_questionnaire
from skipwise.rates import DEFAULT_MIN_BASE, format_rate, item_rates

Q = loads_questionnaire(textwrap.dedent("""\
    format: 1
    survey: {name: t, case_id: id}
    context: [grp]
    codes:
      - {value: -1, reason: not_asked, kind: structural}
      - {value: -8, reason: dont_know, kind: nonresponse}
      - {value: -9, reason: refused, kind: nonresponse}
    breakoff: {min_run: 3}
    sections:
      - name: s
        items:
          - {name: gate, type: categorical, values: {1: "Yes", 2: "No"}}
          - {name: amount, type: number, range: [0, 100], asked_if: gate == 1}
          - {name: tail1, type: integer, range: [0, 5]}
          - {name: tail2, type: integer, range: [0, 5]}
    """))

N = None
# id, gate, amount, tail1, tail2, grp -> the status of `amount`, worked out by hand from the table in docs/contract.md §2
ROWS = [
    (1, 1, 10, 1, 1, "a"),     # answered
    (2, 1, 20, 1, 1, "a"),     # answered
    (3, 1, 30, 1, 1, "b"),     # answered
    (4, 1, -8, 1, 1, "a"),     # dont_know
    (5, 1, -9, 1, 1, "b"),     # refused
    (6, 1, N, 1, 1, "a"),      # item_missing
    (7, 1, -1, 1, 1, "b"),     # wrong_code
    (8, 1, 500, 1, 1, "a"),    # invalid, universe decided in -> a fault, in D
    (9, 2, 500, 1, 1, "b"),    # invalid, out of universe -> apart
    (10, -9, 500, 1, 1, "a"),  # invalid, universe undecided (gate refused) -> apart
    (11, 2, 40, 1, 1, "b"),    # off_route
    (12, -9, N, 1, 1, "a"),    # gate_unknown
    (13, 2, N, 1, 1, N),       # skipped
    (14, 1, N, N, N, "b"),     # breakoff (3 blanks after the last activity, min_run 3)
]
FRAME = pd.DataFrame(ROWS, columns=["id", "gate", "amount", "tail1", "tail2", "grp"])
WEIGHT = FRAME["id"].astype(float)  # case i weighs i


@pytest.fixture(scope="module")
def clf():
    return classify(FRAME, Q)


def test_statuses_are_as_worked_out(clf):
    assert list(clf.status["amount"].astype(str)) == [
        "answered", "answered", "answered", "dont_know", "refused", "item_missing", "wrong_code", "invalid",
        "invalid", "invalid", "off_route", "gate_unknown", "skipped", "breakoff"]


def test_unweighted_rates_against_hand_counts(clf):
    t = item_rates(clf).table().loc["amount"]
    # Hand count: D = 3 answered + 1 dont_know + 1 refused + 1 item_missing + 1 wrong_code + 1 invalid in universe
    assert t["D"] == 8 and t["base"] == 8 and t["cases"] == 14
    assert (t["answered"], t["dont_know"], t["refused"], t["item_missing"]) == (3, 1, 1, 1)
    assert (t["wrong_code"], t["invalid_in_universe"], t["invalid_apart"]) == (1, 1, 2)
    assert (t["off_route"], t["gate_unknown"], t["breakoff"], t["skipped"], t["left_blank"]) == (1, 1, 1, 1, 0)
    assert_allclose([t["answered_rate"], t["nonresponse_rate"], t["fault_rate"]], [3 / 8, 3 / 8, 2 / 8])
    assert_allclose([t["dont_know_rate"], t["refused_rate"], t["item_missing_rate"]], [1 / 8] * 3)
    assert_allclose([t["wrong_code_rate"], t["invalid_rate"]], [1 / 8, 1 / 8])


def test_weighted_rates_against_hand_sums(clf):
    t = item_rates(clf, WEIGHT).table(weighted=True).loc["amount"]
    # Hand sums: D = 1 + ... + 8 = 36; answered 1+2+3; nonresponse 4+5+6; faults 7+8
    assert_allclose(t["D"], 36.0)
    assert t["base"] == 8  # the minimum base is an unweighted count, also in the weighted table
    assert_allclose([t["answered_rate"], t["nonresponse_rate"], t["fault_rate"]], [6 / 36, 15 / 36, 15 / 36])
    assert_allclose(t["item_missing_rate"], 6 / 36)
    assert t["zero_weight"] == 0


def test_shares_add_up_to_one_for_every_item(clf):
    for weighted in (False, True):
        t = item_rates(clf, WEIGHT).table(weighted)
        total = t[["answered_rate", "nonresponse_rate", "fault_rate"]].sum(axis=1)
        assert_allclose(total[t["D"] > 0], 1.0)


def test_zero_weights_are_counted_and_leave_the_weighted_base(clf):
    w = WEIGHT.copy()
    w.iloc[[0, 3, 12]] = 0.0  # cases 1 (answered) and 4 (dont_know) are in D; case 13 is skipped
    t = item_rates(clf, w).table(True).loc["amount"]
    assert t["zero_weight"] == 2
    assert_allclose(t["D"], 36.0 - 1 - 4)
    assert_allclose(t["nonresponse_rate"], (5 + 6) / 31)


def test_zero_weights_by_subgroup_against_hand_counts(clf):
    w = WEIGHT.copy()
    w.iloc[[0, 3, 4, 12]] = 0.0  # cases 1, 4 (group a, in D), 5 (group b, in D), 13 (no group, skipped)
    t = item_rates(clf, w, by=FRAME["grp"]).table(True)
    assert t.loc[("a", "amount"), "zero_weight"] == 2
    assert t.loc[("b", "amount"), "zero_weight"] == 1
    assert t.loc[(None, "amount"), "zero_weight"] == 0  # skipped is not in D
    # group a in D: cases 2, 6, 8 keep their weights (1 and 4 weigh 0)
    assert_allclose(t.loc[("a", "amount"), "D"], 2.0 + 6 + 8)


def test_min_base_marks_small_items(clf):
    r = item_rates(clf)
    assert DEFAULT_MIN_BASE == 30  # common practice, no source
    assert r.below_min_base["amount"]  # D = 8 < 30
    assert not item_rates(clf, min_base=8).below_min_base["amount"]
    assert item_rates(clf, min_base=9).below_min_base["amount"]
    assert list(item_rates(clf, min_base=1).ranked().index)[0] == "amount"
    assert "amount" not in item_rates(clf, min_base=9).ranked().index


def test_subgroups_against_hand_counts(clf):
    r = item_rates(clf, by=FRAME["grp"])
    t = r.table()
    a, b = t.loc[("a", "amount")], t.loc[("b", "amount")]
    # group a: cases 1, 2 answered; 4 dont_know; 6 item_missing; 8 invalid in: D = 5
    assert (a["D"], a["answered"], a["nonresponse"], a["faults"]) == (5, 2, 2, 1)
    # group b: case 3 answered, 5 refused, 7 wrong_code (9 invalid out, 11 off_route, 14 breakoff apart): D = 3
    assert (b["D"], b["answered"], b["nonresponse"], b["faults"], b["breakoff"]) == (3, 1, 1, 1, 1)
    assert t.loc[(None, "amount"), "skipped"] == 1  # the case without a group key
    assert r.groups == ("a", "b", None)


def test_chunks_add_up_to_the_whole_file(clf):
    whole = item_rates(clf, WEIGHT, by=FRAME["grp"])
    parts = [FRAME.iloc[:5], FRAME.iloc[5:9], FRAME.iloc[9:]]
    total = None
    for part in parts:
        r = item_rates(classify(part, Q), WEIGHT.loc[part.index], by=part["grp"])
        total = r if total is None else total + r
    assert total.groups == whole.groups
    pd.testing.assert_frame_equal(total.table(True), whole.table(True))
    pd.testing.assert_frame_equal(total.table(False), whole.table(False))


def test_left_blank_counts_apart(clf):
    # An optional item's in-universe blank: made by hand here so the test holds whether or not the
    # classifier produces the status yet.
    cats = clf.categories if "left_blank" in clf.categories else (*clf.categories, "left_blank")
    codes = clf.codes.copy(order="F")
    j = clf.items.index("amount")
    codes[5, j] = cats.index("left_blank")  # case 6 (item_missing) becomes left_blank
    lb = dataclasses.replace(clf, categories=cats, codes=codes)
    t = item_rates(lb).table().loc["amount"]
    assert (t["left_blank"], t["item_missing"], t["D"]) == (1, 0, 7)
    assert_allclose(t["nonresponse_rate"], 2 / 7)


def test_wide_shows_weighted_beside_unweighted(clf):
    w = item_rates(clf, WEIGHT).wide().loc["amount"]
    assert_allclose([w["nonresponse_rate"], w["nonresponse_rate_w"]], [3 / 8, 15 / 36])
    assert_allclose(w["D_w"], 36.0)


@pytest.mark.parametrize("x, shown", [(3 / 8, "37.5%"), (82 / 1042, "7.9%"), (float("nan"), ""), (None, "")])
def test_format_rate(x, shown):
    # 82/1042 = 0.078695 -> 7.9% (hand division)
    assert format_rate(x) == shown


def test_mixed_numeric_keys_are_codes(clf):
    by = FRAME["gate"].astype(float)  # codes read as 1.0 are the code 1
    r = item_rates(clf, by=by)
    assert r.groups == (-9, 1, 2)
    assert isinstance(r.groups[1], int)
    assert np.asarray(r.counts).sum() == 14 * len(Q.items)
