"""Delta adjustment against its closed form."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from skipwise.diagnostics import delta_adjustment

VALUES = pd.Series([4.0, 5.0, 6.0, 7.0, np.nan, np.nan, 8.0, np.nan], name="score")


def test_grid_follows_pattern_mixture_formula():
    # estimate = (n_r ȳ_r + n_m (ȳ_r + δ)) / n (Rubin 1977; Little 1993) [memory]
    res = delta_adjustment(VALUES, deltas=[-2, 0, 1.5])
    yr = VALUES.dropna()
    expected = [(len(yr) * yr.mean() + 3 * (yr.mean() + d)) / 8 for d in (-2, 0, 1.5)]
    assert_allclose(res.grid["estimate"], expected, rtol=1e-12)


def test_tipping_point_closed_form():
    # linear in δ: δ* = (threshold − ȳ_r) n / n_m [computed, closed form]
    res = delta_adjustment(VALUES, threshold=5.5)
    assert res.conclusion == "above"
    assert_allclose(res.tipping_point, (5.5 - 6.0) * 8 / 3, rtol=1e-12)
    at = res.grid.set_index("delta").loc[res.tipping_point]
    assert at["conclusion"] == "equal"
    assert set(res.grid.loc[res.grid.delta < res.tipping_point, "conclusion"]) == {"below"}
    assert set(res.grid.loc[res.grid.delta > res.tipping_point, "conclusion"]) == {"above"}


def test_weighted_version():
    w = pd.Series([1, 2, 1, 2, 3, 1, 1, 1.0])
    res = delta_adjustment(VALUES, weights=w, threshold=7.0, deltas=[1.0])
    obs = VALUES.notna()
    yr = (w[obs] * VALUES[obs]).sum() / w[obs].sum()
    # weighted: (Σ_r w y + Σ_m w (ȳ_r,w + δ)) / Σ w [computed, closed form]
    assert_allclose(res.grid["estimate"].iloc[0], ((w[obs] * VALUES[obs]).sum() + w[~obs].sum() * (yr + 1)) / w.sum())
    assert_allclose(res.tipping_point, (7.0 - yr) * w.sum() / w[~obs].sum(), rtol=1e-12)
    assert res.conclusion == "below"


def test_no_nonrespondents_no_tipping_point():
    res = delta_adjustment(pd.Series([1.0, 2.0, 3.0]), threshold=10)
    assert res.tipping_point is None and res.conclusion == "below"
    assert res.grid["estimate"].tolist() == pytest.approx([2.0] * len(res.grid))
