"""Finite population correction of replicate variances, and which cap trimmed replicates use."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from skipwise.errors import SkipwiseError
from skipwise.weighting.pipeline import prepare, run_chain
from skipwise.weighting.plan import load_plan
from skipwise.weighting.replicates import (
    bootstrap_design, jackknife_design, replicate_variance, run_replicates, weighted_estimates,
)
from skipwise.weighting.weigh import weigh


def _jk_var_of_mean(y: np.ndarray, w: np.ndarray, design) -> float:
    theta = weighted_estimates(y[:, None], np.ones((len(y), 1), bool), w[:, None] * design.factors)
    return float(replicate_variance(theta, design)[0])


def test_jk1_with_fpc_is_cochran_srswor():
    # Cochran (1977), Sampling Techniques, 3rd ed., sec. 2.5: V(ȳ) = (1 − n/N) s²/n under SRSWOR
    rng = np.random.default_rng(3)
    n, big_n = 120, 400
    y = rng.gamma(2.0, 3.0, n)
    frame = pd.DataFrame({"y": y})
    design = jackknife_design(frame, fraction=np.full(n, n / big_n))
    got = _jk_var_of_mean(y, np.full(n, big_n / n), design)
    assert_allclose(got, (1 - n / big_n) * y.var(ddof=1) / n, rtol=1e-10)
    # without fractions: the with-replacement variance s²/n, no correction
    plain = _jk_var_of_mean(y, np.full(n, big_n / n), jackknife_design(frame))
    assert_allclose(plain, y.var(ddof=1) / n, rtol=1e-10)


def test_jkn_with_fpc_is_the_stratified_formula():
    # Cochran (1977), sec. 5.3: V(ȳ_st) = Σ_h W_h² (1 − f_h) s_h²/n_h, W_h = N_h/N; the JKn
    # stratum factor (n_h − 1)/n_h times (1 − f_h)
    rng = np.random.default_rng(5)
    n_h, big = np.array([30, 45, 25]), np.array([90, 600, 50])
    stratum = np.repeat([0, 1, 2], n_h)
    y = rng.normal(10 + 3 * stratum, 2 + stratum)
    f = (n_h / big)[stratum]
    frame = pd.DataFrame({"h": stratum, "y": y})
    design = jackknife_design(frame, strata="h", fraction=f)
    got = _jk_var_of_mean(y, (big / n_h)[stratum], design)
    w_h = big / big.sum()
    s2 = np.array([y[stratum == h].var(ddof=1) for h in range(3)])
    assert_allclose(got, float(np.sum(w_h ** 2 * (1 - n_h / big) * s2 / n_h)), rtol=1e-10)


def test_bootstrap_with_fpc_is_close_to_cochran():
    # Rao & Wu (1988), JASA 83, 231-241: rescaling with λ_h = √(m_h(1 − f_h)/(n_h − 1)) makes the
    # bootstrap variance of a linear statistic (1 − f) s²/n (Cochran 1977, sec. 2.5). With R = 4000
    # replicates the Monte Carlo error of a variance is about √(2/R) ≈ 2 %; we allow 8 %.
    rng = np.random.default_rng(8)
    n, big_n = 80, 160
    y = rng.gamma(2.0, 3.0, n)
    design = bootstrap_design(pd.DataFrame({"y": y}), count=4000, seed=2, fraction=np.full(n, n / big_n))
    assert (design.factors >= 0).all()
    got = _jk_var_of_mean(y, np.ones(n), design)
    assert got == pytest.approx((1 - n / big_n) * y.var(ddof=1) / n, rel=0.08)


def test_fraction_must_be_one_per_stratum():
    frame = pd.DataFrame({"h": [0, 0, 1, 1]})
    with pytest.raises(SkipwiseError, match="more than one sampling fraction"):
        jackknife_design(frame, strata="h", fraction=np.array([0.1, 0.2, 0.3, 0.3]))


def test_plan_fpc_needs_fractions():
    with pytest.raises(SkipwiseError, match="'fpc: true' needs the sampling fractions"):
        load_plan(text="format: 1\ndispositions: {column: d, categories: {I: [1]}}\n"
                       "replicates: {method: jackknife, psu: p, fpc: true}\n")


def test_plan_fpc_from_base_probability_in_weigh():
    rng = np.random.default_rng(1)
    n_h = np.array([40, 60])
    h = np.repeat([0, 1], n_h)
    frame = pd.DataFrame({"d": 1, "h": h, "p": (n_h / np.array([200, 300]))[h], "y": rng.normal(5, 2, 100)})
    plan = load_plan(text="format: 1\ndispositions: {column: d, categories: {I: [1]}}\nbase: {probability: p}\n"
                          "replicates: {method: jackknife, strata: h, fpc: true}\nestimates: {means: [y]}\n")
    se = weigh(frame, plan).estimates.set_index("variable").loc["y", "se"]
    # Cochran (1977), sec. 5.3, with f_h = p
    w_h = np.array([200, 300]) / 500
    s2 = np.array([frame.y[h == k].var(ddof=1) for k in (0, 1)])
    assert_allclose(se, np.sqrt(np.sum(w_h ** 2 * (1 - n_h / np.array([200, 300])) * s2 / n_h)), rtol=1e-9)


def test_trimmed_replicates_use_their_own_cap():
    # each replicate applies the plan's rule (k × its own median), not the full sample's cap
    rng = np.random.default_rng(4)
    n = 60
    frame = pd.DataFrame({"d": 1, "w0": np.r_[rng.uniform(1, 2, n - 3), [15.0, 18.0, 20.0]]})
    plan = load_plan(text="format: 1\ndispositions: {column: d, categories: {I: [1]}}\nbase: {weight: w0}\n"
                          "trimming: {median_multiple: 3}\nreplicates: {method: jackknife}\n")
    prep = prepare(frame, plan)
    full = run_chain(prep, prep.base)
    design = jackknife_design(frame)
    reps = run_replicates(prep, design, structure=full.structure)
    full_cap = full.trimming.cap
    for r in range(design.count):
        entering = prep.base * design.factors[:, r]        # no other step: trimming gets these
        cap_r = 3 * np.median(entering[entering > 0])
        assert_allclose(reps[:, r].max(), cap_r, rtol=1e-6)  # the capped cases sit at their own cap
    # the rescaled replicates' caps lie above the full sample's: their capped cases exceed it
    assert (reps.max(axis=0) > full_cap * (1 + 1e-6)).all()


def test_design_describes_method_factors_formula_and_fpc():
    frame = pd.DataFrame({"h": [0, 0, 1, 1]})
    plain = " ".join(jackknife_design(frame, strata="h").describe())
    assert "JKn" in plain and "n_h/(n_h − 1)" in plain and "no finite population correction" in plain
    with_fpc = " ".join(bootstrap_design(frame, strata="h", count=5, fraction=np.full(4, 0.2)).describe())
    assert "Rao–Wu" in with_fpc and "λ_h = √(1 − f_h)" in with_fpc and "(1 − f_h)" in with_fpc
