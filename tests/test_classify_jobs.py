"""Classification in row blocks and threads: the result never depends on ``jobs`` or on the blocks.

Classification is row-local (docs/contract.md §1), so classifying fixed blocks of rows apart, in any order
and on any number of threads, must give the statuses of classifying the whole file at once.
"""

from __future__ import annotations

import textwrap

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from hypothesis_scale import examples

from skipwise.classify import cells, classify, engine
from skipwise.errors import SkipwiseError
from skipwise.questionnaire import loads_questionnaire
from test_classify_properties import Q, frames


def _same(a, b):
    np.testing.assert_array_equal(a.codes, b.codes)
    np.testing.assert_array_equal(a.kinds, b.kinds)
    np.testing.assert_array_equal(a.universe, b.universe)
    pd.testing.assert_frame_equal(a.faults, b.faults)


@settings(max_examples=examples(40), deadline=None)
@given(frames(max_rows=40))
def test_blocks_and_threads_change_nothing(frame):
    whole = classify(frame, Q, jobs=1)
    old = engine.BLOCK_ROWS
    try:
        engine.BLOCK_ROWS = 7  # many small blocks, the last one short
        one = classify(frame, Q, jobs=1)
        two = classify(frame, Q, jobs=2)
    finally:
        engine.BLOCK_ROWS = old
    _same(whole, one)
    _same(whole, two)
    # and one block alone is a chunk of rows classified apart
    np.testing.assert_array_equal(classify(frame.iloc[7:14], Q, jobs=1).codes, whole.codes[7:14])


def test_jobs_one_and_two_equal_on_several_real_blocks():
    rng = np.random.default_rng(3)
    n = 2 * engine.BLOCK_ROWS + 123
    pick = {"a": [1, 2, -8, np.nan], "b": [0, 5, 11, -1, np.nan], "c": [0, 5, 7, -9], "d": [1, 2, 4, np.nan],
            "m_x": [0, 1, np.nan], "m_y": [0, 1], "e": [0, 3, 9, np.nan], "g": [1, 8, np.nan]}
    frame = pd.DataFrame({"id": np.arange(n), "zone": rng.integers(1, 3, n),
                          **{c: rng.choice(v, n) for c, v in pick.items()},
                          "f": rng.choice(np.array(["hi", "", None], dtype=object), n)})
    _same(classify(frame, Q, jobs=1), classify(frame, Q, jobs=2))


@pytest.mark.parametrize("jobs", [0, -2, 1.5, True, "2"])
def test_jobs_must_be_a_positive_whole_number(jobs):
    frame = pd.DataFrame({"id": [1], "zone": [1], **{c: [None] for c in
                                                     ("a", "b", "c", "d", "m_x", "m_y", "e", "g", "f")}})
    with pytest.raises(SkipwiseError, match="jobs must be a whole number"):
        classify(frame, Q, jobs=jobs)


# -- the numeric fast path against the general decoder it shortcuts ------------------------------
Q2 = loads_questionnaire(textwrap.dedent("""\
    format: 1
    survey: {name: t, case_id: id}
    codes:
      - {value: 99, reason: none_code, kind: substantive}
      - {value: -1, reason: not_asked, kind: structural}
      - {value: -8, reason: dont_know, kind: nonresponse}
      - {value: -9, reason: refused, kind: nonresponse}
    sections:
      - name: s
        items:
          - {name: a, type: categorical, values: {1: "Yes", 2: "No"}}
          - {name: b, type: number, range: [0, 10], asked_if: a == 1}
          - {name: c, type: integer, optional: true, asked_if: 'b > 3 or has_code(a, "dont_know")'}
          - {name: d, type: number}  # no range: the codes are numbers too, and win
          - {name: e, type: integer, range: [1, 5], asked_if: not answered(c)}
    """))
CELLS2 = [0, 1, 2, 2.5, 3, 7, 11, 99, -1, -8, -9, np.nan]


@st.composite
def frames2(draw, max_rows=30):
    n = draw(st.integers(1, max_rows))
    data = {"id": list(range(n))}
    for col in "abcde":
        data[col] = draw(st.lists(st.sampled_from(CELLS2), min_size=n, max_size=n))
    return pd.DataFrame(data)


def _general_only(frame, q):
    real = cells.numeric_fast_path
    try:
        cells.numeric_fast_path = lambda item, series: False
        return classify(frame, q, jobs=1)
    finally:
        cells.numeric_fast_path = real


@settings(max_examples=examples(60), deadline=None)
@given(st.one_of(frames2().map(lambda f: (f, Q2)), frames().map(lambda f: (f, Q))))
def test_numeric_fast_path_equals_the_general_decoder(case):
    frame, q = case
    _same(classify(frame, q, jobs=1), _general_only(frame, q))


def test_fast_path_is_taken_for_number_columns():
    frame = pd.DataFrame({"id": [1], **{c: [1.0] for c in "abcde"}})
    assert all(cells.numeric_fast_path(it, frame[it.name]) for it in Q2.items)
    assert not cells.numeric_fast_path(Q2.item("a"), frame["a"].astype(str))
