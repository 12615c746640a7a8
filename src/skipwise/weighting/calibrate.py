"""Calibration to population totals: post-stratification, raking, linear and logit.

Array solvers (``*_weights``) take starting weights ``d`` and encoded margins
and are what the weighting chain and its replicates call; the DataFrame
functions (:func:`rake`, :func:`poststratify`, :func:`calibrate_linear`,
:func:`calibrate_logit`) wrap them for direct use.
"""

from __future__ import annotations

from typing import Callable, Mapping

import numpy as np
import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError
from skipwise.weighting.base import starting_weights
from skipwise.weighting.margins import (
    EncodedMargin, Locator, encode_margins, max_margin_error_of_sums, worst_margins_text,
    worst_margins_text_of_sums,
)

__all__ = [
    "rake", "poststratify", "calibrate_linear", "calibrate_logit",
    "rake_weights", "poststratify_weights", "linear_weights", "logit_weights",
    "design_matrix", "logit_g", "DEFAULT_TOL", "DEFAULT_MAX_ITER",
    "rake_loop", "ratio_factors", "check_category_sums", "linear_sums", "linear_lambda",
]

#: Default convergence tolerance: largest margin gap as a share of the population total.
DEFAULT_TOL = 1e-10
DEFAULT_MAX_ITER = 1000


def _not_converged(method: str, iterations: int, w: np.ndarray | None, enc: list[EncodedMargin],
                   code: ProblemCode = ProblemCode.NOT_CONVERGED, hint: str | None = None,
                   sums: list[np.ndarray] | None = None) -> SkipwiseError:
    worst = worst_margins_text(w, enc) if sums is None else worst_margins_text_of_sums(sums, enc)
    return SkipwiseError(Problem(
        code=code, category=Category.DATA, item=enc[0].variable,
        message=f"{method} did not reach the margins after {iterations} iterations "
                f"(worst margins: {worst})",
        hint=hint or "collapse sparse categories, drop a margin, or raise max_iter/tolerance"))


def check_category_sums(sums: list[np.ndarray], enc: list[EncodedMargin]) -> None:
    """Refuse a category with a target but no starting weight (from each margin's sums)."""
    problems = []
    for m, msums in zip(enc, sums):
        for lab, s, t in zip(m.labels, msums, m.targets):
            if s <= 0 and t > 0:
                problems.append(Problem(code=ProblemCode.INFEASIBLE, category=Category.DATA, item=m.variable,
                                        message=f"category {lab!r} of '{m.variable}' has a target of {t:g} "
                                                f"but no respondent weight",
                                        hint="collapse it with a neighbouring category"))
    if problems:
        raise SkipwiseError(problems)


def _check_category_weight(d: np.ndarray, enc: list[EncodedMargin]) -> None:
    check_category_sums([m.sums(d) for m in enc], enc)


