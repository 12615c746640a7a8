"""Raking and calibration against published examples and independent solvers."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings, strategies as st
from numpy.testing import assert_allclose
from scipy import optimize

from skipwise.errors import ProblemCode, SkipwiseError
from skipwise.weighting.calibrate import (
    calibrate_linear, calibrate_logit, logit_g, poststratify, rake,
)


def _table(seed: list[list[float]]) -> pd.DataFrame:
    rows = [{"row": i, "col": j, "w": v} for i, r in enumerate(seed) for j, v in enumerate(r)]
    return pd.DataFrame(rows)


def _ipf(seed: np.ndarray, rows: np.ndarray, cols: np.ndarray, sweeps: int = 500) -> np.ndarray:
    """Deming & Stephan (1940) iterative proportional fitting of a two-way table, written
    out here with plain numpy so the check does not depend on skipwise's raking code."""
    x = np.asarray(seed, dtype=float).copy()
    for _ in range(sweeps):
        x *= (rows / x.sum(axis=1))[:, None]  # scale each row to its target
        x *= (cols / x.sum(axis=0))[None, :]  # then each column
        if np.allclose(x.sum(axis=1), rows, rtol=1e-14, atol=0):
            break
    return x


def test_rake_two_by_two_tutorial_example():
    # 2x2 example: input [seen] in a public modelling-with-data tutorial; result [[1.7757, 3.2243],
    # [8.2243, 6.7757]] [computed, closed form]: raking keeps the seed's odds ratio 49/108, so
    # x11 = (-1275 + sqrt(2203825))/118 (see /work/shared/REFERENCES.md).
    df = _table([[7, 9], [12, 7]])
    w = rake(df, {"row": {0: 5, 1: 15}, "col": {0: 10, 1: 10}}, weight="w")
    assert_allclose(w.to_numpy(), [1.7757, 3.2243, 8.2243, 6.7757], atol=5e-5)
    assert_allclose(w.iloc[0], (-1275 + math.sqrt(2203825)) / 118, rtol=1e-9)
    odds = w.iloc[0] * w.iloc[3] / (w.iloc[1] * w.iloc[2])
    assert_allclose(odds, 49 / 108, rtol=1e-9)
    independent = _ipf(np.array([[7, 9], [12, 7]]), np.array([5.0, 15.0]), np.array([10.0, 10.0]))
    assert_allclose(w.to_numpy(), independent.ravel(), rtol=1e-9)


def test_rake_two_by_four_sample_balancing():
    # 2x4 sample balancing: input [seen] in a public optimisation-software example (n = 1000,
    # targets 50/50 by sex and 40/30/20/10 % by income band).  Expected values [computed] by the
    # plain-numpy IPF loop _ipf above (Deming & Stephan 1940), rounded to 4 decimals in
    # /work/shared/REFERENCES.md; recomputed here so the literal values are checked too.
    seed = np.array([[220, 147, 106, 55], [193, 149, 94, 36]], dtype=float)
    rows, cols = np.array([500.0, 500.0]), np.array([400.0, 300.0, 200.0, 100.0])
    independent = _ipf(seed, rows, cols)
    expected = [201.6398, 140.4091, 100.2803, 57.6708, 198.3602, 159.5909, 99.7197, 42.3292]
    assert_allclose(independent.ravel(), expected, atol=5e-5)  # the literals are this loop's result
    df = pd.DataFrame({
        "sex": ["F"] * 4 + ["M"] * 4,
        "inc": [1, 2, 3, 4] * 2,
        "n": seed.ravel(),
    })
    w = rake(df, {"sex": {"F": 500, "M": 500}, "inc": {1: 400, 2: 300, 3: 200, 4: 100}}, weight="n")
    assert_allclose(w.to_numpy(), independent.ravel(), rtol=1e-9)  # both converge to the same table
    assert_allclose(w.to_numpy(), expected, atol=5e-5)


def test_rake_default_weight_and_index_alignment():
    df = pd.DataFrame({"sex": [1, 1, 2], "age": ["y", "o", "o"]}, index=[10, 20, 30])
    w = rake(df, {"sex": {1: 50, 2: 50}, "age": {"y": 40, "o": 60}})
    assert list(w.index) == [10, 20, 30]
    # exact solution by hand: the two sex-1 cases split 50 as 40/10, sex-2 takes 50 [computed]
    assert_allclose(w.to_numpy(), [40, 10, 50], rtol=1e-9)


def test_category_labels_match_across_types():
    df = pd.DataFrame({"g": [1.0, 2.0, 2.0]})
    w = rake(df, {"g": {"1": 10, 2: 20}})
    assert_allclose(w.to_numpy(), [10, 10, 10])


