"""Rubin's rules against published worked values and against statsmodels' own combining."""

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from numpy.testing import assert_allclose
from statsmodels.imputation.mice import MICE

from skipwise.errors import SkipwiseError
from skipwise.impute.combine import pool_means, pool_ols, pool_proportions, rubin_pool
from skipwise.impute.chained import chained_impute


def test_worked_example_small_sample_df():
    # REFERENCES.md, Rubin (1987) / Barnard & Rubin (1999) [computed]: Q = 1..5, U_i = 1,
    # nu_com = 10 -> T = 4, r = 3, nu_old = 7.1111, nu = 1.6304.
    p = rubin_pool([1, 2, 3, 4, 5], [1, 1, 1, 1, 1], df_com=10)
    assert_allclose(p.estimate, [3.0])
    assert_allclose(p.total, [4.0], rtol=1e-12)
    assert_allclose(p.r, [3.0], rtol=1e-12)
    assert_allclose(p.lam, [0.75], rtol=1e-12)  # λ = (1+1/m)B/T = 3/4 [computed]
    assert_allclose(p.df_old, [7.1111], atol=1e-4)
    assert_allclose(p.df, [1.6304], atol=1e-4)
    # Rubin's gamma = (r + 2/(nu+3))/(r+1) with the reported nu [memory: Rubin 1987, Multiple
    # Imputation for Nonresponse in Surveys; the formula is not in REFERENCES.md].
    assert_allclose(p.fmi, [(3 + 2 / (1.6304 + 3)) / 4], atol=1e-4)


def test_df_old_484_for_m5_r010():
    # REFERENCES.md [seen: a statistics suite's documentation]: m = 5, r = 0.10 -> nu_old = 484.
    # U = 1.2, B = 0.1 gives r = (1 + 1/5) * 0.1 / 1.2 = 0.10; var(0.2 * [-2..2]) = 0.1.
    q = 0.2 * np.array([-2.0, -1.0, 0.0, 1.0, 2.0])
    p = rubin_pool(q, np.full(5, 1.2))
    assert_allclose(p.r, [0.10], rtol=1e-12)
    assert_allclose(p.df, [484.0], rtol=1e-10)


def test_no_between_variance_gives_observed_df():
    # Barnard & Rubin (1999) [memory]: with B = 0, nu_old is infinite and
    # nu = nu_obs = (nu_com+1)/(nu_com+3) nu_com = 21/23 * 20 [computed].
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
    return chained_impute(df, ["y", "x1", "x2"], m=5, iterations=5, seed=7).datasets


def test_pooled_ols_matches_statsmodels_combine(completed):
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


def test_proportions_with_missing_cells_use_the_answered_count():
    # Hand computation (Rubin 1987, ch. 3; binomial variance p(1-p)/n): M = 2 datasets
    # [1, 1, 2, NaN] and [1, 2, 2, NaN]; n = 3 answered cells in each.
    # Shares of 1: 2/3, 1/3 -> Q = 1/2; U = (2/3)(1/3)/3 = 2/27 in both; B = var(2/3, 1/3) = 1/18;
    # T = 2/27 + (1 + 1/2)/18 = 17/108; df_com = n - 1 = 2.
    d = [pd.DataFrame({"c": [1, 1, 2, np.nan]}), pd.DataFrame({"c": [1, 2, 2, np.nan]})]
    p = pool_proportions(d, "c")
    assert p.names == ("c=1.0", "c=2.0")
    assert_allclose(p.estimate.sum(), 1.0, rtol=1e-12)
    assert_allclose(p.estimate, [0.5, 0.5], rtol=1e-12)
    assert_allclose(p.within, [2 / 27, 2 / 27], rtol=1e-12)
    assert_allclose(p.between, [1 / 18, 1 / 18], rtol=1e-12)
    assert_allclose(p.total, [17 / 108, 17 / 108], rtol=1e-12)
    assert p.df_com == 2.0


# Completed data as skip-consistent imputation leaves them: -1 structural code in routed-out
# cells, -9 (refused) in a cell left unfilled, 97 a substantive code (a real answer).
CODES_Q = """
format: 1
survey: {name: pool-test, case_id: id}
codes:
  - {value: -1, reason: routed_out, kind: structural}
  - {value: -9, reason: refused, kind: nonresponse}
sections:
  - name: main
    items:
      - {name: kids, type: integer, range: [0, 20], codes: [{value: 97, reason: many, kind: substantive}]}
      - {name: pet, type: categorical, values: {1: "cat", 2: "dog"}}
"""
CODED = [pd.DataFrame({"kids": [1, 2, 3, -1, -9, 97], "pet": [1, 2, -1, 1, -9, np.nan]}),
         pd.DataFrame({"kids": [2, 2, 4, -1, -9, 97], "pet": [1, 1, -1, 2, -9, 2]})]


