"""Fitting one imputation model and drawing values for the missing cases.

One function per method, each ``(y_obs, X_obs, X_mis, rng, proper, ...) ->
values`` over numpy arrays (X without the constant; it is added here). With
``proper=True`` the model's parameters are first drawn from their approximate
posterior, as multiple imputation needs:

- linear model: σ*² = σ̂²(n−p)/g with g ~ χ²(n−p), then β* ~ N(β̂, σ*²(XᵀX)⁻¹);
- logistic / multinomial logistic: β* ~ N(β̂, V̂), V̂ the inverse information.

References
----------
Rubin, D. B. (1987). *Multiple Imputation for Nonresponse in Surveys*. Wiley, sec. 5.3.
Little, R. J. A. (1988). Missing-data adjustments in large surveys. *Journal of Business
& Economic Statistics* 6(3), 287–296 (predictive mean matching).
Morris, T. P., White, I. R. and Royston, P. (2014). Tuning multiple imputation by
predictive mean matching and local residual draws. *BMC Medical Research Methodology* 14, 75.
van Buuren, S. and Groothuis-Oudshoorn, K. (2011). Multivariate imputation by chained
equations. *Journal of Statistical Software* 45(3), 1–67.
"""

from __future__ import annotations

import warnings
from typing import Literal, NamedTuple

import numpy as np
import statsmodels.api as sm
from scipy.linalg import cho_factor, cho_solve

__all__ = ["draw_norm", "draw_pmm", "draw_logistic", "draw_multinomial", "draw_values", "draw_values_const", "METHODS",
           "ModelFailure", "ols_fit", "LinearFit", "match_k_nearest", "distinct_columns"]

#: Model-based methods understood by :func:`draw_values`.
METHODS = ("regression", "pmm", "logistic", "multinomial")


class ModelFailure(Exception):
    """The imputation model could not be fitted (too few cases, separation, singular fit)."""


def distinct_columns(x: np.ndarray) -> np.ndarray:
    """Positions (ascending) of the first of each set of identical columns of a 2-D float array.

    Same result as ``np.unique(x.T, axis=0, return_index=True)[1]``, sorted (−0.0 counts as
    0.0), at the cost of one pass over a few rows: the columns are first grouped by their
    values in up to 64 evenly spaced rows (identical columns agree there), and only the
    columns of a group with more than one member are compared in full.
    """
    p = x.shape[1]
    if p <= 1:
        return np.arange(p)
    if not x.shape[0]:
        return np.arange(1)                              # columns without rows are all alike
    rows = np.unique(np.linspace(0, x.shape[0] - 1, min(x.shape[0], 64)).astype(np.int64))
    sample = np.ascontiguousarray(x[rows].T, dtype=np.float64) + 0.0   # +0.0 turns −0.0 into 0.0
    keys = sample.view(np.dtype((np.void, sample.dtype.itemsize * sample.shape[1]))).ravel()
    _, group = np.unique(keys, return_inverse=True)
    group = group.ravel()
    counts = np.bincount(group)
    if counts.max() == 1:
        return np.arange(p)
    firsts = [c for c in range(p) if counts[group[c]] == 1]
    for g in np.flatnonzero(counts > 1):
        left = list(np.flatnonzero(group == g))          # ascending column positions
        while left:
            head, rest = left[0], left[1:]
            firsts.append(head)
            left = [c for c in rest if not np.array_equal(x[:, c], x[:, head], equal_nan=True)]
    return np.sort(np.asarray(firsts, dtype=np.int64))


def _with_const(x: np.ndarray) -> np.ndarray:
    return np.column_stack([np.ones(x.shape[0]), x]) if x.size else np.ones((x.shape[0], 1))


class LinearFit(NamedTuple):
    """The parts of an OLS fit the draws need (same meaning as in statsmodels' OLSResults)."""

    params: np.ndarray
    scale: float                  # σ̂² = SSR / (n − p)
    df_resid: float
    normalized_cov_params: np.ndarray   # (XᵀX)⁻¹
    resid: np.ndarray


