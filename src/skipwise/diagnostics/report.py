"""Run every diagnostic over a :class:`MissingnessFrame` and collect the results."""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Callable, Sequence

import numpy as np
import pandas as pd

from skipwise.diagnostics.compare import ItemComparison, compare_item, infer_categorical
from skipwise.diagnostics.frame import MissingnessFrame
from skipwise.diagnostics.little import LittleResult, little_mcar_test
from skipwise.diagnostics.model import LogitResult, nonresponse_logit
from skipwise.diagnostics.propensity import RIndicatorResult, r_indicator
from skipwise.diagnostics.sensitivity import DeltaResult, delta_adjustment
from skipwise.diagnostics.multiplicity import adjust_pvalues
from skipwise.diagnostics.suggest import ItemEvidence, Suggestion, SuggestionThresholds, flagged, suggest_handling
from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError, did_you_mean

__all__ = ["DiagnoseOptions", "DiagnosticsReport", "run_diagnostics", "choose_little_items", "MIN_SCOPE_SHARE",
           "MAX_R_SQUARED"]

#: Greedy choice of Little's variables keeps the common scope at least this share of the
#: largest item's scope (common practice, no source).
MIN_SCOPE_SHARE = 0.5
#: A candidate of Little's test explained to this R² by the variables already chosen is left out
#: (common practice, no source).
MAX_R_SQUARED = 0.99


@dataclass(frozen=True, kw_only=True)
class DiagnoseOptions:
    """What to diagnose and how.

    Attributes
    ----------
    items
        Items to diagnose (default: every item with numeric or indicator data in scope).
    little_items
        Variables of Little's test (default: :func:`choose_little_items`).
    little_with_aux
        Add the numeric auxiliaries to Little's test (they are complete, and add power).
    categorical
        Auxiliaries to treat as categorical (default: inferred).
    sensitivity_item, threshold, deltas
        Delta adjustment of one item's mean against a stated threshold.
    alpha
        Significance level used in the suggestions and the summary.
    adjust
        Adjustment of the items' model p-values for testing many items
        (:func:`~skipwise.diagnostics.multiplicity.adjust_pvalues`: ``"holm"``,
        ``"bh"`` or ``"none"``).  The family is the items with a fitted model
        and at least ``thresholds.min_nonrespondents`` nonrespondents.
    thresholds
        Cut-offs of the handling suggestions.
    min_base
        Items with fewer in-scope cases are "too few to judge": shown, never tested against the
        family, ranked or flagged (default ``thresholds.min_base``, 30: common practice, no source).
    """

    items: tuple[str, ...] | None = None
    little_items: tuple[str, ...] | None = None
    little_with_aux: bool = True
    categorical: tuple[str, ...] | None = None
    sensitivity_item: str | None = None
    threshold: float | None = None
    deltas: tuple[float, ...] | None = None
    alpha: float = 0.05
    adjust: str = "holm"
    thresholds: SuggestionThresholds = field(default_factory=SuggestionThresholds)
    min_base: int | None = None


@dataclass(frozen=True, kw_only=True, eq=False)
class DiagnosticsReport:
    """Everything :func:`run_diagnostics` found, ready for a workbook or for tests."""

    counts: pd.DataFrame
    auxiliaries: tuple[str, ...]
    categorical: tuple[str, ...]
    little: LittleResult | None
    little_scope: str
    comparisons: dict[str, ItemComparison]
    models: dict[str, LogitResult]
    r_indicators: tuple[RIndicatorResult, ...]
    sensitivity: DeltaResult | None
    suggestions: tuple[Suggestion, ...]
    summary: pd.DataFrame
    notes: tuple[tuple[str, str, str], ...]  # (part, item, message)
    alpha: float = 0.05
    min_base: int = 30


