"""R-indicator and partial indicators against hand computation."""

from __future__ import annotations

import numpy as np
import pandas as pd
from numpy.testing import assert_allclose

from skipwise.diagnostics import r_indicator


def _sample(seed=7, n=600):
    rng = np.random.default_rng(seed)
    region = rng.choice(["a", "b", "c"], n)
    age = rng.uniform(18, 80, n)
    p = 1 / (1 + np.exp(-(-0.5 + 0.02 * (age - 50) + np.where(region == "c", -0.8, 0.2))))
    return pd.Series(rng.random(n) < p), pd.DataFrame({"region": region, "age": age})


def test_r_indicator_is_one_minus_twice_sd():
    # Schouten, Cobben & Bethlehem (2009): R = 1 − 2 S(ρ̂), S with divisor N − 1 [memory]
    resp, frame = _sample()
    res = r_indicator(resp, frame, categorical=["region"])
    rho = res.propensities.to_numpy()
    assert_allclose(res.r_indicator, 1 - 2 * np.std(rho, ddof=1), rtol=1e-12)
    # logistic score equations: mean propensity equals the response rate (Hosmer & Lemeshow)
    assert_allclose(res.mean_propensity, resp.mean(), rtol=1e-6)
    assert_allclose(res.max_abs_bias, (1 - res.r_indicator) / (2 * resp.mean()), rtol=1e-6)


def test_partial_indicators_by_hand():
    # Schouten, Shlomo & Skinner (2011): P_U(X,k) = √(N_k/N)(ρ̄_k − ρ̄), P_U(X) = √Σ_k P_U(X,k)² [memory]
    resp, frame = _sample()
    res = r_indicator(resp, frame, categorical=["region"])
    rho = res.propensities
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
    assert any("Unstable estimates" in t and "region=c" in t for t in res.notes)
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