def ratio_factors(sums: np.ndarray, targets: np.ndarray) -> np.ndarray:
    """Each category's factor ``target / achieved`` (0 where nothing is achieved): one raking or
    post-stratification step on a margin's sums."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(sums > 0, targets / np.where(sums > 0, sums, 1.0), 0.0)


def rake_loop(enc: list[EncodedMargin], sums: Callable[[int], np.ndarray],
              scale: Callable[[int, np.ndarray], None], all_sums: Callable[[], list[np.ndarray]], *,
              tol: float = DEFAULT_TOL, max_iter: int = DEFAULT_MAX_ITER) -> int:
    """The raking iteration on margin sums alone; the weights live wherever ``sums``/``scale`` keep them.

    ``sums(j)`` gives margin j's weighted totals of the current weights, ``scale(j, f)`` multiplies
    every case by the factor of its category of margin j, ``all_sums()`` gives every margin's
    totals.  The in-memory engine and the cluster engine (partial sums merged on the client) both
    run this one loop.  Returns the number of full cycles.
    """
    limit = tol * enc[0].total
    for it in range(1, max_iter + 1):
        worst = 0.0
        for j, m in enumerate(enc):
            s = sums(j)
            worst = max(worst, float(np.max(np.abs(s - m.targets))))
            scale(j, ratio_factors(s, m.targets))
        if worst <= limit:
            final = all_sums()
            if max_margin_error_of_sums(final, enc) <= tol:
                return it
    raise _not_converged("raking", max_iter, None, enc, sums=all_sums())


def rake_weights(d: np.ndarray, enc: list[EncodedMargin], *, tol: float = DEFAULT_TOL,
                 max_iter: int = DEFAULT_MAX_ITER) -> tuple[np.ndarray, int]:
    """Iterative proportional fitting of weights ``d`` to every margin in turn.

    Returns the raked weights and the number of full cycles.  Convergence: the
    largest gap between a category's weighted total and its target, measured
    before that margin's own adjustment, is at most ``tol`` × population total.

    References
    ----------
    Deming, W. E. & Stephan, F. F. (1940). On a least squares adjustment of a
    sampled frequency table when the expected marginal totals are known.
    *Annals of Mathematical Statistics* 11(4), 427–444.
    """
    _check_category_weight(d, enc)
    w = np.array(d, dtype=float, copy=True)

    def scale(j: int, f: np.ndarray) -> None:
        w[:] = w * f[enc[j].codes]

    it = rake_loop(enc, lambda j: enc[j].sums(w), scale, lambda: [m.sums(w) for m in enc], tol=tol,
                   max_iter=max_iter)
    return w, it


def poststratify_weights(d: np.ndarray, margin: EncodedMargin) -> np.ndarray:
    """Post-stratification ``w = d · N_h / N̂_h`` on one categorical variable.

    References
    ----------
    Holt, D. & Smith, T. M. F. (1979). Post stratification. *Journal of the
    Royal Statistical Society A* 142(1), 33–46.
    """
    s = margin.sums(d)
    check_category_sums([s], [margin])
    return d * ratio_factors(s, margin.targets)[margin.codes]


def design_matrix(enc: list[EncodedMargin], numeric: Mapping[str, tuple[np.ndarray, float]] | None = None
                  ) -> tuple[np.ndarray, np.ndarray, list[str]]:
    """Full-rank calibration matrix X, totals t and column names.

    The first margin keeps all its categories; later margins drop their first
    category, whose constraint is implied because all margins share one total.
    ``numeric`` adds ``{name: (values, population_total)}`` columns.
    """
    n = len(enc[0].codes) if enc else len(next(iter(numeric.values()))[0])
    cols: list[np.ndarray] = []
    totals: list[float] = []
    names: list[str] = []
    for j, m in enumerate(enc):
        for k in range(0 if j == 0 else 1, len(m.labels)):
            cols.append((m.codes == k).astype(float))
            totals.append(float(m.targets[k]))
            names.append(f"{m.variable}={m.labels[k]}")
    for name, (values, total) in (numeric or {}).items():
        cols.append(np.asarray(values, dtype=float))
        totals.append(float(total))
        names.append(name)
    x = np.column_stack(cols) if cols else np.zeros((n, 0))
    return x, np.asarray(totals, dtype=float), names


def _solve(a: np.ndarray, b: np.ndarray, what: str) -> np.ndarray:
    try:
        return np.linalg.solve(a, b)
    except np.linalg.LinAlgError:
        raise SkipwiseError(Problem(code=ProblemCode.SINGULAR, category=Category.DATA, item=what,
                                    message="the calibration equations are singular (a calibration "
                                            "variable is constant or collinear among respondents)",
                                    hint="drop or collapse the redundant calibration variable")) from None


def linear_weights(d: np.ndarray, x: np.ndarray, t: np.ndarray) -> np.ndarray:
    """Linear (chi-square distance) calibration ``w = d (1 + xᵀλ)``, the GREG weights.

    ``λ = (Σ d x xᵀ)⁻¹ (t − Σ d x)``. Weights may turn negative.

    References
    ----------
    Deville, J.-C. & Särndal, C.-E. (1992). Calibration estimators in survey
    sampling. *Journal of the American Statistical Association* 87(418), 376–382.
    """
    return d * (1.0 + x @ linear_lambda(*linear_sums(d, x), t))


def linear_sums(d: np.ndarray, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``Σ d x xᵀ`` and ``Σ d x``: the row-local, mergeable sums of linear calibration."""
    return x.T @ (d[:, None] * x), x.T @ d


def linear_lambda(xdx: np.ndarray, xd: np.ndarray, t: np.ndarray) -> np.ndarray:
    """``λ = (Σ d x xᵀ)⁻¹ (t − Σ d x)`` from the merged sums; the weights are ``d (1 + xᵀλ)``."""
    return _solve(xdx, t - xd, "calibration")