def ols_fit(y: np.ndarray, x: np.ndarray) -> LinearFit:
    """OLS by the normal equations (Cholesky), falling back to statsmodels' pseudo-inverse
    fit when XᵀX is ill-conditioned. The fast path matters: chained equations fit
    thousands of models; tests check it against ``statsmodels.OLS``."""
    if y.size < x.shape[1] + 2:
        raise ModelFailure(f"only {y.size} observed case(s) for {x.shape[1]} parameters")
    xtx = x.T @ x
    try:
        if np.linalg.cond(xtx) > 1e10:  # near-collinear predictors: common practice, no source
            raise np.linalg.LinAlgError
        cho = cho_factor(xtx)
        beta = cho_solve(cho, x.T @ y)
        inv = cho_solve(cho, np.eye(xtx.shape[0]))
        resid = y - x @ beta
        df = float(y.size - x.shape[1])
        return LinearFit(params=beta, scale=float(resid @ resid) / df, df_resid=df,
                         normalized_cov_params=inv, resid=resid)
    except np.linalg.LinAlgError:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # rank deficiency is expected here; pinv handles it
            res = sm.OLS(y, x).fit()
        return LinearFit(params=np.asarray(res.params), scale=float(res.scale), df_resid=float(res.df_resid),
                         normalized_cov_params=np.asarray(res.normalized_cov_params),
                         resid=np.asarray(res.resid))


