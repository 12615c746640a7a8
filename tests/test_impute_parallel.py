"""Chained equations: the duplicate-column check, and results independent of the number of processes."""

from __future__ import annotations

import numpy as np
import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st

from skipwise.impute.chained import chained_impute
from skipwise.impute.draws import distinct_columns


@settings(max_examples=25, deadline=None)
@given(st.integers(0, 10_000), st.integers(1, 6), st.integers(1, 40))
def test_distinct_columns_matches_numpy_unique(seed, p, n):
    # reference: numpy's own np.unique over the columns (axis=0 of the transpose), first occurrences
    rng = np.random.default_rng(seed)
    base = rng.integers(0, 3, (n, p)).astype(float)
    x = np.hstack([base, base[:, rng.integers(0, p, 3)]])          # repeated columns
    x[:, 0] = -0.0 * x[:, 0] if seed % 2 else x[:, 0]               # −0.0 equals 0.0
    _, first = np.unique(x.T, axis=0, return_index=True)
    assert np.array_equal(distinct_columns(x), np.sort(first))


def _frame(n: int = 400, p: int = 4, seed: int = 3) -> pd.DataFrame:
    # invented data: correlated normals with 20 % missing
    rng = np.random.default_rng(seed)
    x = rng.multivariate_normal(np.zeros(p), 0.5 + 0.5 * np.eye(p), size=n)
    x[rng.random((n, p)) < 0.2] = np.nan
    return pd.DataFrame(x, columns=[f"v{i}" for i in range(p)])


def test_results_do_not_depend_on_the_number_of_processes():
    df = _frame()
    one = chained_impute(df, list(df.columns), m=3, iterations=3, seed=9, workers=1)
    two = chained_impute(df, list(df.columns), m=3, iterations=3, seed=9, workers=2)
    for a, b in zip(one.datasets, two.datasets):
        pd.testing.assert_frame_equal(a, b)
    pd.testing.assert_frame_equal(one.chain_means, two.chain_means)
    assert not one.datasets[0].equals(one.datasets[1])            # the chains differ


def test_each_imputation_has_its_own_seed_sequence():
    # imputation i draws from child i of SeedSequence(seed) (numpy's SeedSequence.spawn): the first
    # three datasets of M = 5 are those of M = 3
    df = _frame(n=200)
    three = chained_impute(df, list(df.columns), m=3, iterations=2, seed=21)
    five = chained_impute(df, list(df.columns), m=5, iterations=2, seed=21)
    for a, b in zip(three.datasets, five.datasets[:3]):
        pd.testing.assert_frame_equal(a, b)


def test_pmm_gives_observed_values_only():
    # PMM draws only observed values (Little 1988)
    df = _frame(n=300).round(1)
    res = chained_impute(df, list(df.columns), m=2, iterations=2, seed=4, workers=2)
    for d in res.datasets:
        for c in df.columns:
            assert set(d.loc[df[c].isna(), c]) <= set(df[c].dropna())
