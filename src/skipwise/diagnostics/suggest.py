"""Suggestions for handling each item's nonresponse, with the evidence behind them.

These are suggestions for a statistician to weigh, not decisions.  The cut-offs
are common practice, no source, and every one of them is configurable.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from skipwise.rates import DEFAULT_MIN_BASE

__all__ = ["CAUTIONS", "ItemEvidence", "Option", "Suggestion", "SuggestionThresholds", "suggest_handling",
           "ACTIONS", "flagged", "TOO_FEW", "MIN_BASE"]

#: Association level of an item with fewer in-scope cases than the minimum base.
TOO_FEW = "too few to judge"
#: Default minimum base: in-scope cases an item needs to be tested, ranked or flagged
#: (the package's one minimum base; common practice, no source).
MIN_BASE = DEFAULT_MIN_BASE

#: Shown with every set of suggestions.
CAUTIONS = (
    "No test on the observed data proves that data are missing at random (MAR); tests can "
    "only show evidence against MCAR.",
    "Whether data are missing not at random (MNAR) needs subject knowledge and a sensitivity "
    "analysis (see the sensitivity sheet); weights and imputation do not repair MNAR.",
    "The cut-offs behind these suggestions are common practice, no source; follow your "
    "organization's methodology standards.",
)

ACTIONS = ("leave as is", "listwise deletion", "pairwise-available analysis", "drop the variable",
           "single imputation", "multiple imputation", "nonresponse weighting")


@dataclass(frozen=True, kw_only=True)
class SuggestionThresholds:
    """Cut-offs (common practice, no source)."""

    low_rate: float = 0.05      #: below this, nonresponse is small
    high_rate: float = 0.40     #: at or above this, consider dropping or reporting with strong caution
    alpha: float = 0.05         #: level of the (multiplicity-adjusted) test against MCAR
    auc_weak: float = 0.60      #: AUC from which the effect of a flagged item is described as moderate
    auc_strong: float = 0.70    #: AUC from which a flagged item's association is "strong"
    min_nonrespondents: int = 10  #: fewer nonrespondents than this: the item is not tested
    min_base: int = MIN_BASE    #: fewer in-scope cases than this: "too few to judge", never flagged


@dataclass(frozen=True, kw_only=True)
class ItemEvidence:
    """What is known about one item's nonresponse."""

    item: str
    n_in_scope: int
    n_nonresponse: int
    little_p: float | None = None    #: Little's test over the items it was run on (None: not in it)
    model_p: float | None = None     #: likelihood-ratio p-value of the nonresponse model
    adjusted_p: float | None = None  #: ``model_p`` adjusted for testing many items (None: not adjusted)
    auc: float | None = None         #: AUC of the nonresponse model
    min_compare_p: float | None = None  #: smallest p-value among respondent/nonrespondent comparisons

    @property
    def rate(self) -> float:
        return self.n_nonresponse / self.n_in_scope if self.n_in_scope else float("nan")


@dataclass(frozen=True, kw_only=True)
class Option:
    """One way of handling the item, with a verdict and the reason."""

    action: str
    verdict: str   #: "suggested", "possible" or "not advised"
    reason: str


@dataclass(frozen=True, kw_only=True)
class Suggestion:
    """All options for one item, the evidence summary and the association level."""

    item: str
    association: str   #: "none", "none detected", "weak", "strong" (both: flagged), "untested" or TOO_FEW
    evidence: str
    options: tuple[Option, ...]

    def suggested(self) -> tuple[str, ...]:
        return tuple(o.action for o in self.options if o.verdict == "suggested")

    def headline(self) -> str:
        """The suggested actions, or the possible ones if none is suggested."""
        top = self.suggested()
        if top:
            return "; ".join(top)
        return "possible: " + "; ".join(o.action for o in self.options if o.verdict == "possible")


def _ok(x: float | None) -> bool:
    return x is not None and not (isinstance(x, float) and math.isnan(x))


def _association(ev: ItemEvidence, th: SuggestionThresholds) -> str:
    """The flag rule.

    Too few to judge: fewer than ``min_base`` in-scope cases (whatever the rest says).
    Untested: fewer than ``min_nonrespondents`` nonrespondents, or no model.
    Flagged (evidence against MCAR): the model's likelihood-ratio p-value,
    adjusted across items when ``adjusted_p`` is given, is below ``alpha``.
    The AUC is only the size of the effect of a flagged item: "strong" from
    ``auc_strong``, "weak" below.  Little's joint p-value never flags one item.
    """
    if ev.n_in_scope < th.min_base and ev.n_nonresponse > 0:
        return TOO_FEW
    if ev.n_nonresponse == 0:
        return "none"
    if ev.n_nonresponse < th.min_nonrespondents or not _ok(ev.model_p):
        return "untested"
    p = ev.adjusted_p if _ok(ev.adjusted_p) else ev.model_p
    if p >= th.alpha:
        return "none detected"
    return "strong" if _ok(ev.auc) and ev.auc >= th.auc_strong else "weak"