@settings(max_examples=25, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 2), st.floats(0.5, 5.0)), min_size=3, max_size=40),
       st.lists(st.floats(1.0, 100.0), min_size=3, max_size=3))
def test_one_margin_rake_equals_poststratification(cases, targets):
    # Closed form [memory: Deville & Särndal 1992]: calibration on one categorical variable under
    # any distance is post-stratification, w = d N_h / N_h_hat.
    df = pd.DataFrame(cases, columns=["g", "d"])
    present = sorted(df["g"].unique())
    margin = {int(g): targets[g] for g in present}
    raked = rake(df, {"g": margin}, weight="d")
    sums = df.groupby("g")["d"].transform("sum")
    closed = df["d"] * df["g"].map(margin) / sums
    assert_allclose(raked.to_numpy(), closed.to_numpy(), rtol=1e-10)
    assert_allclose(poststratify(df, "g", margin, weight="d").to_numpy(), closed.to_numpy(), rtol=1e-12)


@settings(max_examples=20, deadline=None)
@given(st.integers(0, 10_000))
def test_rake_meets_every_margin(seed):
    rng = np.random.default_rng(seed)
    n = 200
    df = pd.DataFrame({"a": rng.integers(0, 3, n), "b": rng.integers(0, 4, n), "d": rng.uniform(1, 3, n)})
    df.loc[:3, "a"] = [0, 1, 2, 0]
    df.loc[:3, "b"] = [0, 1, 2, 3]
    ta = {0: 300.0, 1: 500.0, 2: 200.0}
    tb = {0: 100.0, 1: 200.0, 2: 300.0, 3: 400.0}
    w = rake(df, {"a": ta, "b": tb}, weight="d")
    assert_allclose(w.groupby(df["a"]).sum().to_numpy(), list(ta.values()), rtol=1e-8)
    assert_allclose(w.groupby(df["b"]).sum().to_numpy(), list(tb.values()), rtol=1e-8)


def _calib_frame(seed: int = 3) -> tuple[pd.DataFrame, dict, dict]:
    rng = np.random.default_rng(seed)
    n = 60
    df = pd.DataFrame({"a": rng.integers(0, 2, n), "b": rng.integers(0, 3, n),
                       "x": rng.uniform(0, 10, n), "d": rng.uniform(1, 4, n)})
    margins = {"a": {0: 80.0, 1: 70.0}, "b": {0: 40.0, 1: 50.0, 2: 60.0}}
    totals = {"x": 800.0}
    return df, margins, totals


def _full_dummies(df: pd.DataFrame) -> tuple[np.ndarray, np.ndarray]:
    # every category of every margin plus x (a rank-deficient matrix; pinv handles it)
    x = np.column_stack([(df["a"] == 0), (df["a"] == 1), (df["b"] == 0), (df["b"] == 1), (df["b"] == 2),
                         df["x"]]).astype(float)
    t = np.array([80.0, 70.0, 40.0, 50.0, 60.0, 800.0])
    return x, t


def test_linear_calibration_equals_greg_closed_form():
    # Deville & Särndal (1992): linear calibration w = d(1 + x'λ), λ = (Σ d x x')^- (t − Σ d x),
    # solved here independently with numpy.linalg.pinv on the full (redundant) dummy matrix.
    df, margins, totals = _calib_frame()
    w = calibrate_linear(df, margins, weight="d", totals=totals).to_numpy()
    x, t = _full_dummies(df)
    d = df["d"].to_numpy()
    lam = np.linalg.pinv(x.T @ (d[:, None] * x)) @ (t - x.T @ d)
    assert_allclose(w, d * (1 + x @ lam), rtol=1e-9)
    assert_allclose(x.T @ w, t, rtol=1e-9)


def test_linear_calibration_matches_scipy_minimize():
    # Independent solver: minimise the chi-square distance Σ (w−d)²/d subject to X'w = t
    # (scipy.optimize.minimize, SLSQP).
    df, margins, totals = _calib_frame()
    w = calibrate_linear(df, margins, weight="d", totals=totals).to_numpy()
    x, t = _full_dummies(df)
    x, t = np.delete(x, 2, axis=1), np.delete(t, 2)  # drop one redundant row for SLSQP
    d = df["d"].to_numpy()
    res = optimize.minimize(lambda v: np.sum((v - d) ** 2 / d), d, jac=lambda v: 2 * (v - d) / d,
                            constraints=[{"type": "eq", "fun": lambda v: x.T @ v - t, "jac": lambda v: x.T}],
                            method="SLSQP", options={"ftol": 1e-14, "maxiter": 500})
    assert res.success
    assert_allclose(w, res.x, rtol=1e-5, atol=1e-6)