def logit_g(u: np.ndarray, lower: float, upper: float) -> tuple[np.ndarray, np.ndarray]:
    """Deville–Särndal bounded logit calibration function g(u) and its derivative.

    ``g(u) = [L(U−1) + U(1−L)e^{Au}] / [(U−1) + (1−L)e^{Au}]``,
    ``A = (U−L) / ((1−L)(U−1))``; g(0) = 1, g'(0) = 1, L < g < U.
    """
    a = (upper - lower) / ((1.0 - lower) * (upper - 1.0))
    e = np.exp(np.clip(a * u, -700.0, 700.0))
    den = (upper - 1.0) + (1.0 - lower) * e
    g = (lower * (upper - 1.0) + upper * (1.0 - lower) * e) / den
    with np.errstate(over="ignore", invalid="ignore"):
        dg = (upper - lower) ** 2 * (e / den) / den
    # far in the tails e/den² underflows or overflows to nan; the slope there is 0
    dg = np.where(np.isfinite(dg), dg, 0.0)
    return g, dg


def logit_weights(d: np.ndarray, x: np.ndarray, t: np.ndarray, *, lower: float, upper: float,
                  tol: float = DEFAULT_TOL, max_iter: int = 100,
                  enc: list[EncodedMargin] | None = None) -> tuple[np.ndarray, int]:
    """Bounded logit calibration, solved by Newton's method on the calibration equations.

    Finds λ with ``Σ d g(xᵀλ) x = t``; the ratios w/d stay strictly within
    (lower, upper).

    References
    ----------
    Deville, J.-C. & Särndal, C.-E. (1992). Calibration estimators in survey
    sampling. *JASA* 87(418), 376–382 (distance function of case 6, "logit").
    """
    if not (0.0 <= lower < 1.0 < upper):
        raise SkipwiseError(Problem(code=ProblemCode.BAD_VALUE, item="bounds",
                                    message=f"logit bounds must satisfy 0 <= L < 1 < U, got [{lower}, {upper}]"))
    scale = max(float(np.abs(t).max()) if t.size else 1.0, 1.0)
    if enc:
        scale = enc[0].total
        problems = []
        for m in enc:
            s = m.sums(d)
            for lab, sk, tk in zip(m.labels, s, m.targets):
                ratio = tk / sk if sk > 0 else np.inf
                if not (lower < ratio < upper):
                    problems.append(Problem(
                        code=ProblemCode.INFEASIBLE, category=Category.DATA, item=m.variable,
                        message=f"category {lab!r} of '{m.variable}' needs an average factor of {ratio:.4g}, "
                                f"outside the bounds ({lower:g}, {upper:g})",
                        hint="widen the bounds or collapse the category"))
        if problems:
            raise SkipwiseError(problems)
    lam = np.zeros(x.shape[1])
    g, dg = logit_g(x @ lam, lower, upper)
    resid = t - x.T @ (d * g)
    for it in range(1, max_iter + 1):
        if np.max(np.abs(resid)) <= tol * scale:
            return d * g, it
        jac = x.T @ ((d * dg)[:, None] * x)
        step = _solve(jac, resid, "calibration")
        norm0 = float(np.abs(resid).max())
        for _ in range(40):  # step halving keeps Newton from overshooting near the bounds
            g_new, dg_new = logit_g(x @ (lam + step), lower, upper)
            r_new = t - x.T @ (d * g_new)
            if float(np.abs(r_new).max()) < norm0:
                break
            step = step / 2.0
        lam = lam + step
        g, dg, resid = g_new, dg_new, r_new
    w = d * g
    if enc:
        raise _not_converged("logit calibration", max_iter, w, enc, code=ProblemCode.INFEASIBLE,
                             hint="no weights within the bounds meet the margins; widen the bounds")
    raise SkipwiseError(Problem(code=ProblemCode.INFEASIBLE, category=Category.DATA,
                                message=f"logit calibration did not converge in {max_iter} iterations",
                                hint="widen the bounds"))


# --- DataFrame functions -------------------------------------------------------------------

