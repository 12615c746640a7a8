"""Rubin's rules against published worked values and against statsmodels' own combining."""

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from numpy.testing import assert_allclose
from statsmodels.imputation.mice import MICE

from skipwise.errors import SkipwiseError
from skipwise.impute.combine import pool_means, pool_ols, pool_proportions, rubin_pool
from skipwise.impute.mice import mice


def test_worked_example_small_sample_df():
    # REFERENCES.md, Rubin (1987) / Barnard & Rubin (1999) [computed]: Q = 1..5, U_i = 1,
    # nu_com = 10 -> T = 4, r = 3, nu_old = 7.1111, nu = 1.6304.
    p = rubin_pool([1, 2, 3, 4, 5], [1, 1, 1, 1, 1], df_com=10)
    assert_allclose(p.estimate, [3.0])
    assert_allclose(p.total, [4.0], rtol=1e-12)
    assert_allclose(p.r, [3.0], rtol=1e-12)
    assert_allclose(p.lam, [0.75], rtol=1e-12)
    assert_allclose(p.df_old, [7.1111], atol=1e-4)
    assert_allclose(p.df, [1.6304], atol=1e-4)
    # Rubin's gamma = (r + 2/(nu+3))/(r+1) with the reported nu [formula, REFERENCES.md / brief].
    assert_allclose(p.fmi, [(3 + 2 / (1.6304 + 3)) / 4], atol=1e-4)


def test_df_old_484_for_m5_r010():
    # REFERENCES.md [seen: a statistics suite's documentation]: m = 5, r = 0.10 -> nu_old = 484.
    # U = 1.2, B = 0.1 gives r = (1 + 1/5) * 0.1 / 1.2 = 0.10; var(0.2 * [-2..2]) = 0.1.
    q = 0.2 * np.array([-2.0, -1.0, 0.0, 1.0, 2.0])
    p = rubin_pool(q, np.full(5, 1.2))
    assert_allclose(p.r, [0.10], rtol=1e-12)
    assert_allclose(p.df, [484.0], rtol=1e-10)


def test_no_between_variance_gives_observed_df():
    # Barnard & Rubin (1999): with B = 0, nu_old is infinite and nu = nu_obs = (nu_com+1)/(nu_com+3) nu_com.
    p = rubin_pool([2.0, 2.0, 2.0], [0.5, 0.5, 0.5], df_com=20)
    assert_allclose(p.df, [21 / 23 * 20], rtol=1e-12)
    assert_allclose(p.total, [0.5])


def test_shape_mismatch_is_a_user_error():
    with pytest.raises(SkipwiseError):
        rubin_pool([1.0, 2.0], [1.0, 1.0, 1.0])


@pytest.fixture(scope="module")
def completed():
    rng = np.random.default_rng(42)
    n = 400
    x1 = rng.normal(size=n)
    x2 = 0.5 * x1 + rng.normal(size=n)
    y = 1.0 + 2.0 * x1 - 1.0 * x2 + rng.normal(size=n)
    df = pd.DataFrame({"y": y, "x1": x1, "x2": x2})
    df.loc[rng.random(n) < 0.25, "y"] = np.nan
    df.loc[rng.random(n) < 0.15, "x2"] = np.nan
    return mice(df, ["y", "x1", "x2"], m=5, iterations=5, seed=7).datasets


def test_pooled_ols_matches_statsmodels_mice_combine(completed):
    # Reference: statsmodels.imputation.mice.MICE.combine (its own Rubin combining,
    # T = Ubar + (1 + 1/m) B) applied to the same OLS fits on the same completed datasets.
    ours = pool_ols(completed, "y", ["x1", "x2"])
    ref = MICE("y ~ x1 + x2", sm.OLS, None)
    ref.results_list = [sm.OLS(d["y"], sm.add_constant(d[["x1", "x2"]])).fit() for d in completed]
    ref.exog_names, ref.endog_names, ref.model_class = ["const", "x1", "x2"], "y", sm.OLS
    res = ref.combine()
    assert_allclose(ours.estimate, res.params, rtol=1e-10)
    assert_allclose(ours.cov, res.cov_params(), rtol=1e-8)
    assert_allclose(ours.lam, res.frac_miss_info, rtol=1e-8)


def test_pooled_means_and_proportions_match_hand_formulas(completed):
    # Rubin (1987) rules written out directly with pandas.
    p = pool_means(completed, ["y"])
    means = np.array([d["y"].mean() for d in completed])
    u = np.array([d["y"].var() / len(d) for d in completed])
    assert_allclose(p.estimate, [means.mean()])
    assert_allclose(p.total, [u.mean() + 1.2 * means.var(ddof=1)])
    cats = [d.assign(pos=(d["y"] > 1).astype(int)) for d in completed]
    pp = pool_proportions(cats, "pos", [0, 1])
    share = np.array([(d["pos"] == 1).mean() for d in cats])
    assert_allclose(pp.estimate[1], share.mean())
    assert_allclose(pp.estimate.sum(), 1.0)
    lo, hi = pp.ci
    assert np.all(lo < pp.estimate) and np.all(pp.estimate < hi)
