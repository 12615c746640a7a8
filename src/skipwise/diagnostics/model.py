"""Logistic models of a nonresponse indicator on auxiliaries, and their AUC."""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import Sequence

import numpy as np
import pandas as pd
import statsmodels.api as sm
from scipy import special, stats
from statsmodels.tools.sm_exceptions import ConvergenceWarning, PerfectSeparationWarning

from skipwise.diagnostics.compare import prepare_auxiliaries
from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError
from skipwise.separation import SeparationCheck, detect_separation, sentence as _sentence

__all__ = ["LogitResult", "auc_mann_whitney", "design_matrix", "fit_logit", "nonresponse_logit",
           "coefficient_table", "fitted_probabilities", "unstable_terms", "UNSTABLE_NOTE",
           "SE_MODEL_BASED", "SE_ROBUST", "ROBUST_COV_TYPE", "blank_separated"]

#: Label of standard errors from the inverse information matrix (unweighted maximum likelihood).
SE_MODEL_BASED = "model-based (maximum likelihood, unweighted)"
#: statsmodels covariance type used with design weights (sandwich without small-sample factor).
ROBUST_COV_TYPE = "HC0"
#: Label of standard errors of a design-weighted fit.
SE_ROBUST = ("robust sandwich (HC0) with design weights: design-based for a single-stage sample "
             "drawn with replacement; strata, clusters and finite-population corrections ignored")


def auc_mann_whitney(scores: np.ndarray | pd.Series, labels: np.ndarray | pd.Series) -> float:
    """Area under the ROC curve from the Mann–Whitney rank-sum formula.

    AUC = (R₁ − n₁(n₁+1)/2) / (n₁ n₀), R₁ the sum of mid-ranks of the scores of
    the positive cases: the probability that a random positive case scores
    higher than a random negative one (ties count one half).  NaN if either
    class is empty.

    References
    ----------
    Hanley, J. A., & McNeil, B. J. (1982). The meaning and use of the area under a
    receiver operating characteristic (ROC) curve. *Radiology*, 143, 29–36.
    Mann, H. B., & Whitney, D. R. (1947). On a test of whether one of two random
    variables is stochastically larger than the other. *Ann. Math. Statist.*, 18, 50–60.
    """
    s = np.asarray(scores, dtype=float)
    y = np.asarray(labels).astype(bool)
    n1, n0 = int(y.sum()), int((~y).sum())
    if n1 == 0 or n0 == 0:
        return float("nan")
    ranks = stats.rankdata(s)
    return float((ranks[y].sum() - n1 * (n1 + 1) / 2) / (n1 * n0))


def design_matrix(aux: pd.DataFrame, categorical: Sequence[str]) -> tuple[pd.DataFrame, dict[str, str], list[str]]:
    """Constant, numeric auxiliaries as they are, categorical ones as indicators.

    Each categorical auxiliary's most frequent category is the reference.
    Returns the matrix, the reference category per variable and the names of
    columns dropped because they were constant or linear combinations of
    earlier columns (e.g. a selection probability fixed within strata).
    """
    parts = [pd.Series(1.0, index=aux.index, name="const")]
    refs: dict[str, str] = {}
    dropped: list[str] = []
    for col in aux.columns:
        name = str(col)
        if name in categorical:
            s = aux[col].astype(str)
            levels = s.value_counts()
            ref = str(levels.index[0])
            refs[name] = ref
            for lev in sorted(levels.index[1:], key=str):
                parts.append(pd.Series((s == lev).astype(float), name=f"{name}={lev}"))
        else:
            x = aux[col].astype(float)
            if x.nunique() < 2:
                dropped.append(name)
                continue
            parts.append(x.rename(name))
    x = pd.concat(parts, axis=1)
    redundant = _redundant_columns(x)
    return x.drop(columns=redundant), refs, dropped + redundant


def _redundant_columns(x: pd.DataFrame) -> list[str]:
    """Columns that are linear combinations of earlier ones (greedy, on the scaled Gram matrix)."""
    xv = x.to_numpy(float)
    xv = xv / np.maximum(np.sqrt((xv ** 2).mean(axis=0)), 1e-300)
    gram = xv.T @ xv / len(xv)
    if np.linalg.matrix_rank(gram, tol=1e-9) == gram.shape[0]:
        return []
    keep: list[int] = []
    out: list[str] = []
    for k in range(gram.shape[0]):
        trial = keep + [k]
        if np.linalg.matrix_rank(gram[np.ix_(trial, trial)], tol=1e-9) == len(trial):
            keep = trial
        else:
            out.append(str(x.columns[k]))
    return out


def _collinear_columns(x: np.ndarray, names: list[str]) -> list[str]:
    _, sv, vt = np.linalg.svd(x / np.maximum(np.abs(x).max(axis=0), 1e-300), full_matrices=False)
    v = np.abs(vt[-1])
    return [names[k] for k in np.flatnonzero(v >= 0.25 * v.max())]


