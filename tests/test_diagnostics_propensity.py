"""R-indicator and partial indicators against hand computation."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from numpy.testing import assert_allclose

from skipwise.diagnostics import r_indicator
from skipwise.diagnostics.model import ROBUST_COV_TYPE, SE_MODEL_BASED, SE_ROBUST
from skipwise.diagnostics.propensity import _groups

DOCS = Path(__file__).resolve().parents[1] / "docs" / "diagnostics.md"


def _sample(seed=7, n=600):
    rng = np.random.default_rng(seed)
    region = rng.choice(["a", "b", "c"], n)
    age = rng.uniform(18, 80, n)
    p = 1 / (1 + np.exp(-(-0.5 + 0.02 * (age - 50) + np.where(region == "c", -0.8, 0.2))))
    return pd.Series(rng.random(n) < p), pd.DataFrame({"region": region, "age": age})


def _design(frame):
    """Constant, region indicators (most frequent region as reference, as the code does) and age."""
    ref = frame.region.value_counts().index[0]
    dummies = pd.get_dummies(frame.region, prefix="region", prefix_sep="=", dtype=float)
    return pd.concat([pd.Series(1.0, index=frame.index, name="const"),
                      dummies.drop(columns=f"region={ref}"), frame.age], axis=1)


def _weights(n, seed=5):
    return pd.Series(np.random.default_rng(seed).uniform(0.5, 4.0, n))


def test_r_indicator_is_one_minus_twice_sd():
    # Schouten, Cobben & Bethlehem (2009): R = 1 − 2 S(ρ̂), S with divisor N − 1 [memory]
    resp, frame = _sample()
    res = r_indicator(resp, frame, categorical=["region"])
    rho = res.propensities.to_numpy()
    assert_allclose(res.r_indicator, 1 - 2 * np.std(rho, ddof=1), rtol=1e-12)
    # logistic score equations: mean propensity equals the response rate (Hosmer & Lemeshow [memory])
    assert_allclose(res.mean_propensity, resp.mean(), rtol=1e-6)
    # maximal absolute bias B_m = (1 − R)/(2 ρ̄) (Schouten, Cobben & Bethlehem 2009) [memory]
    assert_allclose(res.max_abs_bias, (1 - res.r_indicator) / (2 * resp.mean()), rtol=1e-6)


def test_partial_indicators_by_hand():
    # Schouten, Shlomo & Skinner (2011): P_U(X,k) = √(N_k/N)(ρ̄_k − ρ̄), P_U(X) = √Σ_k P_U(X,k)² [memory]
    resp, frame = _sample()
    res = r_indicator(resp, frame, categorical=["region"])
    # propensities anchored outside the code: statsmodels Logit fitted here on the same design
    rho = pd.Series(sm.Logit(resp.astype(float), _design(frame)).fit(disp=0).predict(), index=resp.index)
    assert_allclose(res.propensities.to_numpy(), rho.to_numpy(), rtol=1e-7)
    cats = res.categories[res.categories.variable == "region"].set_index("category")
    for k in ["a", "b", "c"]:
        in_k = (frame.region == k).to_numpy()
        expected = np.sqrt(in_k.mean()) * (rho[in_k].mean() - rho.mean())
        assert_allclose(cats.loc[k, "partial_unconditional"], expected, rtol=1e-10)
        # categorical main effect: category mean propensity = category response rate (score equations)
        assert_allclose(cats.loc[k, "mean_propensity"], resp[in_k].mean(), rtol=1e-6)
    assert cats.loc["c", "partial_unconditional"] < 0  # region c under-represented by construction
    pu = res.partial.set_index("variable").loc["region", "partial_unconditional"]
    assert_allclose(pu, np.sqrt((cats["partial_unconditional"] ** 2).sum()), rtol=1e-12)


def test_weights_unit_equal_unweighted_and_integer_equal_replication():
    resp, frame = _sample(n=300)
    base = r_indicator(resp, frame, categorical=["region"])
    ones = r_indicator(resp, frame, categorical=["region"], weights=pd.Series(1.0, index=resp.index))
    assert_allclose(ones.propensities, base.propensities, rtol=1e-6)
    # frequency weights 1/2/3 equal replicating rows (weighted likelihood = replicated likelihood)
    w = pd.Series(np.arange(300) % 3 + 1.0, index=resp.index)
    wres = r_indicator(resp, frame, categorical=["region"], weights=w)
    rep = np.repeat(np.arange(300), w.astype(int))
    rres = r_indicator(resp.iloc[rep].reset_index(drop=True), frame.iloc[rep].reset_index(drop=True),
                       categorical=["region"])
    assert_allclose(wres.propensities.to_numpy()[rep], rres.propensities, rtol=1e-5)
    # S with N = Σd (Schouten et al. 2009) equals the replicated sample's S
    assert_allclose(wres.r_indicator, rres.r_indicator, rtol=1e-5)


def test_separation_is_a_note_not_a_warning():
    # invented data: region "c" never responds, so its coefficient diverges (separation)
    import warnings

    rng = np.random.default_rng(11)
    n = 300
    region = rng.choice(["a", "b", "c"], n)
    resp = pd.Series(np.where(region == "c", False, rng.random(n) < 0.7))
    frame = pd.DataFrame({"region": region, "age": rng.uniform(18, 80, n)})
    with warnings.catch_warnings():
        warnings.simplefilter("error", RuntimeWarning)
        res = r_indicator(resp, frame, categorical=["region"])
    # the shared detector's verdict replaces the old "unstable estimates" wording (Albert & Anderson 1984:
    # a category with no respondent is quasi-complete separation; the other categories overlap)
    assert res.separation is not None and res.separation.verdict == "quasi-complete"
    assert "region=c" in res.separation.terms
    assert any("quasi-complete separation by" in t.lower() and "region=c" in t for t in res.notes)
    c = res.model.set_index("term").loc["region=c"]
    assert np.isnan(c["odds_ratio"]) and np.isnan(c["or_high"])  # no finite estimate shown
    assert np.isfinite(res.r_indicator)


def test_reused_nonresponse_model_equals_a_refit():
    # logistic likelihood is symmetric in the outcomes: β(response) = −β(nonresponse) (Hosmer & Lemeshow)
    from skipwise.diagnostics import nonresponse_logit

    resp, frame = _sample(seed=3)
    nr = nonresponse_logit(~resp, frame, categorical=["region"])
    a = r_indicator(resp, frame, categorical=["region"])
    b = r_indicator(resp, frame, categorical=["region"], nonresponse_model=nr)
    assert_allclose(b.propensities.to_numpy(), a.propensities.to_numpy(), rtol=1e-6)
    assert_allclose(b.model["coef"].to_numpy(), a.model["coef"].to_numpy(), rtol=1e-5, atol=1e-8)
    assert_allclose(b.model["or_low"].to_numpy(), a.model["or_low"].to_numpy(), rtol=1e-5)


def test_unweighted_model_is_labelled_model_based_and_equals_logit():
    # statsmodels Logit fitted directly: model-based (inverse information) SEs and p-values
    resp, frame = _sample(n=400)
    res = r_indicator(resp, frame, categorical=["region"])
    x = _design(frame)
    direct = sm.Logit(resp.astype(float), x).fit(disp=0)
    model = res.model.set_index("term").loc[list(x.columns)]
    assert res.model_se == SE_MODEL_BASED
    assert_allclose(model["std_err"], direct.bse, rtol=1e-6)
    assert_allclose(model["p_value"], direct.pvalues, rtol=1e-5, atol=1e-12)


def test_weighted_model_uses_robust_sandwich_as_documented():
    resp, frame = _sample(n=500)
    w = _weights(len(resp))
    res = r_indicator(resp, frame, categorical=["region"], weights=w)
    x = _design(frame)
    model = res.model.set_index("term").loc[list(x.columns)]
    assert res.model_se == SE_ROBUST and ROBUST_COV_TYPE == "HC0"
    # the docs name this covariance and print the label the results carry
    text = " ".join(DOCS.read_text(encoding="utf-8").split())
    assert 'cov_type="HC0"' in text and SE_ROBUST in text
    # statsmodels GLM fitted directly with the same cov_type on the design weights
    direct = sm.GLM(resp.astype(float), x, family=sm.families.Binomial(), var_weights=w).fit(cov_type="HC0")
    assert_allclose(model["coef"], direct.params, rtol=1e-6)
    assert_allclose(model["std_err"], direct.bse, rtol=1e-6)
    assert_allclose(model["p_value"], direct.pvalues, rtol=1e-5, atol=1e-12)
    assert_allclose(res.propensities.to_numpy(), direct.predict(), rtol=1e-7)
    # Binder (1983) [memory] linearization variance A⁻¹BA⁻¹, A = Σ d ρ(1−ρ) x xᵀ, B = Σ d² (y−ρ)² x xᵀ, by hand
    xv, d, y, rho = x.to_numpy(float), w.to_numpy(), resp.to_numpy(float), res.propensities.to_numpy()
    a_inv = np.linalg.inv(xv.T @ (xv * (d * rho * (1 - rho))[:, None]))
    b = xv.T @ (xv * ((d * (y - rho)) ** 2)[:, None])
    assert_allclose(model["std_err"], np.sqrt(np.diag(a_inv @ b @ a_inv)), rtol=1e-5)
    # not the model-based SEs of the same weighted fit (the old, unlabelled ones)
    naive = sm.GLM(resp.astype(float), x, family=sm.families.Binomial(), freq_weights=w * len(w) / w.sum()).fit()
    assert not np.allclose(model["std_err"], naive.bse, rtol=1e-3)


def test_robust_standard_errors_do_not_depend_on_the_weight_scale():
    # sandwich A⁻¹BA⁻¹ is invariant to d → c·d (A scales by c, B by c²) (Binder 1983)
    resp, frame = _sample(n=300)
    w = _weights(len(resp))
    a = r_indicator(resp, frame, categorical=["region"], weights=w)
    b = r_indicator(resp, frame, categorical=["region"], weights=w * 250.0)
    assert_allclose(b.model["std_err"].to_numpy(), a.model["std_err"].to_numpy(), rtol=1e-7)


@pytest.mark.parametrize("values", [
    [3.0, 1.0, 3.0, 2.0, 1.0, 1.0],
    [0.5, 1e-7, 0.5, 250000.0, 1e-7],
    [0.0, -0.0, 1.25, 0.0, 1.25],
    [7.0, 7.0, 7.0],
], ids=["integers", "fractions-and-exponents", "signed-zero", "one-value"])
def test_numeric_groups_format_like_per_case_g(values):
    # reference: Python's own "g" format applied to every case (the former per-case implementation)
    s = pd.Series(values, index=pd.RangeIndex(10, 10 + len(values)), name="v")
    got = _groups(s, False, 5)
    expected = s.map(lambda v: f"{v:g}")
    assert got.tolist() == expected.tolist()
    assert got.index.equals(s.index)


@pytest.mark.parametrize("weighted, label", [(False, SE_MODEL_BASED), (True, SE_ROBUST)],
                         ids=["unweighted", "weighted"])
def test_model_standard_errors_labelled_in_the_workbook(tmp_path, weighted, label):
    # invented data: item x answered by the cases of _sample that "responded", nonresponse otherwise

    from skipwise.diagnostics import missingness_frame, run_diagnostics, write_diagnostics_workbook

    resp, frame = _sample(n=200)
    values = pd.DataFrame({"x": np.where(resp, frame.age.round(), np.nan)})
    mframe = missingness_frame(values, pd.DataFrame({"x": True}, index=values.index),
                               pd.DataFrame({"x": ~resp.to_numpy()}, index=values.index))
    rep = run_diagnostics(mframe, frame[["region"]], weights=_weights(len(resp)) if weighted else None)
    assert [r.model_se for r in rep.r_indicators] == [label]
    path = tmp_path / "d.xlsx"
    write_diagnostics_workbook(rep, path)
    from sheetread import table

    overall = table(path, "Representativeness", "Response").iloc[0]
    assert overall["Standard errors"] == label
    coefs = table(path, "Representativeness", "Response", nth=3)  # the propensity model's coefficients
    assert list(coefs.columns[:2]) == ["Response", "Term"]
    assert set(coefs["Standard errors"]) == {label}
    assert_allclose(coefs["Std error"].astype(float), rep.r_indicators[0].model["std_err"], rtol=1e-12)
