"""Model-based imputation: OLS fit, PMM matching, residual draws, logistic/multinomial, MCAR bias."""

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from numpy.testing import assert_allclose

from skipwise.errors import SkipwiseError
from skipwise.impute.draws import match_k_nearest, ols_fit
from skipwise.impute.model import model_impute


@pytest.fixture(scope="module")
def mcar():
    rng = np.random.default_rng(21)
    n = 20_000
    x = rng.normal(size=n)
    y = 3.0 + 1.5 * x + rng.normal(0, 1, n)
    b = (rng.random(n) < 1 / (1 + np.exp(-(x - 0.5)))).astype(float)
    c = np.digitize(x + rng.normal(0, 1, n), [-0.5, 0.7]).astype(float) + 1
    df = pd.DataFrame({"x": x, "y": np.round(y, 1), "b": b, "c": c})
    full = df.copy()
    for col in ("y", "b", "c"):
        df.loc[rng.random(n) < 0.3, col] = np.nan
    return df, full


def test_fast_ols_matches_statsmodels():
    # Reference: statsmodels OLS (params, scale, (X'X)^-1, residuals).
    rng = np.random.default_rng(0)
    x = np.column_stack([np.ones(50), rng.normal(size=(50, 3))])
    y = x @ [1, 2, 3, 4] + rng.normal(size=50)
    ours, ref = ols_fit(y, x), sm.OLS(y, x).fit()
    assert_allclose(ours.params, ref.params, rtol=1e-10)
    assert_allclose(ours.scale, ref.scale, rtol=1e-10)
    assert_allclose(ours.normalized_cov_params, ref.normalized_cov_params, rtol=1e-8)
    collinear = np.column_stack([x, x[:, 1]])   # falls back to statsmodels' pseudo-inverse
    with pytest.warns(Warning):
        ref_c = sm.OLS(y, collinear).fit()
    assert_allclose(ols_fit(y, collinear).params, ref_c.params, rtol=1e-8)


def test_matching_picks_among_k_nearest():
    # Reference: brute force: the chosen donor's distance is at most the k-th smallest distance.
    rng = np.random.default_rng(1)
    donors, rec = rng.normal(size=500), rng.normal(size=200) * 1.5
    idx = match_k_nearest(donors, rec, 5, rng)
    d = np.abs(rec[:, None] - donors[None, :])
    kth = np.sort(d, axis=1)[:, 4]
    assert np.all(np.abs(rec - donors[idx]) <= kth + 1e-12)


@pytest.mark.parametrize("method", ["pmm", "regression"], ids=["pmm", "regression"])
@pytest.mark.parametrize("proper", [False, True], ids=["improper", "proper"])
def test_mean_unbiased_under_mcar(mcar, method, proper):
    # Under MCAR a model fitted to observed cases is unbiased (Rubin 1987, ch. 2 [memory]); the SE of
    # the mean is about 0.013; tolerance 0.06.
    df, full = mcar
    res = model_impute(df, ["y"], predictors=["x"], method=method, proper=proper, seed=2)
    assert res.data["y"].notna().all()
    assert abs(res.data["y"].mean() - full["y"].mean()) < 0.06
    # Residual draws keep the spread (unlike mean fills): SD within 3 %.
    assert abs(res.data["y"].std() / full["y"].std() - 1) < 0.03


def test_pmm_reproduces_only_observed_values(mcar):
    df, _ = mcar
    res = model_impute(df, ["y", "c"], predictors=["x"], method="pmm", seed=3)
    for col in ("y", "c"):
        filled = res.data.loc[res.imputed[col], col]
        assert set(filled).issubset(set(df[col].dropna()))   # Little (1988) [memory]: values come from donors


@pytest.mark.parametrize("residuals", ["normal", "observed"], ids=["normal", "observed"])
def test_regression_residual_kinds(mcar, residuals):
    df, full = mcar
    res = model_impute(df, ["y"], predictors=["x"], method="regression", residuals=residuals, seed=4)
    assert abs(res.data["y"].std() / full["y"].std() - 1) < 0.03


def test_logistic_and_multinomial_shares(mcar):
    # MCAR: the imputed shares should match the full-data shares (SE about 0.004; tolerance 0.02).
    df, full = mcar
    res = model_impute(df, ["b", "c"], predictors=["x"], methods={"b": "logistic", "c": "multinomial"},
                       proper=True, seed=5)
    assert set(res.data["b"].unique()) == {0.0, 1.0}
    assert set(res.data["c"].unique()) == {1.0, 2.0, 3.0}
    assert abs(res.data["b"].mean() - full["b"].mean()) < 0.02
    for v in (1.0, 2.0, 3.0):
        assert abs((res.data["c"] == v).mean() - (full["c"] == v).mean()) < 0.02
    assert not any("failed" in n for n in res.notes)


def test_logistic_on_three_values_falls_back_with_a_note(mcar):
    df, _ = mcar
    res = model_impute(df, ["c"], predictors=["x"], method="logistic", seed=6)
    assert any("used pmm" in n for n in res.notes) and res.data["c"].notna().all()


def test_unknown_method_has_hint():
    df = pd.DataFrame({"x": [1.0, 2.0, 3.0], "y": [1.0, np.nan, 2.0]})
    with pytest.raises(SkipwiseError) as exc:
        model_impute(df, ["y"], predictors=["x"], method="pmn")
    assert "did you mean 'pmm'" in str(exc.value)


def test_donor_order_is_numpys_stable_sort():
    # reference: numpy's own stable argsort, on values with and without ties and NaN
    from skipwise.impute.draws import _stable_order

    rng = np.random.default_rng(5)
    for trial in range(60):
        n = int(rng.integers(1, 2000))
        v = [rng.normal(size=n), rng.integers(0, 5, n).astype(float), np.round(rng.normal(size=n), 2)][trial % 3]
        if trial % 4 == 0:
            v[rng.random(n) < 0.1] = np.nan
        assert np.array_equal(_stable_order(v), np.argsort(v, kind="stable"))
