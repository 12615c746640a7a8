"""Little's (1988) chi-square test of missing completely at random (MCAR).

The EM algorithm for the multivariate normal works on per-pattern sufficient
statistics (sums and cross-products of the observed part), so one iteration
costs a loop over missingness patterns, never over cases.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy import stats

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError

__all__ = ["LittleResult", "little_mcar_test", "LIMITS"]

#: What the test can and cannot say (shown in reports).
LIMITS = (
    "Little's test assumes the variables are multivariate normal; strongly skewed or "
    "categorical variables distort it.",
    "A small p-value is evidence against MCAR; a large p-value is not proof of MCAR "
    "(the test may lack power).",
    "No test on the observed data can tell missing at random (MAR) from missing not at "
    "random (MNAR).",
)

_SINGULAR_HINT = ("remove constant or duplicated variables, or variables that are sums or "
                  "rescalings of others, and run the test again")


@dataclass(frozen=True, kw_only=True, eq=False)
class LittleResult:
    """Outcome of :func:`little_mcar_test`.

    Attributes
    ----------
    statistic, df, p_value
        Little's d², its degrees of freedom (Σ p_j − p) and the chi-square
        upper-tail p-value (NaN when df is 0: one pattern, nothing to test).
    n_patterns, n_cases, n_variables
        Patterns of observed variables, cases used, variables tested.
    n_dropped_all_missing
        Cases dropped because every variable was missing.
    mean, cov
        EM maximum-likelihood estimates (covariance with divisor n).
    patterns
        One row per pattern: ``pattern``, ``n_cases``, ``n_observed``,
        ``missing_variables``, ``d2_contribution`` and, per variable, 1 if
        observed in the pattern, 0 if missing.  Sorted by ``n_cases``, descending.
    iterations, converged
        EM iterations used and whether the tolerance was met.
    notes
        Plain-language remarks for reports (dropped cases, convergence, limits).
    """

    statistic: float
    df: int
    p_value: float
    n_patterns: int
    n_cases: int
    n_variables: int
    n_dropped_all_missing: int
    mean: pd.Series
    cov: pd.DataFrame
    patterns: pd.DataFrame
    iterations: int
    converged: bool
    notes: tuple[str, ...]


def _singular(message: str, variables: list[str]) -> SkipwiseError:
    return SkipwiseError(Problem(
        code=ProblemCode.SINGULAR, category=Category.DATA,
        item=", ".join(variables) if variables else None,
        message=message, hint=_SINGULAR_HINT,
    ))


def _check_input(frame: pd.DataFrame) -> pd.DataFrame:
    if not isinstance(frame, pd.DataFrame) or frame.shape[1] == 0:
        raise SkipwiseError(Problem(code=ProblemCode.BAD_DATA, category=Category.DATA,
                                    message="Little's test needs a DataFrame with at least one column"))
    bad = [str(c) for c in frame.columns
           if not (pd.api.types.is_numeric_dtype(frame[c]) or pd.api.types.is_bool_dtype(frame[c]))]
    if bad:
        raise SkipwiseError(Problem(
            code=ProblemCode.BAD_DATA, category=Category.DATA, item=", ".join(bad),
            message="Little's test needs numeric variables; these are not numeric",
            hint="leave text and unordered categorical variables out of the test",
        ))
    if frame.columns.duplicated().any():
        raise SkipwiseError(Problem(code=ProblemCode.DUPLICATE_NAME, category=Category.DATA,
                                    message="duplicate column names in Little's test input"))
    return frame.astype(float)


def _near_null_variables(cov: np.ndarray, names: list[str]) -> list[str]:
    vals, vecs = np.linalg.eigh(cov)
    v = np.abs(vecs[:, 0])
    return [names[k] for k in np.flatnonzero(v >= max(0.15, 0.25 * v.max()))]


def _squarem(em_step, mu: np.ndarray, sigma: np.ndarray, *, max_iter: int, tol: float
             ) -> tuple[np.ndarray, np.ndarray, int, bool]:
    """Run EM to its fixed point with squared extrapolation (SQUAREM, scheme S3).

    Two EM steps from θ₀ give r = θ₁ − θ₀ and v = θ₂ − 2θ₁ + θ₀; the extrapolated point
    θ₀ − 2αr + α²v with α = −‖r‖/‖v‖ (at most −1, where it is plain EM's θ₂) is then mapped
    by one more EM step.  A point whose covariance is not positive definite falls back to θ₂.
    Stops when one EM step changes no mean or covariance entry by ``tol`` or more (the plain
    EM's criterion), so the fixed point is the same; only the path there is shorter.
    ``max_iter`` bounds the EM steps.

    References
    ----------
    Varadhan, R., & Roland, C. (2008). Simple and globally convergent methods for accelerating
    the convergence of any EM algorithm. *Scandinavian Journal of Statistics*, 35(2), 335–353.
    """
    p = mu.size

    def pack(m: np.ndarray, s: np.ndarray) -> np.ndarray:
        return np.concatenate([m, s.ravel()])

    def unpack(theta: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        return theta[:p], theta[p:].reshape(p, p)

    def change(a: np.ndarray, b: np.ndarray) -> float:
        return float(np.max(np.abs(a - b)))

    theta, steps = pack(mu, sigma), 0
    while steps < max_iter:
        t1 = pack(*em_step(*unpack(theta)))
        steps += 1
        if change(t1, theta) < tol:
            return (*unpack(t1), steps, True)
        if steps >= max_iter:
            theta = t1
            break
        t2 = pack(*em_step(*unpack(t1)))
        steps += 1
        if change(t2, t1) < tol:
            return (*unpack(t2), steps, True)
        theta_prev = theta
        r, v = t1 - theta, t2 - 2 * t1 + theta
        nv = np.linalg.norm(v)
        alpha = min(-1.0, -np.linalg.norm(r) / nv) if nv > 0 else -1.0
        theta = t2  # alpha = -1 is plain EM
        if alpha < -1.0:
            m, s = unpack(theta_prev - 2 * alpha * r + alpha ** 2 * v)
            s = (s + s.T) / 2
            if np.all(np.isfinite(m)) and np.all(np.isfinite(s)) and np.linalg.eigvalsh(s)[0] > 1e-10:
                theta = pack(m, s)  # else the extrapolation left the parameter space: keep θ₂
        if steps >= max_iter:
            break
    return (*unpack(theta), steps, False)


def little_mcar_test(frame: pd.DataFrame, *, max_iter: int = 5000, tol: float = 1e-9) -> LittleResult:
    """Little's chi-square test that data are missing completely at random.

    Parameters
    ----------
    frame
        Numeric variables, NaN where missing.  Cases with every variable missing
        are dropped (and counted).
    max_iter, tol
        EM limits; ``tol`` is the largest change of any mean or covariance
        entry between iterations, in units of the variables' observed standard
        deviations.

    Returns
    -------
    LittleResult

    Raises
    ------
    SkipwiseError
        ``bad-data`` for non-numeric columns or columns with fewer than two
        observed values; ``singular`` (naming the variables) for constant,
        perfectly correlated or otherwise collinear variables.

    Notes
    -----
    ML estimates μ̂, Σ̂ (divisor n) come from EM under multivariate normality;
    for pattern j with n_j cases and observed variables O_j,
    d² = Σ_j n_j (ȳ_j − μ̂_{O_j})ᵀ Σ̂_{O_j}⁻¹ (ȳ_j − μ̂_{O_j}), df = Σ_j |O_j| − p.
    The statistic is invariant to rescaling, so EM runs on standardized values.

    References
    ----------
    Little, R. J. A. (1988). A test of missing completely at random for
    multivariate data with missing values. *Journal of the American Statistical
    Association*, 83(404), 1198–1202.
    Dempster, A. P., Laird, N. M., & Rubin, D. B. (1977). Maximum likelihood from
    incomplete data via the EM algorithm. *JRSS B*, 39(1), 1–38.

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> df = pd.DataFrame({"a": [1.0, 2, 3, 4, 5, 6], "b": [2.0, np.nan, 3, 5, np.nan, 6]})
    >>> r = little_mcar_test(df)
    >>> r.df, r.n_patterns
    (1, 2)
    """
    data = _check_input(frame)
    names = [str(c) for c in data.columns]
    y = data.to_numpy(dtype=float, na_value=np.nan)
    obs = ~np.isnan(y)
    keep = obs.any(axis=1)
    n_dropped = int((~keep).sum())
    y, obs = y[keep], obs[keep]
    n, p = y.shape
    notes: list[str] = []
    if n_dropped:
        notes.append(f"{n_dropped:,} cases with every variable missing were left out.")

    n_obs = obs.sum(axis=0)
    few = [names[k] for k in np.flatnonzero(n_obs < 2)]
    if few:
        raise SkipwiseError(Problem(
            code=ProblemCode.BAD_DATA, category=Category.DATA, item=", ".join(few),
            message="fewer than two observed values: no variance can be estimated",
            hint="leave these variables out of the test",
        ))
    with np.errstate(invalid="ignore"):
        m0 = np.nanmean(y, axis=0)
        s0 = np.nanstd(y, axis=0)
    const = [names[k] for k in np.flatnonzero(~(s0 > 1e-12 * np.maximum(1.0, np.abs(m0))))]
    if const:
        raise _singular("constant variables make the covariance matrix singular", const)
    z = np.where(obs, (y - m0) / s0, 0.0)

    # pairwise collinearity on co-observed cases (names the pair before EM starts)
    of = obs.astype(float)
    co_n = of.T @ of
    if np.any(co_n == 0):
        i, j = np.nonzero(np.triu(co_n == 0, 1))
        if len(i):
            pairs = ", ".join(f"{names[a]}/{names[b]}" for a, b in zip(i[:5], j[:5]))
            notes.append(f"Some pairs of variables are never observed together ({pairs}); their "
                         "covariance is not identified by the data and the test has less meaning.")
    corr = pd.DataFrame(np.where(obs, y, np.nan)).corr(min_periods=3).to_numpy()
    iu = np.triu_indices(p, 1)
    hit = np.abs(corr[iu]) > 1 - 1e-10
    if hit.any():
        a, b = iu[0][hit][0], iu[1][hit][0]
        raise _singular("perfectly correlated variables make the covariance matrix singular",
                        [names[a], names[b]])

    # patterns: integer code per row when it fits, else unique rows
    if p <= 62:
        code = obs.astype(np.int64) @ (np.int64(1) << np.arange(p, dtype=np.int64))
        _, first, inverse, counts = np.unique(code, return_index=True, return_inverse=True,
                                              return_counts=True)
    else:
        _, first, inverse, counts = np.unique(obs, axis=0, return_index=True, return_inverse=True,
                                              return_counts=True)
    inverse = np.asarray(inverse).ravel()
    order = np.argsort(inverse, kind="stable")
    bounds = np.concatenate([[0], np.cumsum(counts)])
    pat_obs = obs[first]
    zs = z[order]

    t1_obs = z.sum(axis=0)
    t2_obs = z.T @ z  # zeros stand in for missing values, so only observed blocks add up
    means = []
    cross: dict[int, list] = {}
    for j in range(len(counts)):
        o = np.flatnonzero(pat_obs[j])
        block = zs[bounds[j]:bounds[j + 1]][:, o]
        s = block.sum(axis=0)
        means.append(s / counts[j])
        if len(o) < p:
            cross.setdefault(len(o), []).append((j, o, s, block.T @ block))
    # incomplete patterns grouped by number observed, so each E-step is a few batched solves
    groups = []
    for k_obs, rows in cross.items():
        o_idx = np.array([r[1] for r in rows])
        m_idx = np.array([np.flatnonzero(~pat_obs[r[0]]) for r in rows])
        groups.append(dict(
            o=o_idx, m=m_idx, n=counts[[r[0] for r in rows]].astype(float),
            s=np.array([r[2] for r in rows]), c=np.array([r[3] for r in rows]),
            flat_om=(o_idx[:, :, None] * p + m_idx[:, None, :]).ravel(),
            flat_mo=(m_idx[:, :, None] * p + o_idx[:, None, :]).ravel(),
            flat_mm=(m_idx[:, :, None] * p + m_idx[:, None, :]).ravel(),
        ))

    def em_step(mu: np.ndarray, sigma: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        t1 = t1_obs.copy()
        t2 = t2_obs.ravel().copy()
        for g in groups:
            o, mi, nj, s, c = g["o"], g["m"], g["n"], g["s"], g["c"]
            s_oo = sigma[o[:, :, None], o[:, None, :]]
            s_om = sigma[o[:, :, None], mi[:, None, :]]
            try:
                bt = np.linalg.solve(s_oo, s_om)
            except np.linalg.LinAlgError:
                raise _singular("the covariance of the observed variables is singular",
                                _near_null_variables(sigma, names)) from None
            b = bt.transpose(0, 2, 1)
            a = mu[mi] - np.einsum("gmo,go->gm", b, mu[o])
            bs = np.einsum("gmo,go->gm", b, s)
            t1 += np.bincount(mi.ravel(), weights=(nj[:, None] * a + bs).ravel(), minlength=p)
            om = s[:, :, None] * a[:, None, :] + c @ bt
            mm = (nj[:, None, None] * a[:, :, None] * a[:, None, :]
                  + a[:, :, None] * bs[:, None, :] + bs[:, :, None] * a[:, None, :]
                  + b @ c @ bt
                  + nj[:, None, None] * (sigma[mi[:, :, None], mi[:, None, :]] - b @ s_om))
            t2 += np.bincount(g["flat_om"], weights=om.ravel(), minlength=p * p)
            t2 += np.bincount(g["flat_mo"], weights=om.transpose(0, 2, 1).ravel(), minlength=p * p)
            t2 += np.bincount(g["flat_mm"], weights=mm.ravel(), minlength=p * p)
        mu_new = t1 / n
        sigma_new = t2.reshape(p, p) / n - np.outer(mu_new, mu_new)
        sigma_new = (sigma_new + sigma_new.T) / 2
        if np.linalg.eigvalsh(sigma_new)[0] < 1e-10:
            raise _singular("the estimated covariance matrix is singular (collinear variables)",
                            _near_null_variables(sigma_new, names))
        return mu_new, sigma_new

    mu, sigma = np.zeros(p), np.eye(p)
    converged, it = not groups, 0
    if groups:
        mu, sigma, it, converged = _squarem(em_step, mu, sigma, max_iter=max_iter, tol=tol)
    if not groups:
        mu = t1_obs / n
        sigma = t2_obs / n - np.outer(mu, mu)
        it = 0
    if np.linalg.eigvalsh(sigma)[0] < 1e-10:
        raise _singular("the estimated covariance matrix is singular (collinear variables)",
                        _near_null_variables(sigma, names))
    if not converged:
        notes.append(f"EM did not meet the tolerance {tol:g} in {max_iter} iterations; the "
                     "statistic is approximate.")

    contrib = np.empty(len(counts))
    for j in range(len(counts)):
        o = np.flatnonzero(pat_obs[j])
        d = means[j] - mu[o]
        contrib[j] = counts[j] * d @ np.linalg.solve(sigma[np.ix_(o, o)], d)
    d2 = float(contrib.sum())
    df = int(pat_obs.sum() - p)
    p_value = float(stats.chi2.sf(d2, df)) if df > 0 else float("nan")
    if df == 0:
        notes.append("Only one pattern of observed variables: there is nothing to test.")
    notes.extend(LIMITS)

    mean = pd.Series(m0 + s0 * mu, index=names, name="mean")
    cov = pd.DataFrame(sigma * np.outer(s0, s0), index=names, columns=names)
    table = pd.DataFrame({
        "n_cases": counts.astype(int),
        "n_observed": pat_obs.sum(axis=1).astype(int),
        "missing_variables": [", ".join(names[k] for k in np.flatnonzero(~r)) or "(none)" for r in pat_obs],
        "d2_contribution": contrib,
    })
    for k, name in enumerate(names):
        table[name] = pat_obs[:, k].astype(int)
    table = table.sort_values(["n_cases", "n_observed"], ascending=[False, False], kind="stable")
    table.insert(0, "pattern", np.arange(1, len(table) + 1))
    table = table.reset_index(drop=True)
    return LittleResult(
        statistic=d2, df=df, p_value=p_value, n_patterns=int(len(counts)), n_cases=int(n),
        n_variables=p, n_dropped_all_missing=n_dropped, mean=mean, cov=cov, patterns=table,
        iterations=int(it), converged=bool(converged), notes=tuple(notes),
    )
