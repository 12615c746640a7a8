"""Response propensities, the R-indicator and partial R-indicators.

A response is *representative* with respect to a set of variables when every
sampled unit had the same chance of responding.  The R-indicator measures the
spread of estimated response propensities; partial indicators say which
variables and which of their categories drive the lack of representativeness.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np
import pandas as pd
from scipy import special

from skipwise.diagnostics.compare import prepare_auxiliaries
from skipwise.diagnostics.model import (
    SE_MODEL_BASED, SE_ROBUST, UNSTABLE_NOTE, blank_separated, coefficient_table, design_matrix, fit_logit,
    fitted_probabilities, unstable_terms,
)
from skipwise.separation import SeparationCheck, detect_separation, sentence as _sentence
from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError

__all__ = ["RIndicatorResult", "r_indicator", "BINS"]

#: Quantile groups used to read a numeric variable's partial indicator (common practice, no source).
BINS = 5


@dataclass(frozen=True, kw_only=True, eq=False)
class RIndicatorResult:
    """Representativeness of a response with respect to some variables.

    Attributes
    ----------
    target
        What "response" means here (unit response, or response to an item).
    n, n_responded
        Cases and responding cases that entered the model.
    n_left_out
        Cases left out because an auxiliary was missing.
    response_rate
        (Weighted) response rate; equals the mean propensity for a logistic model.
    mean_propensity, sd_propensity
        ρ̄ and S(ρ̂) = √(Σ d_i(ρ̂_i − ρ̄)² / (N − 1)), N = Σ d_i.
    r_indicator
        R = 1 − 2 S(ρ̂): 1 = fully representative, lower = less.
    max_abs_bias
        Upper bound on the absolute standardized bias of a respondent mean,
        (1 − R)/(2 ρ̄).
    propensities
        Fitted propensities, indexed like the input.
    partial
        One row per variable: ``variable``, ``partial_unconditional`` P_U(X).
    categories
        One row per (variable, category): ``n``, ``share`` (weighted),
        ``response_rate``, ``mean_propensity``, ``partial_unconditional``
        (signed; negative = under-represented among respondents).
    model
        Coefficient table of the propensity model: ``term``, ``coef``,
        ``std_err``, ``p_value``, ``odds_ratio``, ``or_low``, ``or_high``.
    model_se
        How ``std_err``, ``p_value`` and the limits of ``model`` were computed:
        :data:`~skipwise.diagnostics.model.SE_MODEL_BASED` without weights,
        :data:`~skipwise.diagnostics.model.SE_ROBUST` (sandwich, ``HC0``) with
        design weights.
    notes
        Remarks.
    """

    target: str
    n: int
    n_responded: int
    response_rate: float
    mean_propensity: float
    sd_propensity: float
    r_indicator: float
    max_abs_bias: float
    propensities: pd.Series
    partial: pd.DataFrame
    categories: pd.DataFrame
    model: pd.DataFrame
    model_se: str
    notes: tuple[str, ...]
    n_left_out: int = 0
    separation: SeparationCheck | None = None


def _groups(s: pd.Series, is_cat: bool, bins: int) -> pd.Series:
    if is_cat:
        return s.astype(str)
    x = s.astype(float)
    if x.nunique() <= bins:
        # format each distinct value once; factorizing the bit patterns keeps −0.0 apart from 0.0, as before
        codes, uniques = pd.factorize(np.ascontiguousarray(x.to_numpy(float)).view(np.int64))
        labels = np.array([f"{v:g}" for v in uniques.view(np.float64)], dtype=object)
        return pd.Series(labels[codes], index=s.index, name=s.name, dtype="str")
    q = pd.qcut(x, bins, duplicates="drop")
    return q.astype(str)


def r_indicator(responded: pd.Series, frame_vars: pd.DataFrame, *, weights: pd.Series | None = None,
                categorical: Sequence[str] | None = None, bins: int = BINS,
                target: str = "unit response", nonresponse_model=None) -> RIndicatorResult:
    """Estimate response propensities and the R-indicator with partial indicators.

    Parameters
    ----------
    responded
        True = responded, for every sampled unit (or every in-scope case of an item).
    frame_vars
        Variables known for respondents and nonrespondents alike; cases with
        a missing value are dropped and counted.
    weights
        Design weights d_i (default: all 1).
    categorical
        Variables coded as indicators in the model and read by category
        (default: inferred); numeric variables enter the model linearly and
        are read in ``bins`` quantile groups.
    bins
        Quantile groups for numeric variables' partial indicators.
    target
        Label of the response in the results.
    nonresponse_model
        Unweighted only: the :class:`~skipwise.diagnostics.model.LogitResult`
        of the nonresponse indicator ``~responded`` on the same variables.  The
        response model is then that model with its signs reversed (the
        logistic likelihood is symmetric in the two outcomes), and is not fitted again.

    Returns
    -------
    RIndicatorResult

    Notes
    -----
    ρ̂ from a (design-weighted) logistic regression.  Its standard errors are
    model-based without weights and robust sandwich (``HC0``) with design
    weights (see :func:`~skipwise.diagnostics.model.fit_logit` and ``model_se``).  With N = Σ d_i and
    ρ̄ = Σ d_i ρ̂_i / N, S(ρ̂) = √(Σ d_i (ρ̂_i − ρ̄)² / (N − 1)) and R = 1 − 2 S(ρ̂).
    Unconditional partial indicator of a variable X with categories k:
    P_U(X, k) = √(N_k/N) (ρ̄_k − ρ̄) and P_U(X) = √(Σ_k (N_k/N)(ρ̄_k − ρ̄)²), the
    between-category standard deviation of the propensities.  Conditional
    partial indicators and the bias adjustment of R are not computed.

    References
    ----------
    Schouten, B., Cobben, F., & Bethlehem, J. (2009). Indicators for the
    representativeness of survey response. *Survey Methodology*, 35(1), 101–113.
    Schouten, B., Shlomo, N., & Skinner, C. (2011). Indicators for monitoring and
    improving representativeness of response. *Journal of Official Statistics*,
    27(2), 231–253.
    """
    ind, sub, cat, n_drop = prepare_auxiliaries(responded, frame_vars, categorical)
    notes: list[str] = []
    if n_drop:
        notes.append(f"{n_drop:,} cases with a missing frame variable were left out.")
    if weights is None:
        d = pd.Series(1.0, index=ind.index)
    else:
        d = weights.loc[ind.index].astype(float)
        if d.isna().any() or (d <= 0).any():
            raise SkipwiseError(Problem(
                code=ProblemCode.BAD_WEIGHTS, category=Category.DATA,
                message="design weights must be positive and present for every case",
                hint="check the weight column for blanks, zeros and negative values",
            ))
    n_resp = int(ind.sum())
    if n_resp == 0 or n_resp == len(ind):
        raise SkipwiseError(Problem(
            code=ProblemCode.BAD_DATA, category=Category.DATA, item=target,
            message="every case responded or none did: propensities cannot be estimated",
            hint="the R-indicator needs the sampled nonrespondents too",
        ))
    x, refs, const = design_matrix(sub, cat)
    if const:
        notes.append(f"Constant or redundant (collinear) terms left out: {', '.join(const)}.")
    reuse = (nonresponse_model is not None and weights is None
             and list(nonresponse_model.table["term"]) == list(x.columns) and nonresponse_model.n == len(ind))
    if reuse:
        t = nonresponse_model.table
        model = pd.DataFrame({"term": t["term"], "coef": -t["coef"], "std_err": t["std_err"], "p_value": t["p_value"],
                              "odds_ratio": 1.0 / t["odds_ratio"], "or_low": 1.0 / t["or_high"],
                              "or_high": 1.0 / t["or_low"]}).replace([np.inf, -np.inf], np.nan).reset_index(drop=True)
        rho = pd.Series(special.expit(x.to_numpy(float) @ model["coef"].to_numpy(float)), index=ind.index,
                        name="propensity")
        notes.append("Propensity model: the item's nonresponse model with its signs reversed.")
    else:
        res, fit_notes = fit_logit(ind, x, weights=None if weights is None else d)
        notes.extend(fit_notes)
        rho = pd.Series(fitted_probabilities(res, x), index=ind.index, name="propensity")
        model = coefficient_table(res, list(x.columns)).drop(columns="z")
    sep = detect_separation(x, ind.to_numpy())
    if sep.separated:
        notes = [n for n in notes if not n.startswith("Some auxiliary separates")]
        notes.append(_sentence(sep.describe("respondents", "nonrespondents")))
        model = blank_separated(model, sep)
    dv, rv = d.to_numpy(), rho.to_numpy()
    big_n = dv.sum()
    rbar = float((dv * rv).sum() / big_n)
    sd = float(np.sqrt((dv * (rv - rbar) ** 2).sum() / (big_n - 1)))
    r_ind = 1.0 - 2.0 * sd
    rate = float((dv * ind.to_numpy()).sum() / big_n)

    part_rows, cat_rows = [], []
    for col in sub.columns:
        name = str(col)
        g = _groups(sub[col], name in cat, bins)
        frame = pd.DataFrame({"g": g.to_numpy(), "d": dv, "rho": rv, "dr": dv * rv,
                              "resp": dv * ind.to_numpy()})
        agg = frame.groupby("g", sort=True, observed=True).agg(n=("d", "size"), w=("d", "sum"),
                                                                dr=("dr", "sum"), resp=("resp", "sum"))
        share = agg["w"] / big_n
        mean_k = agg["dr"] / agg["w"]
        pu_k = np.sqrt(share) * (mean_k - rbar)
        part_rows.append({"variable": name, "partial_unconditional": float(np.sqrt((share * (mean_k - rbar) ** 2).sum()))})
        for k in agg.index:
            cat_rows.append({"variable": name, "category": k, "n": int(agg.loc[k, "n"]),
                             "share": float(share[k]), "response_rate": float(agg.loc[k, "resp"] / agg.loc[k, "w"]),
                             "mean_propensity": float(mean_k[k]), "partial_unconditional": float(pu_k[k])})
    unstable = [t for t in unstable_terms(model) if t not in sep.terms]
    if unstable:
        notes.append(UNSTABLE_NOTE.format(terms=", ".join(unstable)))
    if refs:
        notes.append("Reference categories: " + ", ".join(f"{k}={v}" for k, v in refs.items()) + ".")
    return RIndicatorResult(
        target=target, n=int(len(ind)), n_responded=n_resp, response_rate=rate,
        mean_propensity=rbar, sd_propensity=sd, r_indicator=r_ind,
        max_abs_bias=(1.0 - r_ind) / (2.0 * rbar), propensities=rho,
        partial=pd.DataFrame(part_rows, columns=["variable", "partial_unconditional"]),
        categories=pd.DataFrame(cat_rows, columns=["variable", "category", "n", "share", "response_rate",
                                                   "mean_propensity", "partial_unconditional"]),
        model=model, model_se=SE_MODEL_BASED if weights is None else SE_ROBUST, notes=tuple(notes),
        separation=sep, n_left_out=int(n_drop),
    )