def _r_squared(frame: pd.DataFrame, chosen: list[str], cand: str) -> float:
    """R² of ``cand`` on ``chosen`` (with intercept) over their complete cases; 1 if it cannot be told."""
    sub = frame[[*chosen, cand]].dropna()
    y = sub[cand].to_numpy(float)
    if len(sub) <= len(chosen) + 2:
        return 1.0
    ss_tot = float(((y - y.mean()) ** 2).sum())
    if ss_tot == 0:
        return 1.0
    if not chosen:
        return 0.0
    x = np.column_stack([np.ones(len(sub)), sub[chosen].to_numpy(float)])
    beta, *_ = np.linalg.lstsq(x, y, rcond=None)
    return 1.0 - float(((y - x @ beta) ** 2).sum()) / ss_tot


def choose_little_items(mframe: MissingnessFrame, candidates: Sequence[str]) -> list[str]:
    """Pick variables for one Little's test without routing shrinking the cases too far.

    Candidates with item nonresponse and at least two numeric answers are
    taken in order of their in-scope counts (largest first); each is added if
    the common scope stays at least :data:`MIN_SCOPE_SHARE` of the first
    one's scope and if it is not (almost) a linear function of the variables
    already chosen: R² below :data:`MAX_R_SQUARED` over their complete cases
    in that scope (a duplicate, such as the respondent's age asked twice,
    would make the covariance matrix singular).  Candidates without
    nonresponse that are answered in all the chosen cases, vary there and pass
    the same R² check are added too: complete variables add power without
    losing cases.  The cut-offs are common practice, no source.
    """
    counts = mframe.counts.loc[list(candidates)]
    c = counts[(counts["nonresponse"] > 0) & (counts["numeric_answers"] >= 2)]
    c = c.sort_values("in_scope", ascending=False, kind="stable")
    chosen: list[str] = []
    scope = None
    for item in c.index:
        new = mframe.in_scope[item] if scope is None else scope & mframe.in_scope[item]
        if scope is not None and new.sum() < MIN_SCOPE_SHARE * c["in_scope"].iloc[0]:
            continue
        if _r_squared(mframe.values.loc[new], chosen, str(item)) >= MAX_R_SQUARED:
            continue
        chosen.append(str(item))
        scope = new
    if scope is None:
        return chosen
    # complete items answered by every chosen case add power at no cost in cases
    for item in counts.index:
        if (item not in chosen and counts.loc[item, "nonresponse"] == 0
                and bool(mframe.values.loc[scope, item].notna().all())
                and _r_squared(mframe.values.loc[scope], chosen, str(item)) < MAX_R_SQUARED):
            chosen.append(str(item))
    return chosen


def _unknown(names: Sequence[str], valid: Sequence[str], what: str) -> list[Problem]:
    return [Problem(code=ProblemCode.UNKNOWN_NAME, category=Category.USAGE, item=n,
                    message=f"not a known {what}", hint=did_you_mean(n, valid)) for n in names if n not in valid]