def _mvn(mean: np.ndarray, cov: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    if not np.all(np.isfinite(cov)):
        raise ModelFailure("parameter covariance is not finite")
    return rng.multivariate_normal(mean, cov, method="eigh")


def _ols_draw(res, rng: np.random.Generator, proper: bool) -> tuple[np.ndarray, float]:
    """(β*, σ*) — a posterior draw when ``proper``, else (β̂, σ̂)."""
    beta, s2 = np.asarray(res.params), float(res.scale)
    if not proper:
        return beta, np.sqrt(s2)
    df = max(float(res.df_resid), 1.0)
    s2_star = s2 * df / rng.chisquare(df)
    beta_star = _mvn(beta, s2_star * np.asarray(res.normalized_cov_params), rng)
    return beta_star, np.sqrt(s2_star)


def draw_norm(y_obs: np.ndarray, x_obs: np.ndarray, x_mis: np.ndarray, rng: np.random.Generator, *,
              proper: bool = False, residuals: Literal["normal", "observed"] = "normal") -> np.ndarray:
    """Linear regression prediction plus a random residual.

    ``residuals="normal"`` adds N(0, σ*²); ``"observed"`` adds a randomly chosen
    observed residual, rescaled by σ*/σ̂.
    """
    return _norm(y_obs, _with_const(x_obs), _with_const(x_mis), rng, proper, residuals)


def _norm(y_obs, xo, xm, rng, proper, residuals):
    res = ols_fit(y_obs, xo)
    beta, sigma = _ols_draw(res, rng, proper)
    pred = xm @ beta
    if residuals == "observed":
        e = np.asarray(res.resid)
        scale = sigma / np.sqrt(res.scale) if res.scale > 0 else 1.0
        return pred + scale * e[rng.integers(0, e.size, size=pred.size)]
    return pred + rng.normal(0.0, sigma, size=pred.size)


def _stable_order(v: np.ndarray) -> np.ndarray:
    """``np.argsort(v, kind="stable")``, by the faster unstable sort when no two values tie
    (then both orders are the same)."""
    order = np.argsort(v)
    sv = v[order]
    if sv.size > 1 and (np.isnan(sv[-1]) or bool((sv[1:] == sv[:-1]).any())):
        return np.argsort(v, kind="stable")
    return order


def match_k_nearest(donor_pred: np.ndarray, rec_pred: np.ndarray, k: int,
                    rng: np.random.Generator) -> np.ndarray:
    """Per recipient, the index of a random one of the ``k`` donors with the closest prediction.

    Vectorized: donors are sorted by prediction; the k nearest of a recipient lie
    in the window of k donors on either side of its insertion point.
    """
    n = donor_pred.size
    k = max(1, min(k, n))
    order = _stable_order(donor_pred)
    sp = donor_pred[order]
    by_pred = np.argsort(rec_pred)          # sorted queries search faster; same positions
    pos = np.empty(rec_pred.size, dtype=np.intp)
    pos[by_pred] = np.searchsorted(sp, rec_pred[by_pred])
    cand = pos[:, None] + np.arange(-k, k)[None, :]
    inside = (cand >= 0) & (cand < n)
    cand_c = np.clip(cand, 0, n - 1)
    dist = np.where(inside, np.abs(sp[cand_c] - rec_pred[:, None]), np.inf)
    # Random tie-break among equally close donors.
    dist = dist + rng.random(dist.shape) * 1e-12 * (1.0 + np.abs(rec_pred[:, None]))
    nearest = np.argpartition(dist, k - 1, axis=1)[:, :k]
    pick = nearest[np.arange(rec_pred.size), rng.integers(0, k, size=rec_pred.size)]
    return order[cand_c[np.arange(rec_pred.size), pick]]


def draw_pmm(y_obs: np.ndarray, x_obs: np.ndarray, x_mis: np.ndarray, rng: np.random.Generator, *,
             proper: bool = False, k: int = 5) -> np.ndarray:
    """Predictive mean matching: each recipient takes the observed value of a random one of
    the ``k`` donors whose predicted mean is closest to its own (default k = 5).

    Donor predictions use β̂; recipient predictions use β* when ``proper``
    (type-1 matching, van Buuren & Groothuis-Oudshoorn 2011). Only observed
    values can come out.
    """
    return _pmm(y_obs, _with_const(x_obs), _with_const(x_mis), rng, proper, k)


def _pmm(y_obs, xo, xm, rng, proper, k):
    res = ols_fit(y_obs, xo)
    beta_star, _ = _ols_draw(res, rng, proper)
    idx = match_k_nearest(xo @ np.asarray(res.params), xm @ beta_star, k, rng)
    return y_obs[idx]


def _fit_discrete(model):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            res = model.fit(disp=0, method="newton", maxiter=100)
        except Exception as exc:  # separation, singular Hessian: statsmodels raises several types
            raise ModelFailure(f"model did not fit ({type(exc).__name__})") from exc
    converged = bool(res.mle_retvals.get("converged", True)) if hasattr(res, "mle_retvals") else True
    if not converged:
        raise ModelFailure("model did not converge (perhaps perfect prediction)")
    return res


def draw_logistic(y_obs: np.ndarray, x_obs: np.ndarray, x_mis: np.ndarray, rng: np.random.Generator, *,
                  proper: bool = False) -> np.ndarray:
    """Binary item by logistic regression: draw each value with its predicted probability."""
    return _logistic(y_obs, _with_const(x_obs), _with_const(x_mis), rng, proper)


def _logistic(y_obs, xo, xm, rng, proper):
    cats = np.unique(y_obs)
    if cats.size != 2:
        raise ModelFailure(f"logistic model needs exactly two observed values, found {cats.size}")
    if y_obs.size < xo.shape[1] + 2:
        raise ModelFailure(f"only {y_obs.size} observed case(s) for {xo.shape[1]} parameters")
    res = _fit_discrete(sm.Logit((y_obs == cats[1]).astype(float), xo))
    beta = np.asarray(res.params)
    if proper:
        beta = _mvn(beta, np.asarray(res.cov_params()), rng)
    p = 1.0 / (1.0 + np.exp(-(xm @ beta)))
    return np.where(rng.random(p.size) < p, cats[1], cats[0])


def draw_multinomial(y_obs: np.ndarray, x_obs: np.ndarray, x_mis: np.ndarray, rng: np.random.Generator, *,
                     proper: bool = False) -> np.ndarray:
    """Categorical item by multinomial logistic regression (statsmodels MNLogit)."""
    return _multinomial(y_obs, _with_const(x_obs), _with_const(x_mis), rng, proper)


def _multinomial(y_obs, xo, xm, rng, proper):
    cats, codes = np.unique(y_obs, return_inverse=True)
    if cats.size < 2:
        raise ModelFailure("multinomial model needs at least two observed values")
    n_par = xo.shape[1] * (cats.size - 1)
    if y_obs.size < n_par + 2:
        raise ModelFailure(f"only {y_obs.size} observed case(s) for {n_par} parameters")
    res = _fit_discrete(sm.MNLogit(codes, xo))
    params = np.asarray(res.params)                      # (p, K-1)
    if proper:
        # statsmodels orders the flat parameter vector equation by equation (column-major).
        flat = _mvn(params.ravel(order="F"), np.asarray(res.cov_params()), rng)
        params = flat.reshape(params.shape, order="F")
    eta = np.column_stack([np.zeros(xm.shape[0]), xm @ params])
    eta -= eta.max(axis=1, keepdims=True)
    prob = np.exp(eta)
    prob /= prob.sum(axis=1, keepdims=True)
    u = rng.random(prob.shape[0])[:, None]
    pick = np.minimum((np.cumsum(prob, axis=1) < u).sum(axis=1), cats.size - 1)
    return cats[pick]


def draw_values(method: str, y_obs: np.ndarray, x_obs: np.ndarray, x_mis: np.ndarray,
                rng: np.random.Generator, *, proper: bool = False, k: int = 5,
                residuals: Literal["normal", "observed"] = "normal") -> tuple[np.ndarray, str | None]:
    """Values for the missing cases by ``method``; falls back to PMM, then to a random
    observed value, when a model cannot be fitted. Returns (values, note on any fallback).

    Predictor columns constant among the observed cases, or repeating an earlier column
    there, are left out first (they carry no information and make the fit singular).
    """
    if x_obs.shape[1]:
        keep = np.ptp(x_obs, axis=0) > 0 if x_obs.shape[0] else np.zeros(x_obs.shape[1], bool)
        x_obs, x_mis = x_obs[:, keep], x_mis[:, keep]
        first = distinct_columns(x_obs)
        x_obs, x_mis = x_obs[:, first], x_mis[:, first]
    return _draw(method, y_obs, _with_const(x_obs), _with_const(x_mis), rng, proper, k, residuals)


def draw_values_const(method: str, y_obs: np.ndarray, x_obs: np.ndarray, x_mis: np.ndarray,
                      rng: np.random.Generator, *, proper: bool = False, k: int = 5,
                      residuals: Literal["normal", "observed"] = "normal") -> tuple[np.ndarray, str | None]:
    """:func:`draw_values` for predictor matrices whose first column is already the constant.

    The same columns are left out, with the same result and the same random draws, without
    copying the matrices when nothing is left out (chained equations call this thousands of
    times on large files).
    """
    rest = x_obs[:, 1:]
    if rest.shape[1]:
        keep = np.ptp(rest, axis=0) > 0 if rest.shape[0] else np.zeros(rest.shape[1], bool)
        cols = np.flatnonzero(keep)
        if cols.size:
            cols = cols[distinct_columns(rest[:, cols] if cols.size < keep.size else rest)]
        if cols.size < keep.size:
            take = np.concatenate([[0], cols + 1])
            # column-major, as draw_values' own column selection leaves them (same rounding)
            x_obs, x_mis = np.asfortranarray(x_obs[:, take]), np.asfortranarray(x_mis[:, take])
    return _draw(method, y_obs, x_obs, x_mis, rng, proper, k, residuals)


def _draw(method, y_obs, xo, xm, rng, proper, k, residuals) -> tuple[np.ndarray, str | None]:
    """The draw on predictor matrices with the constant in column 0, and the fallbacks."""
    try:
        if method == "regression":
            return _norm(y_obs, xo, xm, rng, proper, residuals), None
        if method == "logistic":
            return _logistic(y_obs, xo, xm, rng, proper), None
        if method == "multinomial":
            return _multinomial(y_obs, xo, xm, rng, proper), None
        return _pmm(y_obs, xo, xm, rng, proper, k), None
    except ModelFailure as exc:
        first = str(exc)
    if method != "pmm":
        try:
            return _pmm(y_obs, xo, xm, rng, proper, k), f"{method} failed ({first}); used pmm"
        except ModelFailure:
            pass
    return y_obs[rng.integers(0, y_obs.size, size=xm.shape[0])], \
        f"{method} failed ({first}); drew random observed values"
