"""Chained equations: reproducibility, MAR correction, pooled analysis; observed cells never change."""

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from skipwise.impute.classic import simple_impute
from skipwise.impute.combine import pool_means, pool_ols
from skipwise.impute.hotdeck import hotdeck
from skipwise.impute.chained import chained_impute
from skipwise.impute.model import model_impute


@pytest.fixture(scope="module")
def mar():
    # y missing more often when x is high (MAR given x): the complete-case mean of y is biased
    # low; imputation conditional on x removes that bias (Rubin 1987, ignorability under MAR).
    rng = np.random.default_rng(8)
    n = 5000
    x = rng.normal(size=n)
    y = 2.0 + 0.8 * x + rng.normal(0, 0.6, n)
    df = pd.DataFrame({"x": x, "y": y, "z": 0.5 * y + rng.normal(0, 1, n)})
    p_miss = 1 / (1 + np.exp(-(2 * x - 0.5)))
    df.loc[rng.random(n) < p_miss, "y"] = np.nan
    df.loc[rng.random(n) < 0.1, "z"] = np.nan
    return df, y


def test_mar_bias_removed_and_pooled(mar):
    df, y = mar
    res = chained_impute(df, ["x", "y", "z"], m=5, iterations=5, seed=1)
    cc_bias = df["y"].mean() - y.mean()
    pooled = pool_means(res.datasets, ["y"])
    assert cc_bias < -0.2                                  # the problem is real
    assert abs(pooled.estimate[0] - y.mean()) < 0.05       # ~3 SE of the mean; seeded
    lo, hi = pooled.ci
    assert lo[0] < y.mean() < hi[0]
    slope = pool_ols(res.datasets, "y", ["x"]).estimate[1]
    assert abs(slope - 0.8) < 0.05
    assert (pooled.fmi > 0).all() and (pooled.fmi < 1).all()


def test_seeded_and_distinct(mar):
    df, _ = mar
    a = chained_impute(df, ["x", "y", "z"], m=2, iterations=2, seed=3)
    b = chained_impute(df, ["x", "y", "z"], m=2, iterations=2, seed=3)
    assert all(p.equals(q) for p, q in zip(a.datasets, b.datasets))
    assert not a.datasets[0].equals(a.datasets[1])
    assert a.chain_means.shape == (4, 2)               # x is complete: only y and z are imputed
    st_ = a.stacked()
    assert len(st_) == 2 * len(df) and set(st_["imputation"]) == {1, 2}
    assert a.flags()["y_imp"].sum() == df["y"].isna().sum()


def test_categorical_item_by_multinomial():
    rng = np.random.default_rng(4)
    n = 1500
    x = rng.normal(size=n)
    c = np.digitize(x + rng.normal(0, 1, n), [-0.5, 0.5]) + 1.0
    df = pd.DataFrame({"x": x, "c": c})
    df.loc[rng.random(n) < 0.2, "c"] = np.nan
    res = chained_impute(df, ["x", "c"], methods={"c": "multinomial"}, categorical=["c"], m=2, iterations=2, seed=0)
    assert set(res.datasets[0]["c"].unique()) == {1.0, 2.0, 3.0}


# ---------------------------------------------------------------- property: observed cells never change
frames = st.integers(min_value=6, max_value=40).flatmap(lambda n: st.tuples(
    st.lists(st.floats(-100, 100, allow_nan=False), min_size=n, max_size=n),
    st.lists(st.floats(-100, 100, allow_nan=False), min_size=n, max_size=n),
    st.lists(st.booleans(), min_size=n, max_size=n),
    st.lists(st.booleans(), min_size=n, max_size=n),
    st.lists(st.integers(0, 2), min_size=n, max_size=n),
))


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(frames, st.integers(0, 2**31))
def test_observed_cells_never_change(parts, seed):
    a, b, ma, mb, g = parts
    df = pd.DataFrame({"a": a, "b": b, "g": g})
    df.loc[np.array(ma), "a"] = np.nan
    df.loc[np.array(mb), "b"] = np.nan
    if df["a"].notna().sum() < 1 or df["b"].notna().sum() < 1:
        return
    outs = [
        simple_impute(df, ["a", "b"], statistic="median").data,
        hotdeck(df, ["a", "b"], classes=["g"], seed=seed).data,
        hotdeck(df, ["a", "b"], classes=["g"], covariates=["g"], max_donor_use=2, seed=seed).data,
        model_impute(df, ["a", "b"], predictors=["g"], method="pmm", seed=seed).data,
        *chained_impute(df, ["a", "b"], covariates=["g"], m=2, iterations=2, seed=seed).datasets,
    ]
    observed = df.notna()
    for out in outs:
        assert out.index.equals(df.index)
        pd.testing.assert_frame_equal(out.where(observed), df.where(observed), check_dtype=False)