def _hand_mean_pool(values):
    # Rubin (1987) rules written out: Q = mean of means, U = mean of s^2/n, T = U + (1 + 1/M) B.
    means = np.array([np.mean(v) for v in values])
    u = np.array([np.var(v, ddof=1) / len(v) for v in values])
    return means.mean(), u.mean() + (1 + 1 / len(values)) * means.var(ddof=1)


@pytest.mark.parametrize("kwargs", [
    {"exclude_values": [-1, -9]},
    {"exclude_values": {"kids": [-1, -9]}},
    {"questionnaire": "Q"},
], ids=["values", "per-item", "questionnaire"])
def test_pool_means_leaves_out_special_codes(kwargs):
    if "questionnaire" in kwargs:
        from skipwise.questionnaire import loads_questionnaire
        kwargs = {"questionnaire": loads_questionnaire(CODES_Q)}
    p = pool_means(CODED, ["kids"], **kwargs)
    q, t = _hand_mean_pool([[1, 2, 3, 97], [2, 2, 4, 97]])   # 97 is an answer (substantive code)
    assert_allclose(p.estimate, [q], rtol=1e-12)
    assert_allclose(p.total, [t], rtol=1e-12)
    assert p.df_com == 3
    # Default: stored values are pooled as they are, codes included (documented behaviour).
    raw = pool_means(CODED, ["kids"])
    assert_allclose(raw.estimate, [_hand_mean_pool([[1, 2, 3, -1, -9, 97], [2, 2, 4, -1, -9, 97]])[0]])


def test_pool_proportions_leaves_out_special_codes():
    from skipwise.questionnaire import loads_questionnaire

    p = pool_proportions(CODED, "pet", questionnaire=loads_questionnaire(CODES_Q))
    # Hand computation: answered pets [1, 2, 1] and [1, 1, 2, 2] -> shares of 1: 2/3 and 1/2.
    assert p.names == ("pet=1.0", "pet=2.0")
    assert_allclose(p.estimate, [7 / 12, 5 / 12], rtol=1e-12)
    assert_allclose(p.within[0], ((2 / 3) * (1 / 3) / 3 + 0.25 / 4) / 2, rtol=1e-12)
    assert_allclose(p.estimate.sum(), 1.0, rtol=1e-12)
    assert p.df_com == 2.0
    same = pool_proportions(CODED, "pet", exclude_values=[-1, -9])
    assert_allclose(same.estimate, p.estimate, rtol=1e-12)
    raw = pool_proportions(CODED, "pet")
    assert raw.names[0] == "pet=-9.0"     # without exclusion the codes are categories


def test_pooling_problems_are_user_errors():
    from skipwise.questionnaire import loads_questionnaire

    with pytest.raises(SkipwiseError) as exc:
        pool_means(CODED, ["kidz"], questionnaire=loads_questionnaire(CODES_Q))
    assert exc.value.problems[0].code.value == "unknown-name" and "kids" in exc.value.problems[0].hint
    with pytest.raises(SkipwiseError) as exc:
        pool_proportions(CODED, "pet", exclude_values=[-1, -9, 1, 2])
    assert exc.value.problems[0].code.value == "bad-data"


def test_skipaware_output_pools_without_codes():
    # End to end: skip-consistent imputation writes the structural code -1 into routed-out
    # cells (skip_fill: code); pooling with the questionnaire must average answers only.
    # hours has range [1, 80] and every special code is negative.
    from tests.test_impute_skipaware import Q, make_data
    from skipwise.impute.skipaware import ItemRule, SkipAwareSpec, impute_skipaware

    res = impute_skipaware(make_data(5, n=300), Q,
                           SkipAwareSpec(default=ItemRule(method="hotdeck"), m=2, seed=4, skip_fill="code"))
    assert any((d["hours"] == -1).any() for d in res.datasets)
    p = pool_means(res.datasets, ["hours"], questionnaire=Q)
    assert_allclose(p.estimate, [np.mean([d["hours"][d["hours"] >= 1].mean() for d in res.datasets])],
                    rtol=1e-12)
    assert pool_means(res.datasets, ["hours"]).estimate[0] < p.estimate[0]


def test_pooling_with_the_questionnaire_leaves_out_invalid_and_off_route_values():
    from tests.test_impute_skipaware import Q, make_data

    d = make_data(7, n=120)
    # hours: range [1, 80], asked only if employed == 1.
    emp = d.index[d["employed"] == 1]
    off = d.index[d["employed"] == 2]
    d.loc[emp[0], "hours"] = 500.0   # invalid
    d.loc[off[0], "hours"] = 40.0    # off route
    datasets = [d, d.assign(hours=d["hours"].where(d.index != emp[1], 10.0))]
    p = pool_means(datasets, ["hours"], questionnaire=Q)
    # By hand: hours values of employed cases that are inside [1, 80].
    def answered(x):
        h = x["hours"]
        return h[(x["employed"] == 1) & (h >= 1) & (h <= 80)].to_numpy()
    assert_allclose(p.estimate, [np.mean([answered(x).mean() for x in datasets])], rtol=1e-12)