def fit_logit(y: pd.Series, x: pd.DataFrame, *, weights: pd.Series | None = None):
    """Fit the logistic regression of ``y`` on ``x``; return (result, notes).

    Unweighted: statsmodels ``Logit``, with model-based standard errors
    (:data:`SE_MODEL_BASED`).  Weighted: a binomial GLM with the weights
    d_i (rescaled to sum to n; neither estimates nor standard errors depend
    on that scale) as variance weights, which gives the weighted
    (pseudo-)maximum-likelihood estimates solving Σ d_i (y_i − ρ_i) x_i = 0,
    and the robust sandwich covariance ``cov_type="HC0"`` (:data:`SE_ROBUST`)
    A⁻¹ B A⁻¹, A = Σ d_i ρ_i(1 − ρ_i) x_i x_iᵀ, B = Σ d_i² (y_i − ρ_i)² x_i x_iᵀ.
    That is the linearization variance of a single-stage with-replacement
    design; strata and clusters are not taken into account.

    References
    ----------
    Binder, D. A. (1983). On the variances of asymptotically normal estimators
    from complex surveys. *International Statistical Review*, 51, 279–292.
    White, H. (1980). A heteroskedasticity-consistent covariance matrix estimator
    and a direct test for heteroskedasticity. *Econometrica*, 48, 817–838.
    """
    xv = x.to_numpy(float)
    if np.linalg.matrix_rank(xv) < xv.shape[1]:
        cols = _collinear_columns(xv, list(x.columns))
        raise SkipwiseError(Problem(
            code=ProblemCode.SINGULAR, category=Category.DATA, item=", ".join(cols),
            message="the auxiliaries of the logistic model are collinear",
            hint="drop one of these auxiliaries or merge sparse categories",
        ))
    notes: list[str] = []
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            if weights is None:
                res = sm.Logit(y.astype(float), x).fit(disp=0, maxiter=200)
            else:
                w = weights.to_numpy(float)
                w = w * len(w) / w.sum()
                res = sm.GLM(y.astype(float), x, family=sm.families.Binomial(),
                             var_weights=w).fit(maxiter=200, cov_type=ROBUST_COV_TYPE)
        except (np.linalg.LinAlgError, ValueError) as exc:
            raise SkipwiseError(Problem(
                code=ProblemCode.SINGULAR, category=Category.DATA,
                message=f"the logistic model could not be fitted ({exc})",
                hint="use fewer auxiliaries or merge sparse categories",
            )) from None
    for w in caught:
        if issubclass(w.category, PerfectSeparationWarning):
            notes.append("Some auxiliary separates respondents from nonrespondents perfectly; "
                         "its coefficient and odds ratio are not finite estimates.")
        elif issubclass(w.category, ConvergenceWarning):
            notes.append("The logistic model did not converge; read its estimates with care.")
    return res, sorted(set(notes))


#: A coefficient this large (log-odds) or a standard error this large marks an unstable estimate,
#: usually (quasi-)separation: a category with (almost) no nonrespondents (common practice, no source).
UNSTABLE_COEF, UNSTABLE_SE = 10.0, 5.0
UNSTABLE_NOTE = ("Unstable estimates (huge coefficient or standard error, usually a category with (almost) no "
                 "respondents or no nonrespondents: separation) for {terms}: their odds ratios and limits are "
                 "not meaningful (shown blank when they overflow); merge sparse categories to estimate them.")


def coefficient_table(res, terms: list[str], *, alpha: float = 0.05) -> pd.DataFrame:
    """Coefficients, odds ratios and their (1 − alpha) limits of a fitted logit.

    An odds ratio or limit too large to represent (exp overflow, which happens
    under separation) is left blank (NaN) instead of raising a warning.
    """
    ci = np.asarray(res.conf_int(alpha=alpha), dtype=float)
    coef = np.asarray(res.params, dtype=float)

    def odds(v: np.ndarray) -> np.ndarray:
        with np.errstate(over="ignore", invalid="ignore"):
            out = np.exp(v)
        return np.where(np.isfinite(out), out, np.nan)

    return pd.DataFrame({
        "term": terms, "coef": coef, "std_err": np.asarray(res.bse, dtype=float),
        "z": np.asarray(res.tvalues, dtype=float), "p_value": np.asarray(res.pvalues, dtype=float),
        "odds_ratio": odds(coef), "or_low": odds(ci[:, 0]), "or_high": odds(ci[:, 1]),
    })


def fitted_probabilities(res, x: pd.DataFrame) -> np.ndarray:
    """Fitted probabilities expit(x·β), overflow-free even for the huge linear predictors of separation."""
    return special.expit(x.to_numpy(float) @ np.asarray(res.params, dtype=float))


def unstable_terms(table: pd.DataFrame) -> list[str]:
    """Terms (other than the intercept) whose estimate is unstable (:data:`UNSTABLE_COEF`, :data:`UNSTABLE_SE`)."""
    bad = ((table["coef"].abs() > UNSTABLE_COEF) | (table["std_err"] > UNSTABLE_SE)
           | ~np.isfinite(table["std_err"]) | table["or_high"].isna())
    return [str(t) for t in table.loc[bad & (table["term"] != "const"), "term"]]


