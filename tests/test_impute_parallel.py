"""Chained equations: the duplicate-column check, the chain's kept predictor matrix, results
independent of the number of processes, and one BLAS thread while chains run."""

from __future__ import annotations

import numpy as np
import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st

from skipwise.impute.chained import _Design, _predictors, chained_impute
from skipwise.impute.draws import distinct_columns, draw_values, draw_values_const
from skipwise.impute.threads import blas_threads, one_blas_thread


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


@settings(max_examples=25, deadline=None)
@given(st.integers(0, 10_000), st.integers(65, 400), st.integers(0, 399))
def test_distinct_columns_sees_a_difference_outside_the_sampled_rows(seed, n, row):
    # columns equal everywhere but in one row (perhaps not among the rows compared first) are
    # distinct; reference: numpy's own np.unique over the columns
    rng = np.random.default_rng(seed)
    col = rng.integers(0, 2, n).astype(float)
    x = np.column_stack([col, col, col, rng.normal(size=n), col])
    x[row % n, 1] += 1.0
    _, first = np.unique(x.T, axis=0, return_index=True)
    assert np.array_equal(distinct_columns(x), np.sort(first))
    assert list(distinct_columns(x)) == [0, 1, 3]


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


def _mixed(n: int = 3000, seed: int = 4) -> tuple[pd.DataFrame, dict]:
    # invented data: two numeric items, a three-value and a two-value categorical item, a copy of the
    # three-value item (duplicate indicator columns) and covariates with a few gaps
    rng = np.random.default_rng(seed)
    x = rng.normal(size=n)
    c = np.digitize(x + rng.normal(0, 1, n), [-0.5, 0.5]) + 1.0
    df = pd.DataFrame({"x": x, "z": x + rng.normal(size=n), "c": c, "b": (x + rng.normal(size=n) > 0) * 1.0,
                       "dup": c, "g": rng.integers(0, 4, n), "w": rng.normal(size=n)})
    for col in ["x", "z", "c", "b", "dup"]:
        df.loc[rng.random(n) < 0.15, col] = np.nan
    df.loc[rng.random(n) < 0.05, "w"] = np.nan
    kw = dict(covariates=["g", "w"], categorical=["c", "b", "dup", "g"], methods={"z": "regression"})
    return df, kw


def test_kept_design_is_the_plain_predictor_matrix():
    # the chain's kept matrix, split for item j, is the constant followed by the matrix built from
    # scratch (all items but j, categorical ones as indicators, then covariates), in draw_values' layout
    rng = np.random.default_rng(0)
    cur = np.column_stack([rng.normal(size=300), rng.integers(1, 4, 300), rng.normal(size=300),
                           rng.integers(0, 2, 300)]).astype(float)
    xcov = rng.normal(size=(300, 2))
    cat = [1, 3]
    design = _Design(cur, cat, xcov)
    rows_o, rows_m = np.arange(0, 300, 2), np.arange(1, 300, 2)
    for step in range(6):
        j = step % 4
        xo, xm = design.split(j, rows_o, rows_m)
        plain = np.column_stack([np.ones(300), _predictors(cur, j, cat, xcov)])
        assert np.array_equal(xo, plain[rows_o]) and np.array_equal(xm, plain[rows_m])
        assert xo.flags["F_CONTIGUOUS"] and xm.flags["F_CONTIGUOUS"]
        # re-impute item j, once with a new category (the kept matrix widens)
        cur[rows_m, j] = 4.0 if (j == 1 and step == 5) else rng.permutation(cur[rows_o, j])[:rows_m.size]
        design.update(cur, j)
    xo, _ = design.split(0, rows_o, rows_m)
    assert np.array_equal(xo, np.column_stack([np.ones(300), _predictors(cur, 0, cat, xcov)])[rows_o])


def test_draw_values_const_draws_as_draw_values():
    # same values and the same random stream with the constant already in front, a constant
    # column and a repeated column left out
    rng = np.random.default_rng(2)
    x = np.column_stack([rng.normal(size=500), np.ones(500), rng.integers(0, 2, 500)])
    x = np.column_stack([x, x[:, 2]])
    y = x[:, 0] + x[:, 2] + rng.normal(size=500)
    obs = rng.random(500) < 0.8
    for method in ("pmm", "regression", "logistic"):
        yy = (y > 0.5) * 1.0 if method == "logistic" else y
        a_rng, b_rng = np.random.default_rng(7), np.random.default_rng(7)
        a, note_a = draw_values(method, yy[obs], x[obs], x[~obs], a_rng, proper=True)
        xc = np.asfortranarray(np.column_stack([np.ones(500), x]))
        b, note_b = draw_values_const(method, yy[obs], xc[obs], xc[~obs], b_rng, proper=True)
        assert np.array_equal(a, b) and note_a == note_b
        assert a_rng.random() == b_rng.random()


def _plain_chain(df: pd.DataFrame, items: list[str], kw: dict, m: int, iterations: int, seed: int):
    """The chained-equations algorithm written out plainly (van Buuren & Groothuis-Oudshoorn 2011,
    sec. 3.2: start from random observed values, then visit every item in turn and draw it from a
    model on all other items' current values and the covariates): the reference the fast chain
    must reproduce exactly, draw for draw."""
    from skipwise.impute.model import design_matrix

    y = df[items].to_numpy(float)
    miss = np.isnan(y)
    xcov, _ = design_matrix(df, kw["covariates"], kw["categorical"])
    cat = [j for j, it in enumerate(items) if it in kw["categorical"]]
    out = []
    with one_blas_thread():
        for seq in np.random.SeedSequence(seed).spawn(m):
            rng = np.random.default_rng(seq)
            cur = y.copy()
            for j in range(len(items)):
                obs = cur[~miss[:, j], j]
                cur[miss[:, j], j] = obs[rng.integers(0, obs.size, size=int(miss[:, j].sum()))]
            for _ in range(iterations):
                for j, it in enumerate(items):
                    x = _predictors(cur, j, cat, xcov)
                    vals, _ = draw_values(kw["methods"].get(it, "pmm"), y[~miss[:, j], j], x[~miss[:, j]],
                                          x[miss[:, j]], rng, proper=True)
                    cur[miss[:, j], j] = vals
            out.append(cur)
    return out


def test_fast_chain_reproduces_the_plain_algorithm():
    df, kw = _mixed()
    items = ["x", "z", "c", "b", "dup"]
    res = chained_impute(df, items, m=2, iterations=3, seed=11, **kw)
    for done, ref in zip(res.datasets, _plain_chain(df, items, kw, 2, 3, 11)):
        assert np.array_equal(done[items].to_numpy(float), ref)


def test_mixed_items_do_not_depend_on_the_number_of_processes():
    # categorical items, covariates and a regression item, 2 imputations in 1 and in 2 processes
    df, kw = _mixed(n=6000)
    items = ["x", "z", "c", "b", "dup"]
    one = chained_impute(df, items, m=2, iterations=2, seed=5, workers=1, **kw)
    two = chained_impute(df, items, m=2, iterations=2, seed=5, workers=2, **kw)
    for a, b in zip(one.datasets, two.datasets):
        pd.testing.assert_frame_equal(a, b)
    assert one.notes == two.notes


def test_one_blas_thread_restores_the_thread_counts():
    before = blas_threads()
    with one_blas_thread():
        assert all(n == 1 for n in blas_threads())
    assert blas_threads() == before
