"""Replicate weights and standard errors against textbook formulas."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from skipwise.errors import ProblemCode, SkipwiseError
from skipwise.weighting.plan import load_plan
from skipwise.weighting.pipeline import prepare, run_chain
from skipwise.weighting.replicates import (
    bootstrap_design, jackknife_design, replicate_standard_errors, replicate_variance, run_replicates,
)

SRS_PLAN = "format: 1\ndispositions:\n  column: dispo\n  categories: {I: [1]}\n"


def _srs(n: int, seed: int = 2) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    return pd.DataFrame({"dispo": np.ones(n, dtype=int), "y": rng.gamma(2.0, 3.0, n),
                         "b": rng.choice(["p", "q"], n)})


def _se(df: pd.DataFrame, design) -> pd.DataFrame:
    prep = prepare(df, load_plan(text=SRS_PLAN))
    final = run_chain(prep, prep.base).final
    reps = run_replicates(prep, design)
    return replicate_standard_errors(df, prep.respondent, final, reps, design, means=("y",), proportions=("b",))


def test_jk1_se_of_mean_equals_textbook_under_srs():
    # Cochran (1977), Sampling Techniques [memory]: SE(ȳ) = s/√n · √(1 − f), f = 0 here.
    # Delete-one JK1 reproduces it exactly for the mean.
    df = _srs(150)
    table = _se(df, jackknife_design(df))
    y = df["y"].to_numpy()
    row = table[table["kind"] == "mean"].iloc[0]
    assert_allclose(row["estimate"], y.mean(), rtol=1e-12)
    assert_allclose(row["se"], y.std(ddof=1) / np.sqrt(len(y)), rtol=1e-10)
    # proportion: SE = √(p(1−p)/(n−1)) under SRS (Cochran 1977 [memory]: s² of a 0/1 variable is
    # n p(1−p)/(n−1), so s/√n = √(p(1−p)/(n−1)) [computed])
    p = (df["b"] == "p").mean()
    prow = table[(table["kind"] == "proportion") & (table["category"] == "p")].iloc[0]
    assert_allclose(prow["se"], np.sqrt(p * (1 - p) / (len(df) - 1)), rtol=1e-10)


def test_bootstrap_se_close_to_textbook_on_seeded_sample():
    # Rao & Wu (1988) rescaling bootstrap [memory]; textbook s/√n (Cochran 1977 [memory]).
    # Tolerance: with R = 1000 replicates the Monte Carlo error of an SE is about 1/√(2R) ≈ 2.2 %;
    # we allow 10 %.
    df = _srs(200, seed=9)
    table = _se(df, bootstrap_design(df, count=1000, seed=4))
    y = df["y"].to_numpy()
    se = table[table["kind"] == "mean"]["se"].iloc[0]
    assert se == pytest.approx(y.std(ddof=1) / np.sqrt(len(y)), rel=0.10)


def test_jkn_factors_and_variance_coefficients():
    df = pd.DataFrame({"h": [1, 1, 1, 2, 2], "u": [1, 2, 3, 1, 2]})
    d = jackknife_design(df, psu="u", strata="h")
    assert d.method == "JKn" and d.count == 5
    # replicate deleting PSU 1 of stratum 1: factors 0, 3/2, 3/2 in h=1, 1 elsewhere (Wolter 2007,
    # Introduction to Variance Estimation, JKn: n_h/(n_h − 1) in the deleted PSU's stratum) [memory]
    assert_allclose(d.factors[:, 0], [0, 1.5, 1.5, 1, 1])
    assert_allclose(d.factors[:, 3], [1, 1, 1, 0, 2])
    assert_allclose(d.coef, [2 / 3, 2 / 3, 2 / 3, 1 / 2, 1 / 2])
    # JKn variance = Σ_h (n_h−1)/n_h Σ_j (θ_hj − θ̄_h)² (Wolter 2007 [memory]) on a hand-checked
    # vector: stratum 1 (1, 2, 3) has Σ dev² = 2, stratum 2 (5, 7) has Σ dev² = 2 [computed]
    theta = np.array([1.0, 2.0, 3.0, 5.0, 7.0])[:, None]
    assert_allclose(replicate_variance(theta, d), [2 / 3 * 2 + 1 / 2 * 2])


def test_bootstrap_factors_rao_wu():
    df = pd.DataFrame({"h": [1] * 4 + [2] * 3, "u": [1, 2, 3, 4, 1, 2, 3]})
    d = bootstrap_design(df, psu="u", strata="h", count=50, seed=1)
    # Rao, Wu & Yue (1992) [memory]: m_h = n_h − 1 draws, factor n_h/(n_h−1) · m*; so factors sum to n_h per stratum
    assert_allclose(d.factors[:4].sum(axis=0), 4.0)
    assert_allclose(d.factors[4:].sum(axis=0), 3.0)
    assert set(np.round(d.factors[:4].ravel() * 3 / 4, 10)) <= {0.0, 1.0, 2.0, 3.0}


def test_replicates_rerun_calibration():
    df = _srs(60)
    df["g"] = np.repeat(["a", "b", "c"], 20)
    plan = load_plan(text=SRS_PLAN + "calibration:\n  method: rake\n  margins:\n    g: {a: 10, b: 20, c: 30}\n")
    prep = prepare(df, plan)
    design = jackknife_design(df)
    reps = run_replicates(prep, design)
    sums = pd.DataFrame(reps).groupby(df["g"].to_numpy()).sum()
    assert_allclose(sums.to_numpy(), np.array([[10.0], [20.0], [30.0]]) * np.ones((1, 60)), rtol=1e-9)


def test_single_psu_stratum_is_an_error():
    df = pd.DataFrame({"h": [1, 1, 2], "u": [1, 2, 1]})
    with pytest.raises(SkipwiseError) as info:
        jackknife_design(df, psu="u", strata="h")
    assert info.value.codes == [ProblemCode.INFEASIBLE]


def test_estimate_labels_are_computed_per_distinct_value(monkeypatch):
    # Weighted proportions by hand (the weighted-mean formula Σwy/Σw of a 0/1 variable):
    # respondents' answers 1, 1.0, "2", 2, -9 (special code), missing; weights 1..6.
    # Labels 1 and 1.0 are one category, "2" and 2 another; -9 and the missing case are left out.
    import skipwise.weighting.replicates as rep

    calls = []
    real = rep.category_label
    monkeypatch.setattr(rep, "category_label", lambda v: calls.append(v) or real(v))
    n_cases = 600
    answers = pd.Series(np.tile(np.array([1, 1.0, "2", 2, -9, None], dtype=object), n_cases // 6))
    df = pd.DataFrame({"q": answers, "y": np.tile([1.0, 2.0, 3.0, 4.0, 99.0, np.nan], n_cases // 6)})
    w = np.tile(np.arange(1.0, 7.0), n_cases // 6)
    design = jackknife_design(df.iloc[:6])
    reps = np.tile(w[:, None], (1, design.count))
    table = replicate_standard_errors(df, np.ones(n_cases, dtype=bool), w, reps, design, means=("y",),
                                      proportions=("q",), exclude_values=(-9, 99))
    assert len(calls) <= 2 + 2 * 6  # the exclusions, then each column's distinct values, not 600 cases
    props = table[table["kind"] == "proportion"].set_index("category")["estimate"]
    assert list(props.index) == ["1", "2"]
    assert_allclose(props.to_numpy(), [(1 + 2) / 10, (3 + 4) / 10], rtol=1e-12)
    mean = table.loc[table["kind"] == "mean", "estimate"].iloc[0]
    assert_allclose(mean, (1 * 1 + 2 * 2 + 3 * 3 + 4 * 4) / 10, rtol=1e-12)
    assert table.loc[table["kind"] == "mean", "n"].iloc[0] == 4 * n_cases // 6