def test_logit_calibration_matches_scipy_root_and_bounds():
    # Independent solver: scipy.optimize.root on the calibration equations Σ d g(x'λ) x = t with
    # the Deville & Särndal (1992) logit g; our solver uses its own Newton iteration.
    df, margins, totals = _calib_frame()
    lo, up = 0.6, 1.8
    w = calibrate_logit(df, margins, weight="d", totals=totals, bounds=(lo, up)).to_numpy()
    x, t = _full_dummies(df)
    x, t = np.delete(x, 2, axis=1), np.delete(t, 2)
    d = df["d"].to_numpy()
    sol = optimize.root(lambda lam: x.T @ (d * logit_g(x @ lam, lo, up)[0]) - t, np.zeros(x.shape[1]),
                        method="hybr", tol=1e-13)
    assert sol.success
    assert_allclose(w, d * logit_g(x @ sol.x, lo, up)[0], rtol=1e-7)
    ratio = w / d
    assert ratio.min() > lo and ratio.max() < up


def test_logit_g_shape():
    # g(0) = 1 and g'(0) = 1 (Deville & Särndal 1992, the logit distance's calibration function)
    g, dg = logit_g(np.array([0.0, -1e6, 1e6]), 0.5, 2.0)
    assert_allclose(g, [1.0, 0.5, 2.0], rtol=1e-12)
    assert_allclose(dg[0], 1.0, rtol=1e-12)
    # derivative against a central difference
    u = np.linspace(-3, 3, 7)
    num = (logit_g(u + 1e-6, 0.5, 2.0)[0] - logit_g(u - 1e-6, 0.5, 2.0)[0]) / 2e-6
    assert_allclose(logit_g(u, 0.5, 2.0)[1], num, rtol=1e-6)


def _err(fn, *args, **kw) -> SkipwiseError:
    with pytest.raises(SkipwiseError) as info:
        fn(*args, **kw)
    return info.value


def test_error_margins_with_different_totals():
    df = pd.DataFrame({"a": [0, 1], "b": [0, 1]})
    err = _err(rake, df, {"a": {0: 5, 1: 5}, "b": {0: 5, 1: 6}})
    assert err.codes == [ProblemCode.BAD_VALUE]
    assert "a=10" in str(err) and "b=11" in str(err)


def test_error_category_without_respondents_and_untargeted_category():
    df = pd.DataFrame({"a": [0, 0, 2]})
    err = _err(rake, df, {"a": {0: 5, 1: 5}})
    assert set(err.codes) == {ProblemCode.UNDECLARED_VALUE}
    assert "'2'" in str(err) and "'a'" in str(err)
    err = _err(rake, pd.DataFrame({"a": [0, 0]}), {"a": {0: 5, 1: 5}})
    assert err.codes == [ProblemCode.INFEASIBLE]
    assert err.problems[0].item == "a" and "'1'" in err.problems[0].message


def test_error_missing_values_column_and_bool_key():
    err = _err(rake, pd.DataFrame({"a": [0, None]}), {"a": {0: 5}})
    assert err.codes == [ProblemCode.BAD_DATA]
    err = _err(rake, pd.DataFrame({"a": [0]}), {"z": {0: 5}})
    assert err.codes == [ProblemCode.MISSING_COLUMN]
    err = _err(rake, pd.DataFrame({"a": ["yes"]}), {"a": {True: 5}})
    assert ProblemCode.BAD_VALUE in err.codes


def test_error_nonconvergence_names_worst_margins():
    # Structural zeros make the margins unattainable: a=0 only with b=0, yet b=0 gets less than a=0.
    df = pd.DataFrame({"a": [0, 1, 1], "b": [0, 0, 1]})
    err = _err(rake, df, {"a": {0: 8, 1: 2}, "b": {0: 5, 1: 5}}, max_iter=50)
    assert err.codes == [ProblemCode.NOT_CONVERGED]
    assert "worst margins" in str(err) and "achieved" in str(err)


def test_error_bad_starting_weights():
    df = pd.DataFrame({"a": [0, 1, 1], "w": [1.0, 0.0, np.nan]})
    err = _err(rake, df, {"a": {0: 1, 1: 2}}, weight="w")
    assert err.codes == [ProblemCode.BAD_WEIGHTS]
    assert "2 case(s)" in str(err) and "[1, 2]" in str(err)


def test_error_infeasible_logit_bounds():
    df = pd.DataFrame({"a": [0, 0, 1]})
    err = _err(calibrate_logit, df, {"a": {0: 10, 1: 1.5}}, bounds=(0.5, 2.0))
    assert err.codes == [ProblemCode.INFEASIBLE]
    assert err.problems[0].item == "a" and "'0'" in err.problems[0].message
    err = _err(calibrate_logit, df, {"a": {0: 2, 1: 1}}, bounds=(1.2, 2.0))
    assert err.codes == [ProblemCode.BAD_VALUE]
