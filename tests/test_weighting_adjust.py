"""Class adjustments, propensity, trimming and Kish diagnostics against outside references."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from numpy.testing import assert_allclose

from skipwise.errors import ProblemCode, SkipwiseError
from skipwise.weighting.adjust import class_adjust, class_codes
from skipwise.weighting.diagnostics import effective_n, kish_deff, weight_cv, weight_summary
from skipwise.weighting.propensity import fit_propensity, propensity_classes, propensity_design
from skipwise.weighting.trim import trim_weights


def _raghunathan() -> pd.DataFrame:
    # Raghunathan, Missing Data Analysis in Practice (CRC 2015) [seen]: 60 women, 40 men;
    # respondents 40 women and 10 men.
    sex = ["F"] * 60 + ["M"] * 40
    resp = [True] * 40 + [False] * 20 + [True] * 10 + [False] * 30
    return pd.DataFrame({"sex": sex, "resp": resp})


def test_weighting_class_factors_raghunathan():
    df = _raghunathan()
    codes, labels = class_codes(df, ["sex"])
    allm = np.ones(100, dtype=bool)
    res = class_adjust(np.ones(100), codes, labels, allm, df["resp"].to_numpy(), step="nonresponse",
                       min_kept=5, max_factor=5.0)
    # factors 1.5 and 4 [seen: Raghunathan 2015]
    assert_allclose(res.table["factor"].to_numpy(), [1.5, 4.0], rtol=1e-12)
    assert res.collapses == ()
    w = res.weights
    # assert_allclose returns None, so the two checks must be separate statements
    assert_allclose(w[:40], 1.5, rtol=1e-12)  # 60/40 [seen: Raghunathan 2015]
    assert_allclose(w[60:70], 4.0, rtol=1e-12)  # 40/10 [seen: Raghunathan 2015]
    assert (w[~df["resp"].to_numpy()] == 0).all()
    # Kish (1992): deff = n Σw²/(Σw)² = 1.25 and n_eff = 40 for these weights [computed]
    assert_allclose(kish_deff(w), 1.25, rtol=1e-12)
    assert_allclose(effective_n(w), 40.0, rtol=1e-12)
    # deff = 1 + CV² with the divisor-n variance (Kish 1992)
    assert_allclose(1 + weight_cv(w) ** 2, 1.25, rtol=1e-12)


def test_default_thresholds_collapse_and_log():
    df = _raghunathan()
    codes, labels = class_codes(df, ["sex"])
    allm = np.ones(100, dtype=bool)
    # 10 male respondents < 20 (common practice, no source) -> collapsed into one class, factor 2
    res = class_adjust(np.ones(100), codes, labels, allm, df["resp"].to_numpy(), step="nonresponse",
                       min_kept=20, max_factor=3.0)
    assert len(res.collapses) == 1
    rec = res.collapses[0]
    assert rec.merged == "sex=M" and rec.into == "sex=F" and rec.respondents == 10
    assert_allclose(res.table["factor"].to_numpy(), [2.0])


def test_collapse_on_large_factor_prefers_same_leading_class():
    df = pd.DataFrame({"r": ["a"] * 40 + ["b"] * 40, "s": [1, 2] * 40})
    resp = np.ones(80, dtype=bool)
    resp[np.flatnonzero((df["r"] == "a") & (df["s"] == 2))[:15]] = False  # a,2: 5 of 20 respond
    codes, labels = class_codes(df, ["r", "s"])
    res = class_adjust(np.ones(80), codes, labels, np.ones(80, dtype=bool), resp, step="nr",
                       min_kept=1, max_factor=2.0)
    assert [c.merged for c in res.collapses] == ["r=a, s=2"]
    assert res.collapses[0].into == "r=a, s=1"
    assert "factor 4" in res.collapses[0].reason


def test_equal_weights_give_deff_one_and_summary():
    # Kish (1992): equal weights give deff 1 [computed from the formula]
    assert kish_deff(np.full(17, 3.2)) == pytest.approx(1.0, abs=1e-15)
    s = weight_summary([1.0, 2.0, 3.0, 0.0])
    assert s["n"] == 3 and s["median"] == 2.0 and s["max"] == 3.0


def test_kish_errors():
    with pytest.raises(SkipwiseError) as info:
        kish_deff([1.0, np.nan])
    assert info.value.codes == [ProblemCode.BAD_WEIGHTS]


@pytest.mark.parametrize("fn", [kish_deff, effective_n, weight_cv, weight_summary],
                         ids=["kish_deff", "effective_n", "weight_cv", "weight_summary"])
@pytest.mark.parametrize("weights, fragment", [
    (["a"], "'a'"),
    ([1.0, "x", 2.0], "'x'"),
    ([1.0, None], "missing"),
    ([1.0, np.inf], "finite"),
    ([1.0, -2.0], "non-negative"),
    ([0.0, 0.0], "no positive weight"),
], ids=["text", "text-among-numbers", "none", "infinite", "negative", "all-zero"])
def test_weight_diagnostics_reject_non_weights(fn, weights, fragment):
    # Kish (1992): deff and n_eff are defined for positive weights only; anything else is a
    # user error, never a ValueError/TypeError from numpy.
    with pytest.raises(SkipwiseError) as info:
        fn(weights)
    assert info.value.codes == [ProblemCode.BAD_WEIGHTS]
    assert fragment in info.value.problems[0].message


def test_class_without_carrier_is_infeasible():
    codes = np.array([0, 0, 1, 1])
    with pytest.raises(SkipwiseError) as info:
        class_adjust(np.ones(4), codes, ["g=1", "g=2"], np.ones(4, dtype=bool),
                     np.array([True, True, False, False]), step="nr",
                     group_of_class=np.array([0, 1]))
    assert info.value.codes == [ProblemCode.INFEASIBLE]
    assert "g=2" in str(info.value)


def test_propensity_coefficients_equal_statsmodels_logit():
    rng = np.random.default_rng(11)
    n = 400
    df = pd.DataFrame({"age": rng.uniform(18, 80, n), "region": rng.choice(["n", "s", "w"], n)})
    eta = -1.0 + 0.03 * df["age"] + (df["region"] == "s") * 0.5
    y = rng.uniform(size=n) < 1 / (1 + np.exp(-eta))
    x = propensity_design(df, ["age", "region"])
    fit = fit_propensity(x, y)
    # Reference: statsmodels Logit called directly on the same design
    direct = sm.Logit(y.astype(float), sm.add_constant(pd.get_dummies(df, columns=["region"], drop_first=True,
                                                                       dtype=float))).fit(disp=0)
    assert_allclose(fit.params.to_numpy(), direct.params.to_numpy(), rtol=1e-8)
    assert_allclose(fit.propensity, direct.predict(), rtol=1e-8)
    # frequency weights all equal to 2 leave the coefficients unchanged (GLM path)
    assert_allclose(fit_propensity(x, y, np.full(n, 2.0)).params.to_numpy(), direct.params.to_numpy(), rtol=1e-6)
    codes, labels = propensity_classes(fit.propensity, 5)
    assert np.bincount(codes).tolist() == [80] * 5 and len(labels) == 5


def test_trim_then_keep_total():
    w = np.array([1.0] * 9 + [20.0])
    res = trim_weights(w, median_multiple=3.5)
    assert res.cap == 3.5 and res.weights.max() <= 3.5 * (1 + 1e-6)
    assert_allclose(res.weights.sum(), w.sum(), rtol=1e-12)
    # Potter (1990) [memory]: the weight cut off is redistributed over the untrimmed cases in
    # proportion to their weights.  By hand: 20 is capped at 3.5 exactly and the nine others
    # share the rest of the total 29, (29 - 3.5)/9 each.
    assert_allclose(res.weights, [25.5 / 9] * 9 + [3.5], rtol=1e-12)
    assert res.iterations == 1 and res.cases_capped == 1 and res.weight_removed_first_pass == 16.5


def test_trim_spreads_excess_over_uncapped_cases_only():
    # Worked by hand (method: Potter 1990 [memory]), total 30, cap 7:
    # round 1 [1,2,3,4,7] -> others x 23/10 = [2.3, 4.6, 6.9, 9.2]; 9.2 > 7 is capped;
    # round 2 [2.3,4.6,6.9,7,7] -> others x 16/13.8 = [2.667, 5.333, 8]; 8 > 7 is capped;
    # round 3 [2.667,5.333,7,7,7] -> others x 9/8 = [3, 6].
    w = np.array([1.0, 2.0, 3.0, 4.0, 20.0])
    res = trim_weights(w, cap=7.0)
    assert_allclose(res.weights, [3.0, 6.0, 7.0, 7.0, 7.0], rtol=1e-12)
    assert res.iterations == 3 and res.max_after == 7.0
    # the capped cases sit exactly at the cap; the uncapped keep their ratio (1 : 2 here)
    assert res.weights[1] / res.weights[0] == pytest.approx(2.0, rel=1e-12)
    with pytest.raises(SkipwiseError) as info:
        trim_weights(w, cap=1.0)
    assert info.value.codes == [ProblemCode.INFEASIBLE]
