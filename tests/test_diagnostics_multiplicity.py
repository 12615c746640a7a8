"""p-value adjustment for many items, against statsmodels and a hand-worked example."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from statsmodels.stats.multitest import multipletests

from skipwise.diagnostics.multiplicity import adjust_pvalues
from skipwise.errors import SkipwiseError

P = pd.Series([0.01, 0.04, 0.03, 0.005], index=list("abcd"))


@pytest.mark.parametrize("method, expect", [
    # Holm (1979): sorted 0.005·4, 0.01·3, 0.03·2, 0.04·1 → running max 0.02, 0.03, 0.06, 0.06 [hand-worked]
    ("holm", [0.03, 0.06, 0.06, 0.02]),
    # Benjamini & Hochberg (1995): m·p(i)/i = 0.02, 0.02, 0.04, 0.04, running min from the top [hand-worked]
    ("bh", [0.02, 0.04, 0.04, 0.02]),
    ("none", [0.01, 0.04, 0.03, 0.005]),
], ids=["holm", "bh", "none"])
def test_hand_worked(method, expect):
    assert_allclose(adjust_pvalues(P, method).to_numpy(), expect, rtol=1e-12)


@settings(max_examples=40, deadline=None)
@given(st.lists(st.floats(0, 1), min_size=1, max_size=30))
def test_matches_statsmodels(ps):
    # statsmodels.stats.multitest.multipletests as the reference library (rtol 1e-12)
    p = pd.Series(ps)
    for ours, theirs in (("holm", "holm"), ("bh", "fdr_bh")):
        assert_allclose(adjust_pvalues(p, ours).to_numpy(), multipletests(p.to_numpy(), method=theirs)[1],
                        rtol=1e-12, atol=1e-15)


def test_nan_is_outside_the_family():
    p = pd.Series([0.01, np.nan, 0.02])
    out = adjust_pvalues(p, "holm")
    assert np.isnan(out.iloc[1])
    assert_allclose(out.iloc[[0, 2]].to_numpy(), [0.02, 0.02], rtol=1e-12)  # m = 2, not 3 [hand-worked]


def test_unknown_method():
    with pytest.raises(SkipwiseError, match="adjustment"):
        adjust_pvalues(P, "bonferoni")
