"""Hypothesis invariants of the classifier (docs/contract.md §1 and §3).

The routing of the test questionnaire is also written out by hand below (``walk``), so the
"answered along the routing" property does not rely on the rule evaluator under test, and
off-route cells are re-checked with the per-row reference evaluator of the rule tests.
"""

from __future__ import annotations

import textwrap

import numpy as np
import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st

from hypothesis_scale import examples

from skipwise.classify import classify
from skipwise.questionnaire import loads_questionnaire
from skipwise.rules import ABSENT, KNOWN, UNKNOWN, Operand
from test_rules_properties import ref_truth

Q = loads_questionnaire(textwrap.dedent("""\
    format: 1
    survey: {name: t, case_id: id}
    context: [zone]
    codes:
      - {value: -1, reason: not_asked, kind: structural}
      - {value: -8, reason: dont_know, kind: nonresponse}
      - {value: -9, reason: refused, kind: nonresponse}
    breakoff: {min_run: 3}
    sections:
      - name: s
        items:
          - {name: a, type: categorical, values: {1: "Yes", 2: "No"}}
          - {name: b, type: integer, range: [0, 10], asked_if: a == 1}
          - {name: c, type: integer, range: [0, 10], asked_if: b > 3}
          - {name: d, type: categorical, values: {1: x, 2: y, 3: z}, asked_if: a == 1 and c != 5}
          - {name: m, type: multi, options: {x: X, y: Y}}
          - {name: e, type: integer, range: [0, 5], asked_if: m_x == 1 or zone == 2}
          - {name: g, type: integer, range: [0, 9], asked_if: not answered(b)}
          - {name: f, type: text}
    """))
COLUMNS = ["a", "b", "c", "d", "m_x", "m_y", "e", "g", "f"]
CELL = {
    "a": [1, 2, -1, -8, -9, None, 7], "b": [0, 2, 5, 9, -1, -9, None, 11], "c": [0, 5, 7, -1, -8, None, 12],
    "d": [1, 2, 3, -1, -9, None, 4], "m_x": [0, 1, -9, -1, None, 5], "m_y": [0, 1, -9, None],
    "e": [0, 3, 5, -1, -8, None, 9], "g": [1, 8, -1, -9, None], "f": ["hi", "", None, "-9"],
}


@st.composite
def frames(draw, max_rows=25):
    n = draw(st.integers(1, max_rows))
    data = {"id": list(range(n)), "zone": draw(st.lists(st.sampled_from([1, 2]), min_size=n, max_size=n))}
    for col in COLUMNS:
        data[col] = draw(st.lists(st.sampled_from(CELL[col]), min_size=n, max_size=n))
    frame = pd.DataFrame(data)
    frame["f"] = frame["f"].astype(object)
    return frame


@settings(max_examples=examples(80), deadline=None)
@given(frames())
def test_every_cell_gets_exactly_one_known_status(frame):
    cl = classify(frame, Q)
    assert cl.status.shape == (len(frame), len(Q.items))
    assert cl.status.notna().all().all()
    assert set(np.unique(cl.status.astype(str).values)) <= set(cl.categories)
    assert (cl.counts().sum(axis=1) == len(frame)).all()


@settings(max_examples=examples(60), deadline=None)
@given(frames(), st.randoms(use_true_random=False))
def test_permuting_rows_permutes_statuses(frame, rnd):
    order = list(range(len(frame)))
    rnd.shuffle(order)
    base = classify(frame, Q).status
    shuffled = classify(frame.iloc[order], Q).status
    pd.testing.assert_frame_equal(shuffled, base.iloc[order])


@settings(max_examples=examples(40), deadline=None)
@given(frames())
def test_unrelated_column_changes_nothing(frame):
    base = classify(frame, Q)
    wider = classify(frame.assign(unrelated=np.arange(len(frame)) % 3), Q)
    pd.testing.assert_frame_equal(base.status, wider.status)
    pd.testing.assert_frame_equal(base.faults, wider.faults)


@settings(max_examples=examples(60), deadline=None)
@given(frames())
def test_every_off_route_cell_has_a_false_rule(frame):
    cl = classify(frame, Q)
    status = cl.status.astype(str)
    for item in Q.items:
        rows = np.flatnonzero(status[item.name].to_numpy() == "off_route")
        for i in rows:
            env = _RowEnv(frame, status, i)
            assert item.rule is not None
            truth = ref_truth(item.rule, env, 0)
            assert truth is not None and not truth, (item.name, frame.iloc[i].to_dict())


class _RowEnv:
    """Rule inputs of one case, rebuilt from the statuses (docs/contract.md §3), for the reference evaluator."""

    def __init__(self, frame: pd.DataFrame, status: pd.DataFrame, i: int):
        self.ops, self.ans, self.codes = {}, {}, {}
        owner = {c: it.name for it in Q.items for c in it.columns}
        for col in ["zone", *COLUMNS]:
            value = frame[col].iloc[i]
            st_ = status[owner[col]].iloc[i] if col in owner else "answered"
            state = KNOWN if st_ == "answered" else ABSENT if st_ in ("skipped", "off_route") else UNKNOWN
            self.ops[col] = Operand(np.array([np.nan if value is None else value], dtype=float if col != "f" else object),
                                    np.array([state], dtype=np.int8))
        b = frame["b"].iloc[i]
        self.ans["b"] = np.array([b is not None and not pd.isna(b) and 0 <= b <= 10])


def walk(rng: np.random.Generator, n: int) -> pd.DataFrame:
    """Interviews answered exactly along the routing, written by hand from the rules above."""
    a = rng.choice([1, 2], n)
    zone = rng.choice([1, 2], n)
    b = np.where(a == 1, rng.integers(0, 11, n), np.nan)
    c = np.where(b > 3, rng.integers(0, 11, n), np.nan)
    # a skipped c makes `c != 5` false (docs/contract.md §3), so d needs c asked and not 5
    d = np.where((a == 1) & ~np.isnan(c) & (c != 5), rng.integers(1, 4, n), np.nan)
    m_x, m_y = rng.integers(0, 2, n), rng.integers(0, 2, n)
    e = np.where((m_x == 1) | (zone == 2), rng.integers(0, 6, n), np.nan)
    g = np.where(np.isnan(b), rng.integers(0, 10, n), np.nan)
    # Processing sometimes fills not-asked cells with the structural code.
    fill = rng.random(n) < 0.3
    b = np.where(np.isnan(b) & fill, -1, b)
    return pd.DataFrame({"id": np.arange(n), "zone": zone, "a": a, "b": b, "c": c, "d": d, "m_x": m_x,
                         "m_y": m_y, "e": e, "g": g, "f": pd.Series(["ok"] * n, dtype=object)})


@settings(max_examples=examples(30), deadline=None)
@given(st.integers(0, 2**31 - 1))
def test_case_answered_along_routing_has_only_answers_and_skips(seed):
    frame = walk(np.random.default_rng(seed), 50)
    statuses = set(np.unique(classify(frame, Q).status.astype(str).values))
    assert statuses <= {"answered", "skipped"}


def test_chunks_add_up_to_the_whole():
    frame = walk(np.random.default_rng(7), 200)
    frame.loc[::7, "e"] = -9
    whole = classify(frame, Q).counts()
    parts = classify(frame.iloc[:120], Q).counts() + classify(frame.iloc[120:], Q).counts()
    pd.testing.assert_frame_equal(whole, parts)
