"""Respondent/nonrespondent comparisons and the nonresponse logit, against scipy/statsmodels."""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd
import statsmodels.api as sm
from numpy.testing import assert_allclose

from skipwise.diagnostics import auc_mann_whitney, compare_item, infer_categorical, nonresponse_logit


def _data(seed=1, n=400):
    rng = np.random.default_rng(seed)
    age = rng.normal(45, 12, n)
    region = rng.choice(["north", "south", "east"], n, p=[0.5, 0.3, 0.2])
    lin = -2 + 0.04 * (age - 45) + np.where(region == "east", 1.0, 0.0)
    miss = pd.Series(rng.random(n) < 1 / (1 + np.exp(-lin)), name="income")
    return miss, pd.DataFrame({"age": age, "region": region})


def test_numeric_comparison_matches_welch_formula():
    # Welch (1947): t = (x̄_m − x̄_r)/√(s²_m/n_m + s²_r/n_r) [memory]; checked against the formula.
    miss, aux = _data()
    res = compare_item(miss, aux, categorical=["region"])
    row = res.table.set_index("auxiliary").loc["age"]
    a, b = aux.age[miss], aux.age[~miss]
    t = (a.mean() - b.mean()) / np.sqrt(a.var() / len(a) + b.var() / len(b))
    assert_allclose(row["statistic"], t, rtol=1e-10)
    # Standardized difference with the pooled SD √((s²_m + s²_r)/2) (Austin 2009, Statistics in
    # Medicine 28:3083–3107, balance diagnostics) [memory].
    assert_allclose(row["std_difference"], (a.mean() - b.mean()) / np.sqrt((a.var() + b.var()) / 2), rtol=1e-12)
    assert res.n_nonrespondents == int(miss.sum())


def test_categorical_comparison_matches_pearson_and_cramer():
    # Pearson χ² = Σ (O − E)²/E and Cramér (1946) V = √(χ²/(n(min(r,c)−1))) [memory].
    miss, aux = _data()
    res = compare_item(miss, aux, categorical=["region"])
    row = res.table.set_index("auxiliary").loc["region"]
    obs = pd.crosstab(aux.region, miss).to_numpy()
    exp = obs.sum(1, keepdims=True) * obs.sum(0, keepdims=True) / obs.sum()
    chi2 = ((obs - exp) ** 2 / exp).sum()
    assert_allclose(row["statistic"], chi2, rtol=1e-10)
    assert_allclose(row["cramers_v"], np.sqrt(chi2 / len(miss)), rtol=1e-10)  # min(3, 2) − 1 = 1
    # the χ² itself against scipy's contingency test (no continuity correction for a 3×2 table)
    from scipy.stats import chi2_contingency
    assert_allclose(row["statistic"], chi2_contingency(obs, correction=False).statistic, rtol=1e-10)
    cats = res.categories.set_index("category")
    assert_allclose(cats.loc["east", "nonresponse_rate"], miss[aux.region == "east"].mean(), rtol=1e-12)


def test_auc_equals_pairwise_count():
    # AUC = P(score_pos > score_neg) + ½ P(tie): direct count over all pairs (Hanley & McNeil 1982 [memory]).
    rng = np.random.default_rng(2)
    s = np.round(rng.normal(size=60), 1)  # rounding makes ties
    y = rng.random(60) < 0.4
    pairs = [(a > b) + 0.5 * (a == b) for a, b in itertools.product(s[y], s[~y])]
    assert_allclose(auc_mann_whitney(s, y), np.mean(pairs), rtol=1e-12)


def test_logit_matches_statsmodels_directly():
    miss, aux = _data()
    res = nonresponse_logit(miss, aux, categorical=["region"])
    # statsmodels called directly on the same design (reference: north, the commonest region)
    x = pd.DataFrame({"const": 1.0, "age": aux.age, "region=east": (aux.region == "east") * 1.0,
                      "region=south": (aux.region == "south") * 1.0})
    ref = sm.Logit(miss.astype(float), x).fit(disp=0)
    t = res.table.set_index("term")
    assert_allclose(t.loc[list(x.columns), "coef"], ref.params, rtol=1e-6)
    assert_allclose(t.loc[list(x.columns), "odds_ratio"], np.exp(ref.params), rtol=1e-6)
    assert_allclose(t.loc[list(x.columns), "or_low"], np.exp(ref.conf_int()[0]), rtol=1e-6)
    assert_allclose(res.lr_p_value, ref.llr_pvalue, rtol=1e-6)
    assert_allclose(res.auc, auc_mann_whitney(ref.predict(x), miss), rtol=1e-12)
    assert res.reference == {"region": "north"}
    assert res.auc > 0.55


def test_missing_auxiliary_rows_dropped_and_counted():
    miss, aux = _data()
    aux = aux.copy()
    aux.loc[[0, 1, 2], "age"] = np.nan
    res = nonresponse_logit(miss, aux, categorical=["region"])
    assert res.n == len(aux) - 3 and "3 in-scope cases" in res.notes[0]


def test_infer_categorical():
    df = pd.DataFrame({"code": [1, 2, 3, 1], "x": [0.5, 1.2, 3.3, 4.1], "s": ["a", "b", "a", "b"]})
    # common practice, no source: few integer levels read as categories
    assert infer_categorical(df) == ("code", "s")


def test_redundant_auxiliary_dropped_with_note():
    # a selection probability fixed within region duplicates the region indicators
    miss, aux = _data()
    aux = aux.assign(sel=aux.region.map({"north": 0.1, "south": 0.2, "east": 0.4}))
    res = nonresponse_logit(miss, aux, categorical=["region"])
    ref = nonresponse_logit(miss, aux.drop(columns="sel"), categorical=["region"])
    assert "sel" not in set(res.table.term)
    assert any("sel" in n for n in res.notes)
    assert_allclose(res.auc, ref.auc, rtol=1e-10)
