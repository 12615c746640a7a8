"""The shared separation detector against statsmodels' own behaviour, and its use in weighting."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from statsmodels.tools.sm_exceptions import PerfectSeparationWarning

from skipwise.errors import SkipwiseError
from skipwise.separation import detect_separation
from skipwise.weighting.margins import encode_margins
from skipwise.weighting.propensity import fit_propensity, propensity_design


def _statsmodels_fit(x, y):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        res = sm.Logit(y, x).fit(disp=0, maxiter=100)
    return res, {w.category for w in caught}


def test_complete_separation_is_what_statsmodels_warns_about():
    # x <= 4 all 0, x >= 5 all 1: complete separation (Albert & Anderson 1984); statsmodels warns
    # PerfectSeparationWarning (its documented behaviour since 0.14) and the slope keeps growing
    x = sm.add_constant(np.arange(1.0, 9.0))
    y = np.array([0, 0, 0, 0, 1, 1, 1, 1])
    res, caught = _statsmodels_fit(x, y)
    assert PerfectSeparationWarning in caught and abs(res.params[1]) > 10
    check = detect_separation(pd.DataFrame(x, columns=["const", "x"]), y)
    assert check.verdict == "complete" and check.terms == ("x",)
    assert (check.perfect_ones, check.perfect_zeros) == (4, 4)


def test_quasi_complete_separation_diverges_without_statsmodels_warning():
    # one tie at x = 4 (one 0, one 1): quasi-complete; statsmodels does not flag it, but its slope
    # and standard error run away (Albert & Anderson 1984, sec. 3) -- the detector must catch it
    x = sm.add_constant(np.array([1, 2, 3, 4, 4, 5, 6, 7.0]))
    y = np.array([0, 0, 0, 0, 1, 1, 1, 1])
    res, caught = _statsmodels_fit(x, y)
    assert PerfectSeparationWarning not in caught and res.bse[1] > 100
    check = detect_separation(pd.DataFrame(x, columns=["const", "x"]), y)
    assert check.verdict == "quasi-complete" and check.terms == ("x",)


def test_overlapping_data_are_not_separated():
    rng = np.random.default_rng(4)
    z = rng.normal(size=400)
    y = rng.random(400) < 1 / (1 + np.exp(-z))
    x = sm.add_constant(z)
    res, caught = _statsmodels_fit(x, y.astype(float))
    assert PerfectSeparationWarning not in caught and np.all(np.isfinite(res.bse))  # a finite MLE
    assert not detect_separation(x, y).separated


def _eligible(rng, n=240):
    region = rng.choice(["a", "b", "c"], n)
    responded = np.where(region == "c", False, rng.random(n) < 0.6)  # nobody in c responds
    return pd.DataFrame({"region": region}), responded


def test_propensity_covariate_that_separates_is_refused():
    # invented data: the weight of region c's eligible cases could go to no respondent
    frame, responded = _eligible(np.random.default_rng(2))
    x = propensity_design(frame, ["region"])
    with pytest.raises(SkipwiseError) as err:
        fit_propensity(x, responded)
    text = err.value.render()
    assert "region=c" in text and "separation" in text and "collapse" in text


def test_separation_among_respondents_only_is_kept_and_reported():
    # everybody in c responds: propensity 1 there, weights keep their totals; the verdict is attached
    rng = np.random.default_rng(3)
    frame, responded = _eligible(rng)
    responded = np.where(frame["region"].to_numpy() == "c", True, responded)
    fit = fit_propensity(propensity_design(frame, ["region"]), responded)
    assert fit.separation is not None and fit.separation.verdict == "quasi-complete"
    assert fit.separation.perfect_zeros == 0 and fit.separation.perfect_ones > 0


def test_margins_adding_to_zero_are_refused():
    data = pd.DataFrame({"sex": [1, 2, 1, 2]})
    with pytest.raises(SkipwiseError) as err:
        encode_margins(data, {"sex": {1: 0, 2: 0}})
    assert "add to 0" in err.value.render()