def rake(data: pd.DataFrame, margins: Mapping[str, Mapping[object, float]], weight: str | None = None, *,
         tol: float = DEFAULT_TOL, max_iter: int = DEFAULT_MAX_ITER, locate: Locator | None = None) -> pd.Series:
    """Rake weights to population margins by iterative proportional fitting.

    Parameters
    ----------
    data
        Cases to weight (respondents).
    margins
        ``{variable: {category: population_total}}``; all margins must add to the
        same total and every data category must have a target.
    weight
        Column of starting weights; None starts every case at 1.
    tol
        Largest allowed gap between achieved and target totals, as a share of
        the population total.
    max_iter
        Largest number of full cycles through the margins.

    Returns
    -------
    pandas.Series
        Raked weights aligned with ``data.index``.

    Raises
    ------
    SkipwiseError
        Problems with margins (see :func:`encode_margins`), bad starting weights
        (``bad-weights``) or ``not-converged`` naming the worst margins.

    References
    ----------
    Deming, W. E. & Stephan, F. F. (1940). On a least squares adjustment of a
    sampled frequency table when the expected marginal totals are known.
    *Annals of Mathematical Statistics* 11(4), 427–444.

    Examples
    --------
    >>> df = pd.DataFrame({"sex": [1, 1, 2], "age": ["y", "o", "o"]})
    >>> rake(df, {"sex": {1: 50, 2: 50}, "age": {"y": 40, "o": 60}}).round(2).tolist()
    [40.0, 10.0, 50.0]
    """
    d = starting_weights(data, weight)
    enc = encode_margins(data, margins, locate=locate)
    w, _ = rake_weights(d, enc, tol=tol, max_iter=max_iter)
    return pd.Series(w, index=data.index, name="weight")


def poststratify(data: pd.DataFrame, variable: str, totals: Mapping[object, float],
                 weight: str | None = None) -> pd.Series:
    """Post-stratify weights to the population total of each category of ``variable``."""
    d = starting_weights(data, weight)
    (enc,) = encode_margins(data, {variable: totals})
    return pd.Series(poststratify_weights(d, enc), index=data.index, name="weight")


def _numeric(data: pd.DataFrame, totals: Mapping[str, float] | None) -> dict[str, tuple[np.ndarray, float]]:
    out = {}
    problems = []
    for name, total in (totals or {}).items():
        if name not in data.columns:
            problems.append(Problem(code=ProblemCode.MISSING_COLUMN, item=name,
                                    message=f"calibration variable '{name}' is not a column of the data"))
            continue
        values = pd.to_numeric(data[name], errors="coerce").to_numpy(dtype=float)
        if np.isnan(values).any():
            problems.append(Problem(code=ProblemCode.BAD_DATA, category=Category.DATA, item=name,
                                    message=f"{int(np.isnan(values).sum())} case(s) have no numeric value of '{name}'"))
            continue
        out[name] = (values, float(total))
    if problems:
        raise SkipwiseError(problems)
    return out


def _calibration_system(data: pd.DataFrame, margins: Mapping[str, Mapping[object, float]] | None,
                        weight: str | None, totals: Mapping[str, float] | None
                        ) -> tuple[np.ndarray, list[EncodedMargin], np.ndarray, np.ndarray]:
    """Starting weights, encoded margins, design matrix and targets shared by the linear and logit methods."""
    d = starting_weights(data, weight)
    enc = encode_margins(data, margins) if margins else []
    x, t, _ = design_matrix(enc, _numeric(data, totals))
    return d, enc, x, t


def calibrate_linear(data: pd.DataFrame, margins: Mapping[str, Mapping[object, float]] | None = None,
                     weight: str | None = None, *, totals: Mapping[str, float] | None = None) -> pd.Series:
    """Linear calibration (GREG weights) to categorical margins and numeric ``totals``.

    References
    ----------
    Deville, J.-C. & Särndal, C.-E. (1992). Calibration estimators in survey
    sampling. *JASA* 87(418), 376–382.
    """
    d, _, x, t = _calibration_system(data, margins, weight, totals)
    return pd.Series(linear_weights(d, x, t), index=data.index, name="weight")


def calibrate_logit(data: pd.DataFrame, margins: Mapping[str, Mapping[object, float]] | None = None,
                    weight: str | None = None, *, bounds: tuple[float, float] = (0.5, 2.0),
                    totals: Mapping[str, float] | None = None, tol: float = DEFAULT_TOL,
                    max_iter: int = 100) -> pd.Series:
    """Bounded logit calibration: weight ratios w/d kept within ``bounds`` = (L, U).

    References
    ----------
    Deville, J.-C. & Särndal, C.-E. (1992). Calibration estimators in survey
    sampling. *JASA* 87(418), 376–382.
    """
    d, enc, x, t = _calibration_system(data, margins, weight, totals)
    w, _ = logit_weights(d, x, t, lower=float(bounds[0]), upper=float(bounds[1]), tol=tol,
                         max_iter=max_iter, enc=enc or None)
    return pd.Series(w, index=data.index, name="weight")
