"""Little's MCAR test against closed forms, simulations and an open dataset."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose
from scipy import stats

from skipwise.diagnostics import little_mcar_test
from skipwise.errors import ProblemCode, SkipwiseError


def _two_pattern(seed: int = 3, n: int = 120):
    rng = np.random.default_rng(seed)
    x = rng.normal(10, 2, n)
    y = 1.5 * x + rng.normal(0, 1, n)
    miss = rng.random(n) < np.where(x > 10, 0.45, 0.15)
    y[miss] = np.nan
    return x, y, miss


def test_two_patterns_equal_two_sample_closed_form():
    # REFERENCES.md, Little (1988) [seen, abstract; computed, derived]:
    # d² = (ȳ1,obs − ȳ1,mis)² / (σ̂11 (1/n_obs + 1/n_mis)), σ̂11 divisor-n variance, df = 1.
    x, y, miss = _two_pattern()
    res = little_mcar_test(pd.DataFrame({"x": x, "y": y}))
    expected = (x[~miss].mean() - x[miss].mean()) ** 2 / (np.var(x) * (1 / (~miss).sum() + 1 / miss.sum()))
    assert_allclose(res.statistic, expected, rtol=1e-7)
    assert res.df == 1 and res.n_patterns == 2 and res.n_cases == len(x)
    assert_allclose(res.p_value, stats.chi2.sf(expected, 1), rtol=1e-6)


def test_several_complete_variables_equal_hotelling_form():
    # Same derivation with a vector of complete variables [computed, derived from REFERENCES.md]:
    # d² = n_A n_B / n · (x̄_A − x̄_B)ᵀ Σ̂_xx⁻¹ (x̄_A − x̄_B), df = number of complete variables.
    rng = np.random.default_rng(11)
    n = 150
    xs = rng.normal(size=(n, 3)) @ np.array([[1, 0.3, 0], [0, 1, 0.5], [0, 0, 1.0]])
    y = xs.sum(axis=1) + rng.normal(size=n)
    miss = rng.random(n) < 0.3
    y[miss] = np.nan
    res = little_mcar_test(pd.DataFrame({"a": xs[:, 0], "b": xs[:, 1], "c": xs[:, 2], "y": y}))
    d = xs[~miss].mean(0) - xs[miss].mean(0)
    s = np.cov(xs.T, bias=True)
    expected = (~miss).sum() * miss.sum() / n * d @ np.linalg.solve(s, d)
    assert_allclose(res.statistic, expected, rtol=1e-6)
    assert res.df == 3


def test_fully_observed_gives_zero():
    # Little (1988): with one pattern, ȳ_j = μ̂, so d² = 0 and df = Σp_j − p = 0 [memory].
    rng = np.random.default_rng(0)
    df = pd.DataFrame(rng.normal(size=(40, 3)), columns=list("abc"))
    res = little_mcar_test(df)
    assert res.statistic == pytest.approx(0.0, abs=1e-12)
    assert res.df == 0 and res.n_patterns == 1 and np.isnan(res.p_value)
    assert_allclose(res.cov.to_numpy(), np.cov(df.to_numpy().T, bias=True), rtol=1e-12)


def test_em_matches_factored_likelihood_on_monotone_data():
    # Anderson (1957), JASA 52:200–203, factored likelihood for monotone bivariate normal data
    # [memory]: μ1, σ11 from all cases; β, residual variance from complete cases;
    # μ2 = ȳ2 + β(μ1 − ȳ1), σ12 = βσ11, σ22 = s22·1 + β²σ11 (all divisor n).
    x, y, miss = _two_pattern(seed=8, n=80)
    res = little_mcar_test(pd.DataFrame({"x": x, "y": y}))
    xc, yc = x[~miss], y[~miss]
    mu1, s11 = x.mean(), np.var(x)
    beta = np.cov(xc, yc, bias=True)[0, 1] / np.var(xc)
    resid = np.var(yc) - beta ** 2 * np.var(xc)
    mu2 = yc.mean() + beta * (mu1 - xc.mean())
    assert_allclose(res.mean.to_numpy(), [mu1, mu2], rtol=1e-7)
    assert_allclose(res.cov.to_numpy(), [[s11, beta * s11], [beta * s11, resid + beta ** 2 * s11]], rtol=1e-6)
    assert res.converged


def _mcar_p(rng, n=150):
    z = rng.multivariate_normal([0, 0, 0], [[1, .5, .3], [.5, 1, .4], [.3, .4, 1]], size=n)
    z[rng.random(n) < 0.2, 1] = np.nan
    z[rng.random(n) < 0.15, 2] = np.nan
    return little_mcar_test(pd.DataFrame(z, columns=list("abc"))).p_value


def test_p_values_roughly_uniform_under_mcar():
    # Under MCAR d² is asymptotically chi-square (Little 1988), so p-values are ~Uniform(0,1);
    # checked with scipy's Kolmogorov–Smirnov test.
    rng = np.random.default_rng(20240)
    ps = np.array([_mcar_p(rng) for _ in range(200)])
    assert stats.kstest(ps, "uniform").pvalue > 0.01
    assert 0.4 <= ps.mean() <= 0.6


def test_power_under_strong_mar():
    # Missingness of y strongly driven by observed x: the test should reject nearly always
    # (Little 1988 power discussion; threshold 0.9 is common practice, no source).
    rng = np.random.default_rng(5)
    rejections = 0
    for _ in range(40):
        n = 500
        x = rng.normal(size=n)
        y = 0.5 * x + rng.normal(size=n)
        y[rng.random(n) < 1 / (1 + np.exp(-(2 * x - 1)))] = np.nan
        rejections += little_mcar_test(pd.DataFrame({"x": x, "y": y})).p_value < 0.05
    assert rejections / 40 > 0.9


def test_all_missing_rows_dropped_and_said():
    x, y, miss = _two_pattern()
    df = pd.DataFrame({"x": np.r_[x, np.nan, np.nan], "y": np.r_[y, np.nan, np.nan]})
    res = little_mcar_test(df)
    ref = little_mcar_test(pd.DataFrame({"x": x, "y": y}))
    assert res.n_dropped_all_missing == 2 and res.n_cases == len(x)
    assert_allclose(res.statistic, ref.statistic, rtol=1e-10)
    assert any("every variable missing" in n for n in res.notes)


def test_invariant_to_rescaling():
    # d² is invariant under affine maps of each variable (Little 1988) [memory]
    rng = np.random.default_rng(9)
    z = rng.normal(size=(90, 3))
    z[rng.random(90) < 0.3, 0] = np.nan
    z[rng.random(90) < 0.3, 2] = np.nan
    a = little_mcar_test(pd.DataFrame(z, columns=list("abc")))
    b = little_mcar_test(pd.DataFrame(z * [1000, 0.01, -3] + [5, -7, 1e4], columns=list("abc")))
    assert_allclose(a.statistic, b.statistic, rtol=1e-6)


def test_many_patterns_table():
    rng = np.random.default_rng(4)
    n, p = 3000, 8
    z = rng.normal(size=(n, p)) + rng.normal(size=(n, 1))
    z[rng.random((n, p)) < 0.2] = np.nan
    res = little_mcar_test(pd.DataFrame(z, columns=[f"v{k}" for k in range(p)]))
    assert res.n_patterns > 100
    assert res.patterns["n_cases"].sum() == res.n_cases
    assert_allclose(res.patterns["d2_contribution"].sum(), res.statistic, rtol=1e-10)
    # df = Σ_j p_j − p (Little 1988)
    assert res.df == res.patterns["n_observed"].sum() - p
    assert 0 <= res.p_value <= 1


@pytest.mark.parametrize("frame, named", [
    (pd.DataFrame({"a": [1.0, 2, 3, np.nan, 5], "k": [2.0] * 5, "b": [1.0, 0, 2, 1, np.nan]}), {"k"}),
    (pd.DataFrame({"a": [1.0, 2, 3, 4, 5, 6], "b": [2.0, 4, 6, np.nan, 10, 12],
                   "c": [1.0, 0, 1, 1, np.nan, 0]}), {"a", "b"}),
    (pd.DataFrame({"a": [1.0, 2, 3, 4, 5, 6, 7], "b": [0.0, 1, 0, 1, 1, 0, 2],
                   "s": [1.0, 3, 3, 5, 6, 6, np.nan]}), {"a", "b", "s"}),
], ids=["constant", "collinear-pair", "sum-of-two"])
def test_singular_covariance_names_variables(frame, named):
    with pytest.raises(SkipwiseError) as exc:
        little_mcar_test(frame)
    err = exc.value
    assert err.codes == [ProblemCode.SINGULAR]
    assert named <= set(err.problems[0].item.split(", "))
    assert err.problems[0].hint


def test_non_numeric_column_is_an_error():
    with pytest.raises(SkipwiseError) as exc:
        little_mcar_test(pd.DataFrame({"a": [1.0, 2, np.nan], "t": ["x", "y", "z"]}))
    assert exc.value.codes == [ProblemCode.BAD_DATA] and exc.value.problems[0].item == "t"


def test_open_dataset_smoke():
    # Open data: palmerpenguins (PyPI), 344 penguins with real missing values (REFERENCES.md).
    pp = pytest.importorskip("palmerpenguins")
    df = pp.load_penguins()
    frame = df[["bill_length_mm", "bill_depth_mm", "flipper_length_mm", "body_mass_g"]].copy()
    frame["male"] = df["sex"].map({"male": 1.0, "female": 0.0})
    res = little_mcar_test(frame)
    assert res.n_dropped_all_missing == 2 and res.n_cases == 342
    assert res.n_patterns == 2 and res.df == 4
    # one incomplete variable: the Hotelling form of the closed case [computed, derived]
    x = frame.dropna(subset=["bill_length_mm"]).iloc[:, :4].to_numpy()
    m = frame.dropna(subset=["bill_length_mm"])["male"].isna().to_numpy()
    d = x[~m].mean(0) - x[m].mean(0)
    expected = (~m).sum() * m.sum() / len(m) * d @ np.linalg.solve(np.cov(x.T, bias=True), d)
    assert_allclose(res.statistic, expected, rtol=1e-6)


def test_default_choice_leaves_out_a_duplicated_item():
    # invented frame: "age2" repeats "age" (asked twice); the greedy choice must keep only one,
    # otherwise the covariance matrix is singular (R² = 1 ≥ MAX_R_SQUARED, common practice, no source)
    from skipwise.diagnostics import missingness_frame
    from skipwise.diagnostics.report import choose_little_items

    rng = np.random.default_rng(5)
    n = 200
    age = rng.integers(18, 90, n).astype(float)
    vals = pd.DataFrame({"age": age, "age2": age, "score": rng.normal(50, 10, n)})
    miss = pd.DataFrame({c: rng.random(n) < 0.05 for c in vals.columns})
    universe = pd.DataFrame(True, index=vals.index, columns=vals.columns)
    mf = missingness_frame(vals.mask(miss), universe, miss)
    chosen = choose_little_items(mf, list(vals.columns))
    assert "score" in chosen and len({"age", "age2"} & set(chosen)) == 1
    res = little_mcar_test(mf.joint(chosen).frame)  # runs: no singular covariance
    assert res.n_variables == 2


def _plain_em_statistic(y: np.ndarray, iterations: int = 3000) -> float:
    """Little's d² from EM written case by case, without acceleration (a slow, plain reference).

    E-step for each case: the missing part's conditional mean μ_m + Σ_mo Σ_oo⁻¹ (y_o − μ_o) and
    conditional covariance Σ_mm − Σ_mo Σ_oo⁻¹ Σ_om (Little & Rubin 2002, Statistical Analysis with
    Missing Data, 2nd ed., §11.2.1); M-step: mean and divisor-n covariance of the completed data.
    """
    n, p = y.shape
    obs = ~np.isnan(y)
    mu, sigma = np.nanmean(y, axis=0), np.diag(np.nanvar(y, axis=0))
    for _ in range(iterations):
        t1, t2 = np.zeros(p), np.zeros((p, p))
        for i in range(n):
            o, m = obs[i], ~obs[i]
            yi, extra = y[i].copy(), np.zeros((p, p))
            if m.any():
                b = np.linalg.solve(sigma[np.ix_(o, o)], sigma[np.ix_(o, m)]).T
                yi[m] = mu[m] + b @ (y[i, o] - mu[o])
                extra[np.ix_(m, m)] = sigma[np.ix_(m, m)] - b @ sigma[np.ix_(o, m)]
            t1 += yi
            t2 += np.outer(yi, yi) + extra
        mu = t1 / n
        sigma = t2 / n - np.outer(mu, mu)
    d2 = 0.0
    codes = obs @ (1 << np.arange(p))
    for c in np.unique(codes):
        rows = codes == c
        o = obs[rows][0]
        d = y[rows][:, o].mean(axis=0) - mu[o]
        d2 += rows.sum() * d @ np.linalg.solve(sigma[np.ix_(o, o)], d)
    return float(d2)


def test_accelerated_em_reaches_the_plain_em_statistic():
    # The extrapolated EM (Varadhan & Roland 2008) must land on plain EM's fixed point: d² as
    # Little (1988) defines it from the plain, case-by-case EM estimates above.
    rng = np.random.default_rng(21)
    y = rng.normal(size=(60, 3)) @ np.array([[1, 0.6, 0.3], [0, 1, 0.5], [0, 0, 1.0]])
    y[rng.random(60) < 0.3, 1] = np.nan
    y[rng.random(60) < 0.25, 2] = np.nan
    y[rng.random(60) < 0.15, 0] = np.nan
    y = y[~np.isnan(y).all(axis=1)]
    res = little_mcar_test(pd.DataFrame(y, columns=list("abc")), tol=1e-12)
    assert res.converged and res.iterations < 200
    assert_allclose(res.statistic, _plain_em_statistic(y, iterations=400), rtol=1e-8)
