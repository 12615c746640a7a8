"""Response propensity: a logistic model of responding among eligible cases."""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError, did_you_mean
from skipwise.separation import COMPLETE, SeparationCheck, detect_separation

__all__ = ["PropensityFit", "propensity_design", "fit_propensity", "propensity_classes",
           "DEFAULT_PROPENSITY_CLASSES"]

#: Five classes remove about 90 % of the bias of one covariate (Cochran 1968).
DEFAULT_PROPENSITY_CLASSES = 5


@dataclass(frozen=True, kw_only=True)
class PropensityFit:
    """Fitted response propensities and the model's coefficients."""

    propensity: np.ndarray
    params: pd.Series
    bse: pd.Series
    separation: SeparationCheck | None = None


def propensity_design(frame: pd.DataFrame, covariates: list[str], *,
                      categorical: list[str] | tuple[str, ...] = ()) -> pd.DataFrame:
    """Design matrix: a constant, numeric covariates as they are, and dummies (first level
    dropped) for text, categorical or listed ``categorical`` covariates."""
    problems = []
    for v in covariates:
        if v not in frame.columns:
            problems.append(Problem(code=ProblemCode.MISSING_COLUMN, category=Category.DATA, item=v,
                                    message=f"propensity covariate '{v}' is not in the data",
                                    hint=did_you_mean(v, map(str, frame.columns))))
        elif frame[v].isna().any():
            n = int(frame[v].isna().sum())
            problems.append(Problem(code=ProblemCode.BAD_DATA, category=Category.DATA, item=v,
                                    message=f"{n} eligible case(s) have no value of propensity covariate '{v}'",
                                    hint="recode missing values into a category of their own"))
    if problems:
        raise SkipwiseError(problems)
    parts = [pd.Series(1.0, index=frame.index, name="const")]
    for v in covariates:
        col = frame[v]
        if v in categorical or not pd.api.types.is_numeric_dtype(col) or isinstance(col.dtype, pd.CategoricalDtype):
            dummies = pd.get_dummies(col.astype(str), prefix=v, prefix_sep="=", drop_first=True, dtype=float)
            parts.extend(dummies[c] for c in dummies.columns)
        else:
            parts.append(col.astype(float).rename(v))
    return pd.concat(parts, axis=1)


def fit_propensity(x: pd.DataFrame, responded: np.ndarray, fit_weights: np.ndarray | None = None
                   ) -> PropensityFit:
    """Logistic regression of responding on ``x`` (statsmodels).

    Unweighted fits use ``statsmodels`` ``Logit``; with ``fit_weights`` (the
    resampling multiplicities of a replicate) a binomial GLM with frequency
    weights, which equals ``Logit`` when all weights are equal.

    The full-sample fit is checked for separation first (:func:`skipwise.separation.detect_separation`):
    complete separation, or quasi-complete separation that leaves eligible nonrespondents with a
    propensity of 0, is refused (their weight would be lost); quasi-complete separation among
    respondents only (propensities of 1) is kept and reported in ``separation``.

    References
    ----------
    Rosenbaum, P. R. & Rubin, D. B. (1983). The central role of the propensity
    score in observational studies for causal effects. *Biometrika* 70(1), 41–55.
    Albert, A. & Anderson, J. A. (1984). On the existence of maximum likelihood estimates in
    logistic regression models. *Biometrika* 71(1), 1–10.
    """
    import statsmodels.api as sm

    y = np.asarray(responded, dtype=float)
    sep = None
    if fit_weights is None:  # the full-sample fit; replicates refit the design already accepted
        sep = detect_separation(x, y.astype(bool))
        if sep.verdict == COMPLETE or sep.perfect_zeros:
            what = ("separate respondents from nonrespondents completely" if sep.verdict == COMPLETE else
                    f"leave {sep.perfect_zeros:,} eligible nonrespondent(s) with a response propensity of 0")
            raise SkipwiseError(Problem(
                code=ProblemCode.SINGULAR, category=Category.DATA, item=", ".join(sep.terms) or "propensity",
                message=f"the propensity covariates {what} ({sep.verdict} separation by "
                        f"{', '.join(sep.terms) or 'a combination of covariates'}): their weight could not be "
                        "carried by any respondent, so the weights would miss their totals",
                hint="collapse the category with a neighbouring one, drop the covariate, or use "
                     "'method: classes' with collapsing"))
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            if fit_weights is None:
                res = sm.Logit(y, x).fit(disp=0, method="newton", maxiter=100)
            else:
                keep = fit_weights > 0
                res = sm.GLM(y[keep], x[keep], family=sm.families.Binomial(),
                             freq_weights=fit_weights[keep]).fit()
    except Exception as exc:  # statsmodels signals separation and singular designs in several ways
        raise SkipwiseError(Problem(code=ProblemCode.SINGULAR, category=Category.DATA, item="propensity",
                                    message=f"the response propensity model cannot be fitted ({exc})",
                                    hint="drop or collapse covariates that separate respondents "
                                         "from non-respondents")) from None
    params = res.params
    if not np.all(np.isfinite(params)):
        raise SkipwiseError(Problem(code=ProblemCode.SINGULAR, category=Category.DATA, item="propensity",
                                    message="the response propensity model has non-finite coefficients",
                                    hint="drop collinear covariates"))
    p = 1.0 / (1.0 + np.exp(-(x.to_numpy() @ params.to_numpy())))
    return PropensityFit(propensity=p, params=pd.Series(params, index=x.columns),
                         bse=pd.Series(res.bse, index=x.columns), separation=sep)


def propensity_classes(p: np.ndarray, n_classes: int = DEFAULT_PROPENSITY_CLASSES) -> tuple[np.ndarray, list[str]]:
    """Classes of equal size by quantiles of the propensity (class codes 0..k-1 and labels).

    References
    ----------
    Cochran, W. G. (1968). The effectiveness of adjustment by subclassification
    in removing bias in observational studies. *Biometrics* 24(2), 295–313.
    """
    edges = np.quantile(p, np.linspace(0.0, 1.0, n_classes + 1))
    codes = np.searchsorted(edges[1:-1], p, side="right").astype(np.intp)
    labels = [f"propensity {i + 1} [{edges[i]:.3f}, {edges[i + 1]:.3f}]" for i in range(n_classes)]
    return codes, labels