def run_diagnostics(mframe: MissingnessFrame, aux: pd.DataFrame, *, options: DiagnoseOptions | None = None,
                    weights: pd.Series | None = None, response: pd.Series | None = None,
                    progress: Callable[[str], None] | None = None) -> DiagnosticsReport:
    """Little's test, per-item comparisons and models, R-indicators, sensitivity, suggestions.

    Parameters
    ----------
    mframe
        In-scope values and indicators (:func:`missingness_frame`).
    aux
        Fully observed auxiliaries, indexed like ``mframe`` (cases with a
        missing auxiliary are dropped per analysis and counted).
    options
        :class:`DiagnoseOptions`.
    weights
        Design weights for the R-indicators and the delta adjustment.
    response
        Unit response indicator over all sampled cases (True = responded); if
        given, a unit-level R-indicator is computed on ``aux``.
    progress
        Called with a short label before each step.

    Notes
    -----
    Flag rule: an item shows evidence against MCAR ("flagged", association
    "weak" or "strong") when it has at least ``min_base`` in-scope cases and
    ``min_nonrespondents`` nonrespondents and the likelihood-ratio p-value of its nonresponse model
    on the auxiliaries, adjusted across all such items (``options.adjust``,
    Holm by default), is below ``alpha``.  The AUC only grades the size of a
    flagged item's effect.

    Returns
    -------
    DiagnosticsReport
        Failures of single analyses (singular models, too few cases) are
        recorded in ``notes``; they do not stop the others.
    """
    opt = options or DiagnoseOptions()
    adjust_pvalues(pd.Series(dtype=float), opt.adjust)  # an unknown method fails before any work
    tell = progress or (lambda _label: None)
    items = list(opt.items) if opt.items is not None else list(mframe.items)
    problems = _unknown(items, mframe.items, "item")
    problems += _unknown(list(opt.little_items or ()), mframe.items, "item")
    if opt.sensitivity_item is not None:
        problems += _unknown([opt.sensitivity_item], mframe.items, "item")
    if problems:
        raise SkipwiseError(problems)
    cat = tuple(opt.categorical) if opt.categorical is not None else infer_categorical(aux)
    problems = _unknown([c for c in cat if c not in aux.columns], list(map(str, aux.columns)), "auxiliary")
    if problems:
        raise SkipwiseError(problems)
    notes: list[tuple[str, str, str]] = []

    # Little's test over the common scope of its variables
    tell("Little's test")
    little, scope = None, "not run"
    l_items = list(opt.little_items) if opt.little_items is not None else choose_little_items(mframe, items)
    if len(l_items) >= 1:
        joint = mframe.joint(l_items)
        frame = joint.frame
        if opt.little_with_aux:
            num_aux = [c for c in aux.columns if str(c) not in cat and str(c) not in frame.columns]
            # like the items, a numeric auxiliary (almost) determined by the variables already in the
            # test would make the covariance matrix singular (an item asked twice, a design variable)
            base = frame.join(aux.loc[frame.index, num_aux].astype(float)) if num_aux else frame
            kept: list = []
            for c in num_aux:
                if _r_squared(base, [*map(str, frame.columns), *map(str, kept)], str(c)) < MAX_R_SQUARED:
                    kept.append(c)
                else:
                    notes.append(("Little's test", str(c), f"auxiliary left out: R² ≥ {MAX_R_SQUARED} on the "
                                  "variables already in the test (a near-duplicate)"))
            num_aux = kept
            if num_aux:
                frame = frame.join(aux.loc[frame.index, num_aux].astype(float))
                before = len(frame)
                frame = frame[frame[num_aux].notna().all(axis=1)]
                if len(frame) < before:
                    notes.append(("Little's test", "", f"{before - len(frame):,} cases with a missing "
                                  "auxiliary were left out."))
        # the number of variables is stated once, by the test's result (console and workbook alike)
        scope = joint.description + (f"; with the numeric auxiliaries {', '.join(map(str, frame.columns[len(l_items):]))}"
                                     if frame.shape[1] > len(l_items) else "")
        try:
            little = little_mcar_test(frame)
        except SkipwiseError as err:
            notes.append(("Little's test", ", ".join(l_items), err.render()))
    else:
        notes.append(("Little's test", "", "no numeric item with item nonresponse to test"))

    comparisons: dict[str, ItemComparison] = {}
    models: dict[str, LogitResult] = {}
    rinds: list[RIndicatorResult] = []
    if response is not None:
        tell("unit R-indicator")
        # the unit model may use only what is known for every sampled case: an auxiliary blank for
        # nonrespondents would drop them and model respondents only (Schouten, Cobben & Bethlehem, 2009)
        unit_aux = [c for c in aux.columns if not aux.loc[aux.index.intersection(response.index), c].isna().any()]
        for c in aux.columns:
            if c not in unit_aux:
                notes.append(("R-indicator", "unit response", f"auxiliary {c} left out of the unit response "
                              "model: blank for some sampled cases"))
        try:
            rinds.append(r_indicator(response, aux[unit_aux], weights=weights,
                                     categorical=[c for c in cat if c in unit_aux], target="unit response"))
        except SkipwiseError as err:
            notes.append(("R-indicator", "unit response", err.render()))
    summary_rows, suggestions = [], []
    little_vars = set(little.mean.index) if little is not None else set()
    for item in items:
        tell(item)
        ind = mframe.indicator(item)
        own_aux = aux.drop(columns=[c for c in aux.columns if str(c) == item])
        item_cat = tuple(c for c in cat if c in own_aux.columns)
        n_m = int(ind.sum())
        row = {"item": item, "in_scope": int(len(ind)), "nonresponse": n_m,
               "nonresponse_rate": n_m / len(ind) if len(ind) else np.nan,
               "little_p": little.p_value if item in little_vars else np.nan,
               "model_p": np.nan, "auc": np.nan, "min_compare_p": np.nan}
        if n_m > 0 and n_m < len(ind) and own_aux.shape[1]:
            for part, fn in (("comparison", compare_item), ("model", nonresponse_logit)):
                try:
                    res = fn(ind, own_aux, categorical=item_cat, item=item)
                except SkipwiseError as err:
                    notes.append((part, item, err.render()))
                    continue
                if part == "comparison":
                    comparisons[item] = res
                    row["min_compare_p"] = float(res.table["p_value"].min()) if res.table["p_value"].notna().any() else np.nan
                else:
                    models[item] = res
                    row["model_p"], row["auc"] = res.lr_p_value, res.auc
            try:
                rinds.append(r_indicator(~ind, own_aux, weights=None if weights is None else weights.loc[ind.index],
                                         categorical=item_cat, target=f"response to {item}",
                                         nonresponse_model=models.get(item)))
            except SkipwiseError as err:
                notes.append(("R-indicator", item, err.render()))
        summary_rows.append(row)
    th = opt.thresholds if opt.min_base is None else replace(opt.thresholds, min_base=int(opt.min_base))
    family = pd.Series({r["item"]: r["model_p"] for r in summary_rows
                        if r["nonresponse"] >= th.min_nonrespondents and r["in_scope"] >= th.min_base}, dtype=float)
    adjusted = adjust_pvalues(family, opt.adjust)
    for row in summary_rows:
        item = row["item"]
        adj = adjusted.get(item, np.nan)
        row["model_p_adjusted"] = float(adj) if opt.adjust != "none" else np.nan
        ev = ItemEvidence(item=item, n_in_scope=row["in_scope"], n_nonresponse=row["nonresponse"],
                          little_p=None if np.isnan(row["little_p"]) else row["little_p"],
                          model_p=None if np.isnan(row["model_p"]) else row["model_p"],
                          adjusted_p=None if np.isnan(row["model_p_adjusted"]) else row["model_p_adjusted"],
                          auc=None if np.isnan(row["auc"]) else row["auc"],
                          min_compare_p=None if np.isnan(row["min_compare_p"]) else row["min_compare_p"])
        sug = suggest_handling(ev, th)
        suggestions.append(sug)
        row["association"] = sug.association
        row["flagged"] = flagged(sug.association)
        row["suggested"] = sug.headline()
    summary = pd.DataFrame(summary_rows, columns=["item", "in_scope", "nonresponse", "nonresponse_rate",
                                                  "little_p", "model_p", "auc", "min_compare_p",
                                                  "model_p_adjusted", "association", "flagged", "suggested"])
    with np.errstate(divide="ignore"):
        summary.insert(6, "neg_log10_model_p", -np.log10(summary["model_p"].clip(lower=1e-300)))

    sens = None
    if opt.sensitivity_item is not None:
        tell("sensitivity")
        vals = mframe.item_values(opt.sensitivity_item)
        try:
            sens = delta_adjustment(vals, deltas=opt.deltas, threshold=opt.threshold, item=opt.sensitivity_item,
                                    weights=None if weights is None else weights.loc[vals.index])
        except SkipwiseError as err:
            notes.append(("sensitivity", opt.sensitivity_item, err.render()))
    return DiagnosticsReport(
        counts=mframe.counts.loc[items], auxiliaries=tuple(map(str, aux.columns)), categorical=cat,
        little=little, little_scope=scope, comparisons=comparisons, models=models,
        r_indicators=tuple(rinds), sensitivity=sens, suggestions=tuple(suggestions), summary=summary,
        notes=tuple(notes), alpha=float(th.alpha), min_base=int(th.min_base),
    )