@dataclass(frozen=True, kw_only=True, eq=False)
class LogitResult:
    """Logistic regression of an item's nonresponse indicator on auxiliaries.

    Attributes
    ----------
    item
        Item name.
    n, n_nonresponse
        Cases in the model and nonrespondents among them.
    n_left_out
        In-scope cases left out because an auxiliary was missing.
    table
        One row per term: ``term``, ``coef``, ``std_err``, ``z``, ``p_value``,
        ``odds_ratio``, ``or_low``, ``or_high`` (confidence limits).
    reference
        Reference category of each categorical auxiliary.
    auc
        Area under the ROC curve of the fitted probabilities (0.5 = no discrimination).
    pseudo_r2
        McFadden's pseudo R².
    lr_statistic, lr_df, lr_p_value
        Likelihood-ratio test of all auxiliaries against the intercept-only model.
    notes
        Remarks (dropped cases or constant auxiliaries, separation, convergence).
    separation
        The verdict of :func:`skipwise.separation.detect_separation` on the model's data; the
        odds ratios and limits of the terms involved are blank (they have no finite estimate).
    """

    item: str
    n: int
    n_nonresponse: int
    table: pd.DataFrame
    reference: dict[str, str]
    auc: float
    pseudo_r2: float
    lr_statistic: float
    lr_df: int
    lr_p_value: float
    notes: tuple[str, ...]
    n_left_out: int = 0
    separation: SeparationCheck | None = None


def nonresponse_logit(indicator: pd.Series, aux: pd.DataFrame, *, categorical: Sequence[str] | None = None,
                      item: str | None = None, alpha: float = 0.05) -> LogitResult:
    """Model P(item nonresponse) from fully observed auxiliaries.

    Parameters
    ----------
    indicator
        True = nonresponse, over the item's in-scope cases.
    aux
        Auxiliaries; cases with a missing auxiliary are dropped and counted.
    categorical
        Auxiliaries to code as indicators (default: inferred).
    item
        Name used in results.
    alpha
        1 − confidence level of the odds-ratio limits.

    Returns
    -------
    LogitResult

    Raises
    ------
    SkipwiseError
        ``singular`` if the auxiliaries are collinear or the model cannot be
        fitted; ``bad-data`` if all cases are respondents or all nonrespondents.

    References
    ----------
    Hosmer, D. W., Lemeshow, S., & Sturdivant, R. X. (2013). *Applied Logistic
    Regression* (3rd ed.). Wiley.
    Rosenbaum, P. R., & Rubin, D. B. (1983). The central role of the propensity
    score in observational studies for causal effects. *Biometrika*, 70, 41–55.
    """
    name = str(item if item is not None else (indicator.name or "item"))
    ind, sub, cat, n_drop = prepare_auxiliaries(indicator, aux, categorical)
    n_m = int(ind.sum())
    if n_m == 0 or n_m == len(ind):
        raise SkipwiseError(Problem(
            code=ProblemCode.BAD_DATA, category=Category.DATA, item=name,
            message="no model: every case is a respondent or every case a nonrespondent",
        ))
    x, refs, const = design_matrix(sub, cat)
    res, notes = fit_logit(ind, x)
    if n_drop:
        notes.insert(0, f"{n_drop:,} in-scope cases with a missing auxiliary were left out.")
    if const:
        notes.append(f"Constant or redundant (collinear) terms left out: {', '.join(const)}.")
    table = coefficient_table(res, list(x.columns), alpha=alpha)
    sep = detect_separation(x, ind.to_numpy())
    if sep.separated:
        notes = [n for n in notes if not n.startswith("Some auxiliary separates")]
        notes.append(_sentence(sep.describe("nonrespondents", "respondents")))
        table = blank_separated(table, sep)
    unstable = [t for t in unstable_terms(table) if t not in sep.terms]
    if unstable:
        notes.append(UNSTABLE_NOTE.format(terms=", ".join(unstable)))
    fitted = fitted_probabilities(res, x)
    return LogitResult(
        item=name, n=int(len(ind)), n_nonresponse=n_m, table=table, reference=refs,
        auc=auc_mann_whitney(fitted, ind.to_numpy()), pseudo_r2=float(res.prsquared),
        lr_statistic=float(res.llr), lr_df=int(res.df_model), lr_p_value=float(res.llr_pvalue),
        notes=tuple(notes), separation=sep, n_left_out=int(n_drop),
    )


def blank_separated(table: pd.DataFrame, sep: SeparationCheck) -> pd.DataFrame:
    """The table with the z, p-value and odds ratios of separated terms blank (their estimates diverge).

    The coefficients themselves stay: fitted probabilities are computed from them.
    """
    if not sep.separated:
        return table
    out = table.copy()
    bad = out["term"].isin(sep.terms) if sep.terms else pd.Series(False, index=out.index)
    if sep.verdict == "complete":
        bad |= True
    cols = [c for c in ("z", "p_value", "odds_ratio", "or_low", "or_high") if c in out.columns]
    out.loc[bad, cols] = np.nan
    return out
