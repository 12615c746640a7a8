"""Classic missing-data methods: listwise, dropping variables, pairwise matrices, single-value fills."""

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from skipwise.errors import SkipwiseError
from skipwise.impute.classic import (SIMPLE_CAUTION, drop_variables, listwise_delete, pairwise_corr,
                                     pairwise_cov, simple_impute)


@pytest.fixture
def holey():
    rng = np.random.default_rng(3)
    x = rng.normal(size=(200, 4)) @ np.array([[1, .5, 0, 0], [0, 1, .3, 0], [0, 0, 1, .8], [0, 0, 0, 1]])
    x[rng.random(x.shape) < 0.2] = np.nan
    return pd.DataFrame(x * 10 + 1000, columns=list("abcd"))


def test_pairwise_cov_and_corr_match_pandas(holey):
    # Reference: pandas DataFrame.cov() / corr() use pairwise-complete observations.
    assert_allclose(pairwise_cov(holey).matrix, holey.cov(), rtol=1e-10)
    assert_allclose(pairwise_corr(holey).matrix, holey.corr(), rtol=1e-10)
    # Reference: pairwise n = notna().T @ notna().
    nn = holey.notna().astype(int)
    assert (pairwise_corr(holey).n.to_numpy() == (nn.T @ nn).to_numpy()).all()


def test_min_periods_matches_pandas(holey):
    sub = holey.iloc[:12]
    assert_allclose(pairwise_corr(sub, min_periods=8).matrix, sub.corr(min_periods=8), rtol=1e-10)
    assert_allclose(pairwise_cov(sub, min_periods=8).matrix, sub.cov(min_periods=8), rtol=1e-10)


def test_not_psd_is_flagged():
    # Pairs observed on disjoint case sets: corr(a,b)=1, corr(b,c)=1, corr(a,c)=-1, which no
    # valid correlation matrix allows; eigenvalues checked against numpy on pandas' matrix.
    t = np.arange(10.0)
    nan = np.full(10, np.nan)
    df = pd.DataFrame({"a": np.r_[t, nan, t], "b": np.r_[t, t, nan], "c": np.r_[nan, t, -t]})
    res = pairwise_corr(df)
    assert res.psd is False and res.warning and "not positive semi-definite" in res.warning
    assert_allclose(res.eigenvalues, np.linalg.eigvalsh(df.corr().to_numpy()), atol=1e-10)
    assert pairwise_corr(df.fillna(0)).psd is True


def test_listwise_counts_match_dropna():
    df = pd.DataFrame({"g": ["x", "x", "y", "y", "y"], "a": [1, None, 3, 4, None], "b": [1, 2, None, 4, 5]})
    res = listwise_delete(df, ["a", "b"], by="g")
    assert res.n_lost == len(df) - len(df.dropna(subset=["a", "b"]))   # reference: pandas dropna
    assert list(res.data.index) == [0, 3]
    assert res.lost_by_group.loc["y", "lost"] == 2 and res.lost_by_group.loc["x", "kept"] == 1
    assert res.lost_by_item.to_dict() == {"a": 2, "b": 1}
    assert "MCAR" in res.summary()


def test_drop_variables_reports_rate_and_reason():
    df = pd.DataFrame({"a": [1, None, None, None], "b": [1, 2, None, 4], "c": [None] * 4})
    res = drop_variables(df, ["a", "b"], max_missing_rate=0.5)
    assert res.dropped == ("a",) and "75.0% missing" in res.reasons["a"]
    assert list(res.data.columns) == ["b", "c"]          # c was not examined, so it stays
    with pytest.raises(SkipwiseError):
        drop_variables(df, max_missing_rate=1.5)


def test_mean_fill_shrinks_variance_and_says_so(holey):
    res = simple_impute(holey, ["a", "b"], statistic="mean")
    assert_allclose(res.data["a"][res.imputed["a"]], holey["a"].mean())
    assert res.data["a"].var() < holey["a"].var()          # Little & Rubin (2019) sec. 4.2 [memory]
    assert SIMPLE_CAUTION in res.cautions and "shrinks" in res.summary()
    assert res.n_imputed["a"] == holey["a"].isna().sum()


@pytest.mark.parametrize("stat,expected", [("median", 3.0), ("mode", 1.0), ("mean", 13 / 4)],
                         ids=["median", "mode", "mean"])
def test_simple_statistics(stat, expected):
    df = pd.DataFrame({"a": [1.0, 1.0, 5.0, 6.0, None]})
    assert simple_impute(df, ["a"], statistic=stat).data["a"].iloc[4] == pytest.approx(expected)


def test_fill_within_classes_and_empty_class():
    df = pd.DataFrame({"g": ["x", "x", "y", "z"], "s": ["u", None, None, "v"]})
    res = simple_impute(df, ["s"], statistic="mode", by="g")
    assert res.data["s"].iloc[1] == "u" and pd.isna(res.data["s"].iloc[2])
    assert res.unfilled["s"] == 1 and not res.imputed["s"].iloc[2]


def test_missing_column_is_reported_with_hint():
    with pytest.raises(SkipwiseError) as exc:
        pairwise_cov(pd.DataFrame({"alpha": [1.0, 2.0]}), ["alpah"])
    assert "did you mean 'alpha'" in str(exc.value)