def flagged(association: str) -> bool:
    """True when an association level means evidence against MCAR ("weak" or "strong")."""
    return association in ("weak", "strong")


def _evidence_text(ev: ItemEvidence, th: SuggestionThresholds) -> str:
    parts = [f"nonresponse {ev.n_nonresponse:,} of {ev.n_in_scope:,} in scope ({ev.rate:.1%})"]
    if _ok(ev.little_p):
        parts.append(f"Little's test p = {ev.little_p:.3g}")
    if _ok(ev.model_p):
        parts.append(f"nonresponse model p = {ev.model_p:.3g}")
    if _ok(ev.adjusted_p):
        parts.append(f"adjusted for the number of items p = {ev.adjusted_p:.3g}")
    if _ok(ev.auc):
        size = "small" if ev.auc < th.auc_weak else ("moderate" if ev.auc < th.auc_strong else "large")
        parts.append(f"AUC = {ev.auc:.2f} ({size} effect)")
    if _ok(ev.min_compare_p):
        parts.append(f"smallest comparison p = {ev.min_compare_p:.3g}")
    return "; ".join(parts)


def suggest_handling(ev: ItemEvidence, thresholds: SuggestionThresholds | None = None) -> Suggestion:
    """Weigh the handling options for one item against its evidence.

    Parameters
    ----------
    ev
        Nonresponse counts and test results for the item.
    thresholds
        Cut-offs (default :class:`SuggestionThresholds`, common practice, no source).

    Returns
    -------
    Suggestion
        One :class:`Option` per action in :data:`ACTIONS`.

    References
    ----------
    Little, R. J. A., & Rubin, D. B. (2019). *Statistical Analysis with Missing
    Data* (3rd ed.). Wiley.
    Rubin, D. B. (1987). *Multiple Imputation for Nonresponse in Surveys*. Wiley.
    """
    th = thresholds or SuggestionThresholds()
    rate = ev.rate
    assoc = _association(ev, th)
    low, high = rate < th.low_rate, rate >= th.high_rate
    related = assoc in ("weak", "strong")
    small = f"the rate is small ({rate:.1%} < {th.low_rate:.0%})"
    opts: list[Option] = []

    def add(action: str, verdict: str, reason: str) -> None:
        opts.append(Option(action=action, verdict=verdict, reason=reason))

    if assoc == "none":
        add("leave as is", "suggested", "no item nonresponse in scope")
        for a in ACTIONS[1:]:
            add(a, "not advised", "nothing to handle")
        return Suggestion(item=ev.item, association=assoc, evidence=_evidence_text(ev, th), options=tuple(opts))

    add("leave as is",
        "suggested" if low and not related else ("possible" if low else "not advised"),
        small + (" and no association with the auxiliaries was detected" if not related
                 else ", but nonrespondents differ on the auxiliaries") if low
        else f"{rate:.1%} nonresponse is too much to ignore in estimates")
    add("listwise deletion",
        "not advised" if related or high else ("suggested" if low else "possible"),
        "nonresponse is related to the auxiliaries, so complete cases are a selective subset"
        if related else ("loses " + f"{rate:.0%} of the cases" + (" (too many)" if high else
                         "; unbiased only under MCAR, which the tests did not reject")))
    add("pairwise-available analysis",
        "not advised" if related else "possible",
        "each statistic would rest on a differently selected subset" if related
        else "uses all available cases per statistic; can give inconsistent (non positive definite) "
             "covariance matrices")
    add("drop the variable",
        "possible" if high else "not advised",
        f"{rate:.0%} nonresponse: estimates for this item would rest largely on assumptions"
        if high else f"{rate:.0%} nonresponse does not justify losing the item")
    add("single imputation",
        "possible" if low else "not advised",
        "acceptable for a small rate if imputed values are flagged; understates variance"
        if low else "understates variance at this rate; prefer multiple imputation")
    add("multiple imputation",
        "suggested" if related and not high else "possible",
        ("the auxiliaries predict nonresponse, so include them in the imputation model "
         "(assumes MAR given them)") if related
        else ("gains precision over deletion; include the auxiliaries in the imputation model"
              + ("; with this much nonresponse results depend heavily on the model" if high else "")))
    add("nonresponse weighting",
        "possible" if related else "not advised",
        "weighting classes or propensities from the auxiliaries that predict nonresponse; best "
        "when many items share the same nonrespondents" if related
        else "the auxiliaries do not predict nonresponse, so weighting on them would change little")
    return Suggestion(item=ev.item, association=assoc, evidence=_evidence_text(ev, th), options=tuple(opts))
