"""Combining estimates from M completed datasets (Rubin's rules).

For a scalar estimate Q with M completed-data estimates Q_i and variances U_i:
Q̄ = mean Q_i, Ū = mean U_i, B = var(Q_i) (divisor M−1), T = Ū + (1+1/M)B,
r = (1+1/M)B/Ū, λ = (1+1/M)B/T, ν_old = (M−1)(1+1/r)² (Rubin 1987), and with a
complete-data df ν_com the small-sample df of Barnard & Rubin (1999):
ν_obs = (ν_com+1)/(ν_com+3)·ν_com·(1−λ), ν = (1/ν_old + 1/ν_obs)⁻¹.
Fraction of missing information γ = (r + 2/(ν+3))/(r+1), with ν the df reported.

References
----------
Rubin, D. B. (1987). *Multiple Imputation for Nonresponse in Surveys*. Wiley, ch. 3.
Barnard, J. and Rubin, D. B. (1999). Small-sample degrees of freedom with multiple
imputation. *Biometrika* 86(4), 948–955.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Collection, Mapping, Sequence, Union

import numpy as np
import pandas as pd
from scipy import stats

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError, did_you_mean
from skipwise.questionnaire.model import CodeKind, Questionnaire

__all__ = ["PooledEstimate", "rubin_pool", "pool_means", "pool_proportions", "pool_ols", "excluded_values"]


@dataclass(frozen=True, kw_only=True)
class PooledEstimate:
    """Pooled estimates of k quantities from M imputations.

    Attributes
    ----------
    names
        Quantity names.
    estimate, within, between, total
        Q̄, Ū, B, T per quantity (diagonals where covariances were pooled).
    cov
        Pooled covariance matrix T = Ū + (1+1/M)B (k × k) when covariances were given, else None.
    r, lam, fmi
        Relative increase in variance, λ and Rubin's fraction of missing information γ.
    df, df_old, df_obs
        Degrees of freedom used (Barnard–Rubin when ``df_com`` is given, else Rubin's ν_old),
        and their parts.
    m, df_com, alpha
    """

    names: tuple[str, ...]
    estimate: np.ndarray
    within: np.ndarray
    between: np.ndarray
    total: np.ndarray
    r: np.ndarray
    lam: np.ndarray
    fmi: np.ndarray
    df: np.ndarray
    df_old: np.ndarray
    df_obs: np.ndarray | None
    m: int
    df_com: float | None
    alpha: float = 0.05
    cov: np.ndarray | None = None

    @property
    def se(self) -> np.ndarray:
        return np.sqrt(self.total)

    @property
    def ci(self) -> tuple[np.ndarray, np.ndarray]:
        """(lower, upper) of the 1−alpha interval from the t distribution with ``df``."""
        t = stats.t.ppf(1 - self.alpha / 2, self.df)
        return self.estimate - t * self.se, self.estimate + t * self.se

    def table(self) -> pd.DataFrame:
        lo, hi = self.ci
        return pd.DataFrame({"estimate": self.estimate, "se": self.se, "df": self.df,
                             "lower": lo, "upper": hi, "r": self.r, "lambda": self.lam, "fmi": self.fmi},
                            index=list(self.names))


def rubin_pool(estimates: Sequence | np.ndarray, variances: Sequence | np.ndarray, *,
               df_com: float | None = None, names: Sequence[str] | None = None,
               alpha: float = 0.05) -> PooledEstimate:
    """Combine M completed-data estimates by Rubin's rules.

    Parameters
    ----------
    estimates
        Shape (M,) or (M, k).
    variances
        Their variances, shape (M,) or (M, k), or covariance matrices (M, k, k).
    df_com
        Complete-data degrees of freedom (e.g. n − p for a regression); None = infinite.
    names
        Quantity names.
    alpha
        For the confidence interval.

    Returns
    -------
    PooledEstimate

    References
    ----------
    Rubin, D. B. (1987). *Multiple Imputation for Nonresponse in Surveys*. Wiley.
    Barnard, J. and Rubin, D. B. (1999). *Biometrika* 86(4), 948–955.

    Examples
    --------
    >>> p = rubin_pool([1, 2, 3, 4, 5], [1, 1, 1, 1, 1], df_com=10)
    >>> float(p.total[0]), round(float(p.df[0]), 4)
    (4.0, 1.6304)
    """
    q = np.asarray(estimates, dtype=float)
    u = np.asarray(variances, dtype=float)
    if q.ndim == 1:
        q = q[:, None]
    mm, k = q.shape
    full = u.ndim == 3
    if u.ndim == 1:
        u = u[:, None]
    if mm < 2 or u.shape[0] != mm or (not full and u.shape != q.shape) or (full and u.shape[1:] != (k, k)):
        raise SkipwiseError(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE,
                                    message=f"need at least 2 imputations with matching shapes; got estimates "
                                            f"{q.shape}, variances {u.shape}"))
    qbar = q.mean(axis=0)
    bcov = np.atleast_2d(np.cov(q, rowvar=False, ddof=1))
    f = 1.0 + 1.0 / mm
    if full:
        ucov = u.mean(axis=0)
        tcov = ucov + f * bcov
        ubar, tot = np.diag(ucov).copy(), np.diag(tcov).copy()
    else:
        ubar = u.mean(axis=0)
        tot, tcov = ubar + f * np.diag(bcov), None
    b = np.diag(bcov).copy()
    with np.errstate(divide="ignore", invalid="ignore"):
        r = f * b / ubar
        lam = np.where(tot > 0, f * b / tot, 0.0)
        df_old = np.where(b > 0, (mm - 1) * (1.0 + 1.0 / r) ** 2, np.inf)
        if df_com is None:
            df_obs, df = None, df_old
        else:
            df_obs = (df_com + 1.0) / (df_com + 3.0) * df_com * (1.0 - lam)
            df = 1.0 / (1.0 / df_old + 1.0 / df_obs)
        fmi = (r + 2.0 / (df + 3.0)) / (r + 1.0)
    return PooledEstimate(
        names=tuple(names) if names is not None else tuple(f"q{i}" for i in range(k)),
        estimate=qbar, within=ubar, between=b, total=tot, r=r, lam=lam, fmi=fmi, df=df,
        df_old=df_old, df_obs=df_obs, m=mm, df_com=df_com, alpha=alpha, cov=tcov,
    )


#: Values to leave out before pooling: one collection for every item, or one per item.
ExcludeValues = Union[Collection[Any], Mapping[str, Collection[Any]], None]


def excluded_values(items: Sequence[str], exclude_values: ExcludeValues = None,
                    questionnaire: Questionnaire | None = None) -> dict[str, list]:
    """The stored values of each item that are not answers and must not be pooled.

    With ``questionnaire``, each item's structural and nonresponse code values (its own and
    the file-wide ones); substantive codes are real answers and stay. ``exclude_values`` adds
    values for every item (a collection) or per item (a mapping of item to values).
    """
    problems = []
    if questionnaire is not None:
        problems = [Problem(code=ProblemCode.UNKNOWN_NAME, category=Category.USAGE, item=it,
                            message=f"item '{it}' is not in the questionnaire",
                            hint=did_you_mean(str(it), questionnaire.item_names)
                            or "pool it without the questionnaire, giving exclude_values")
                    for it in items if it not in questionnaire]
    if problems:
        raise SkipwiseError(problems)
    out: dict[str, list] = {}
    for it in items:
        vals: list = []
        if questionnaire is not None:
            vals += [c.value for c in questionnaire.item(it).codes if c.kind is not CodeKind.SUBSTANTIVE]
        if isinstance(exclude_values, Mapping):
            vals += list(exclude_values.get(it, ()))
        elif isinstance(exclude_values, (str, bytes)):
            vals.append(exclude_values)
        elif exclude_values is not None:
            vals += list(exclude_values)
        out[it] = vals
    return out


def _masked(datasets: Sequence[pd.DataFrame], items: Sequence[str], codes: Mapping[str, list],
            questionnaire: Questionnaire | None = None) -> list[pd.DataFrame]:
    """The ``items`` of each dataset with the excluded values set to missing.

    With a questionnaire, a dataset holding every column it names is classified and only its
    answered cells are kept, so invalid values and off-route answers are never pooled either;
    a dataset holding only some items has just the codes left out.
    """
    out = []
    needed = () if questionnaire is None else (questionnaire.case_id, *questionnaire.context,
                                                 *questionnaire.columns)
    for d in datasets:
        if questionnaire is not None and all(c in d.columns for c in needed):
            from skipwise.classify import classify

            answered = classify(d, questionnaire).analysis_values()
            d = d.assign(**{it: d[it].where(answered[it].notna()) for it in items})
        cols = {it: d[it].mask(d[it].isin(codes[it])) if codes[it] else d[it] for it in items}
        out.append(pd.DataFrame(cols, index=d.index))
    return out


def _check_observed(frames: Sequence[pd.DataFrame], items: Sequence[str], least: int) -> None:
    problems = [Problem(code=ProblemCode.BAD_DATA, category=Category.DATA, item=it,
                        message=f"imputation {k + 1} has fewer than {least} value(s) of '{it}' to pool",
                        hint="check that the item was imputed and that exclude_values leaves its answers")
                for k, d in enumerate(frames) for it in items if int(d[it].notna().sum()) < least]
    if problems:
        raise SkipwiseError(problems)


def pool_means(datasets: Sequence[pd.DataFrame], items: Sequence[str], *,
               exclude_values: ExcludeValues = None, questionnaire: Questionnaire | None = None,
               alpha: float = 0.05) -> PooledEstimate:
    """Pooled means of ``items``; within variance s²/n, complete-data df n − 1.

    Parameters
    ----------
    datasets
        The M completed datasets.
    items
        Numeric items to average.
    exclude_values
        Stored values that are not answers (e.g. ``[-1, -9]``), for every item or as a
        mapping item → values; such cells are treated as missing before pooling.
    questionnaire
        If given, each item's structural and nonresponse codes are left out
        (skip-consistent imputation keeps structural codes in routed-out cells and the
        codes of cells it left unfilled); and when a dataset holds every column the
        questionnaire names, it is classified and only answered cells are pooled, so
        invalid values and off-route answers are left out too. Without either argument
        every stored value is averaged as it is.
    alpha
        For the confidence interval.

    Notes
    -----
    n is the item's non-missing count in each dataset (after exclusion); the
    complete-data df is the smallest number of rows with every item present, minus 1.

    References
    ----------
    Rubin, D. B. (1987). *Multiple Imputation for Nonresponse in Surveys*. Wiley, ch. 3.
    """
    items = list(items)
    frames = _masked(datasets, items, excluded_values(items, exclude_values, questionnaire), questionnaire)
    _check_observed(frames, items, 2)
    num = [d.astype("float64") for d in frames]
    est = np.array([[d[i].mean() for i in items] for d in num])
    var = np.array([[d[i].var(ddof=1) / d[i].notna().sum() for i in items] for d in num])
    n = min(int(d.notna().all(axis=1).sum()) for d in num)
    return rubin_pool(est, var, df_com=n - 1, names=items, alpha=alpha)


def pool_proportions(datasets: Sequence[pd.DataFrame], item: str, categories: Sequence | None = None, *,
                     exclude_values: ExcludeValues = None, questionnaire: Questionnaire | None = None,
                     alpha: float = 0.05) -> PooledEstimate:
    """Pooled shares of ``item``'s categories; within variance p(1−p)/n, df n − 1.

    Shares are taken over the item's non-missing cells (n), so over all categories
    they sum to 1. ``exclude_values`` and ``questionnaire`` work as in
    :func:`pool_means`: excluded cells count as missing and are no category.
    ``categories`` defaults to every value left in any dataset, sorted.
    (For shares near 0 or 1 consider pooling on the logit scale; common practice, no source.)

    References
    ----------
    Rubin, D. B. (1987). *Multiple Imputation for Nonresponse in Surveys*. Wiley, ch. 3.
    """
    col = [d[item] for d in _masked(datasets, [item], excluded_values([item], exclude_values, questionnaire),
                                          questionnaire)]
    _check_observed([c.to_frame() for c in col], [item], 1)
    if categories is None:
        categories = sorted(pd.unique(pd.concat(col).dropna()))
    n = np.array([float(c.notna().sum()) for c in col])[:, None]
    est = np.array([[float((c == v).sum()) for v in categories] for c in col]) / n
    return rubin_pool(est, est * (1 - est) / n, df_com=float(n.min()) - 1,
                      names=[f"{item}={c}" for c in categories], alpha=alpha)


def pool_ols(datasets: Sequence[pd.DataFrame], y: str, x: Sequence[str], *,
             alpha: float = 0.05) -> PooledEstimate:
    """Fit the same OLS (with constant) to each dataset and pool the coefficients,
    with the full covariance T = Ū + (1+1/M)B and df_com = n − p."""
    import statsmodels.api as sm

    params, covs, dfc = [], [], []
    for d in datasets:
        res = sm.OLS(d[y].astype("float64"), sm.add_constant(d[list(x)].astype("float64"), has_constant="add")).fit()
        params.append(np.asarray(res.params))
        covs.append(np.asarray(res.cov_params()))
        dfc.append(res.df_resid)
    return rubin_pool(np.array(params), np.array(covs), df_com=float(min(dfc)),
                      names=["const", *x], alpha=alpha)
