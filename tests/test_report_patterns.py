"""Pattern counting (bit codes and packed bytes) against pandas' own grouping."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as hs
from numpy.testing import assert_allclose

from skipwise.report.patterns import nonresponse_patterns, pick_items


def _reference(mask: np.ndarray) -> pd.Series:
    """pandas groupby over the mask's columns: cases per distinct row (the reference count)."""
    frame = pd.DataFrame(mask.astype(int))
    return frame.groupby(list(frame.columns)).size()


@pytest.mark.parametrize("k", [1, 5, 64, 70], ids=["one-item", "few", "64-bit-edge", "packed-bytes"])
def test_counts_match_groupby(k):
    rng = np.random.default_rng(k)
    n = 500
    # few distinct rows so that counts are large: rows drawn from 9 prototypes
    protos = rng.random((9, k)) < 0.3
    mask = protos[rng.integers(0, 9, n)]
    items = tuple(f"i{j}" for j in range(k))
    pt = nonresponse_patterns(mask, items, top=50)
    ref = _reference(mask)
    assert pt.distinct == len(ref)
    assert pt.counts.sum() + pt.other_cases == n
    for row, count in zip(pt.grid, pt.counts):
        assert ref.loc[tuple(int(v) for v in row)] == count
    assert list(pt.counts) == sorted(ref.to_numpy(), reverse=True)[: len(pt.counts)]


def test_weighted_totals_and_other():
    mask = np.array([[1, 0], [1, 0], [0, 1], [0, 0], [1, 1]], dtype=bool)
    w = np.array([1.0, 2.0, 3.0, 4.0, 5.0])
    pt = nonresponse_patterns(mask, ("p", "q"), top=2, weight=w)
    # by hand: (1,0) twice -> 2 cases, weight 3; then three singletons ordered by more-missing first: (1,1)
    assert pt.grid.astype(int).tolist() == [[1, 0], [1, 1]]
    assert pt.counts.tolist() == [2, 1]
    assert_allclose(pt.weighted, [3.0, 5.0], rtol=0)  # sums of stated weights, by hand
    assert pt.other_cases == 2 and pt.other_weight == pytest.approx(7.0)


def test_pick_items_top_rates_in_interview_order():
    rates = pd.Series([0.1, 0.0, 0.3, np.nan, 0.3, 0.2], index=list("abcdef"))
    assert pick_items(rates, 3) == ("c", "e", "f")
    assert pick_items(rates, 10) == ("a", "c", "e", "f")  # zero and undefined rates never chosen
    assert pick_items(pd.Series([0.0, np.nan], index=["x", "y"]), 3) == ()


@settings(max_examples=25, deadline=None)
@given(hs.lists(hs.lists(hs.booleans(), min_size=3, max_size=3), min_size=1, max_size=40))
def test_property_counts_sum_and_match(rows):
    mask = np.array(rows, dtype=bool)
    pt = nonresponse_patterns(mask, ("a", "b", "c"), top=8)
    ref = _reference(mask)
    assert pt.counts.sum() + pt.other_cases == len(rows)
    assert all(ref.loc[tuple(int(v) for v in g)] == c for g, c in zip(pt.grid, pt.counts))
