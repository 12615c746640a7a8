"""Unit outcome rates from counts of final dispositions.

The rate names and formulas are those of the published standard of final
dispositions and outcome rates for surveys (AAPOR Standard Definitions).  Counts
use the standard's outcome categories:

``I``  complete interviews, ``P`` partial interviews, ``R`` refusals and
break-offs, ``NC`` non-contacts, ``O`` other eligible non-interviews, ``UH``
unknown whether household/occupied, ``UO`` unknown, other, and ``NE`` not
eligible (needed only to estimate *e*).
"""

from __future__ import annotations

import math
from typing import Mapping

import numpy as np
import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError

__all__ = [
    "OUTCOME_CATEGORIES", "OUTCOME_NUMBERS", "OUTCOME_VALUE_LABELS", "REQUIRED_COUNTS", "E_METHOD_GIVEN", "E_METHOD_ESTIMATED",
    "outcome_rates", "interview_outcome", "count_outcomes", "bad_shares", "bad_share_problem",
]

#: Categories a disposition can map to, in the standard's order.
OUTCOME_CATEGORIES: tuple[str, ...] = ("I", "P", "R", "NC", "O", "UH", "UO", "NE")
#: The number of each category in a delivered ``<prefix>outcome`` column (1-8, the standard's order),
#: so every format carries it as a labelled number (:data:`OUTCOME_VALUE_LABELS`).
OUTCOME_NUMBERS: dict[str, int] = {k: i + 1 for i, k in enumerate(OUTCOME_CATEGORIES)}
#: Value labels of the delivered outcome column: the category's letter and its meaning.
OUTCOME_VALUE_LABELS: dict[int, str] = {
    1: "I: complete interview", 2: "P: partial interview", 3: "R: refusal or break-off", 4: "NC: non-contact",
    5: "O: other eligible non-interview", 6: "UH: unknown if eligible (no contact with the address)",
    7: "UO: unknown eligibility, other", 8: "NE: not eligible",
}
#: Counts :func:`outcome_rates` always needs.
REQUIRED_COUNTS: tuple[str, ...] = ("I", "P", "R", "NC", "O", "UH", "UO")
E_METHOD_GIVEN = "given"
E_METHOD_ESTIMATED = ("estimated as the eligible share among cases of known eligibility "
                      "(proportional allocation)")


def _ratio(num: float, den: float) -> float:
    return num / den if den > 0 else math.nan


def outcome_rates(counts: Mapping[str, float], e: float | None = None) -> dict[str, object]:
    """Response, cooperation, refusal and contact rates of the published standard.

    Parameters
    ----------
    counts
        Mapping with keys ``I, P, R, NC, O, UH, UO`` and optionally ``NE``
        (weighted or unweighted counts, non-negative).
    e
        Estimated proportion of unknown-eligibility cases that are eligible.  If
        None it is estimated by proportional allocation,
        ``e = (I+P+R+NC+O) / (I+P+R+NC+O+NE)``, which needs ``NE``.

    Returns
    -------
    dict
        ``RR1``–``RR6``, ``COOP1``–``COOP4``, ``REF1``–``REF3``, ``CON1``–``CON3``
        as floats (NaN where the denominator is zero), plus ``e`` and
        ``e_method`` (``"given"`` or a sentence naming the estimation method).

    Raises
    ------
    SkipwiseError
        ``missing-key`` if a count is absent (or ``NE`` is absent while ``e`` is
        None), ``bad-value`` for negative counts or an ``e`` outside [0, 1].

    References
    ----------
    American Association for Public Opinion Research (2016, 2023). *Standard
    Definitions: Final Dispositions of Case Codes and Outcome Rates for Surveys*,
    9th and 10th editions.

    Examples
    --------
    >>> r = outcome_rates({"I": 300, "P": 0, "R": 0, "NC": 0, "O": 5, "UH": 150, "UO": 0}, e=0.9)
    >>> round(r["RR3"], 4)
    0.6818
    """
    problems: list[Problem] = []
    needed = list(REQUIRED_COUNTS) + (["NE"] if e is None else [])
    for key in needed:
        if key not in counts:
            hint = ("give the count of not-eligible cases (NE) or a value of e"
                    if key == "NE" else "give every outcome category, zero if none")
            problems.append(Problem(code=ProblemCode.MISSING_KEY, category=Category.USAGE,
                                    item=key, message=f"count '{key}' is missing", hint=hint))
    for key, value in counts.items():
        if key not in OUTCOME_CATEGORIES:
            problems.append(Problem(code=ProblemCode.UNKNOWN_KEY, category=Category.USAGE, item=str(key),
                                    message=f"'{key}' is not an outcome category",
                                    hint=f"use one of {', '.join(OUTCOME_CATEGORIES)}"))
        elif not (isinstance(value, (int, float, np.integer, np.floating)) and value >= 0):
            problems.append(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE, item=key,
                                    message=f"count '{key}' must be a non-negative number, got {value!r}"))
    if e is not None and not (0.0 <= float(e) <= 1.0):
        problems.append(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE, item="e",
                                message=f"e must lie between 0 and 1, got {e!r}"))
    if problems:
        raise SkipwiseError(problems)

    c = {k: float(counts.get(k, 0.0)) for k in OUTCOME_CATEGORIES}
    interviews = c["I"] + c["P"]
    eligible_non = c["R"] + c["NC"] + c["O"]
    d = interviews + eligible_non
    u = c["UH"] + c["UO"]
    if e is None:
        known = d + c["NE"]
        if known <= 0:
            raise SkipwiseError(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE, item="e",
                                        message="e cannot be estimated: no case of known eligibility",
                                        hint="give e explicitly"))
        e_value, e_method = d / known, E_METHOD_ESTIMATED
    else:
        e_value, e_method = float(e), E_METHOD_GIVEN
    all_den, e_den = d + u, d + e_value * u
    contacted = interviews + c["R"] + c["O"]
    return {
        "RR1": _ratio(c["I"], all_den),
        "RR2": _ratio(interviews, all_den),
        "RR3": _ratio(c["I"], e_den),
        "RR4": _ratio(interviews, e_den),
        "RR5": _ratio(c["I"], d),
        "RR6": _ratio(interviews, d),
        "COOP1": _ratio(c["I"], interviews + c["R"] + c["O"]),
        "COOP2": _ratio(interviews, interviews + c["R"] + c["O"]),
        "COOP3": _ratio(c["I"], interviews + c["R"]),
        "COOP4": _ratio(interviews, interviews + c["R"]),
        "REF1": _ratio(c["R"], all_den),
        "REF2": _ratio(c["R"], e_den),
        "REF3": _ratio(c["R"], d),
        "CON1": _ratio(contacted, all_den),
        "CON2": _ratio(contacted, e_den),
        "CON3": _ratio(contacted, d),
        "e": e_value,
        "e_method": e_method,
    }


def interview_outcome(share_answered: pd.Series, *, breakoff_below: float = 0.5,
                      complete_above: float = 0.8) -> pd.Series:
    """Complete / partial / break-off from the share of applicable items answered.

    The standard asks that the cut-points be set in advance, before fieldwork
    results are seen; the defaults (< 50 % break-off, 50–80 % partial,
    > 80 % complete) are the standard's example values [memory].

    Parameters
    ----------
    share_answered
        Per-case share (0..1) of applicable items answered, e.g.
        ``classify(df, q).cases["share_answered"]``.
    breakoff_below, complete_above
        Cut-points: share < ``breakoff_below`` is a break-off, share >
        ``complete_above`` a complete interview, anything between a partial.

    Returns
    -------
    pandas.Series
        ``"I"`` (complete), ``"P"`` (partial) or ``"breakoff"``, same index.

    References
    ----------
    American Association for Public Opinion Research (2016). *Standard
    Definitions*, 9th ed., section on partial interviews and break-offs.
    """
    if not (0.0 <= breakoff_below <= complete_above <= 1.0):
        raise SkipwiseError(Problem(
            code=ProblemCode.BAD_VALUE, category=Category.USAGE, item="interview_split",
            message=f"cut-points must satisfy 0 <= breakoff_below ({breakoff_below}) <= "
                    f"complete_above ({complete_above}) <= 1"))
    share, bad = _shares(share_answered)
    if bad.any():
        raise SkipwiseError(bad_share_problem(int(bad.sum()), list(share_answered.index[bad][:5])))
    out = np.where(share > complete_above, "I", np.where(share < breakoff_below, "breakoff", "P"))
    return pd.Series(out, index=share_answered.index, dtype=object, name="interview_outcome")


def _shares(share_answered: pd.Series) -> tuple[np.ndarray, np.ndarray]:
    share = pd.to_numeric(share_answered, errors="coerce").to_numpy(dtype=float)
    return share, np.isnan(share) | (share < 0) | (share > 1)


def bad_shares(share_answered: pd.Series) -> np.ndarray:
    """Row-local: the cases whose share answered is missing or outside 0..1 (:func:`interview_outcome` refuses them)."""
    return _shares(share_answered)[1]


def bad_share_problem(count: int, first_ids: list) -> Problem:
    """The problem of ``count`` cases without a usable share answered (``first_ids``: the first five cases)."""
    return Problem(code=ProblemCode.BAD_DATA, category=Category.DATA, item="share_answered",
                   message=f"{count} case(s) have no share of items answered between 0 and 1 (first: {first_ids})")


def count_outcomes(categories: pd.Series, weights: np.ndarray | pd.Series | None = None) -> dict[str, float]:
    """Counts (or weighted counts) of each outcome category; row-local and mergeable.

    Parameters
    ----------
    categories
        Per-case outcome category (one of :data:`OUTCOME_CATEGORIES`).  A
        ``"breakoff"`` from :func:`interview_outcome` must first be replaced by
        the category the plan assigns it (``breakoff_to``: R, P or O).
    weights
        Optional per-case weights (e.g. base weights for weighted rates).

    Raises
    ------
    SkipwiseError
        ``bad-data`` naming every value that is not an outcome category
        (including missing ones) with its number of cases: no case is dropped
        silently, since a dropped case would change every rate.
    """
    w = np.ones(len(categories)) if weights is None else np.asarray(weights, dtype=float)
    codes = pd.Index(list(OUTCOME_CATEGORIES), dtype=object).get_indexer(categories.astype(object))
    if (codes < 0).any():
        raw = categories.astype(object)[codes < 0]
        counts = raw.value_counts(dropna=False)
        listing = ", ".join(f"{'missing' if pd.isna(v) else repr(v)} ({int(n)} case(s))"
                            for v, n in counts.iloc[:10].items())
        if len(counts) > 10:
            listing += f" and {len(counts) - 10} more value(s)"
        hint = (f"use one of {', '.join(OUTCOME_CATEGORIES)}"
                + ("; map 'breakoff' to R, P or O first (the plan's interview_split.breakoff_to)"
                   if "breakoff" in set(counts.index) else ""))
        raise SkipwiseError(Problem(code=ProblemCode.BAD_DATA, category=Category.DATA, item="outcome",
                                    message=f"{int((codes < 0).sum())} case(s) have no outcome category: {listing}",
                                    hint=hint))
    sums = np.bincount(codes, weights=w, minlength=len(OUTCOME_CATEGORIES))
    return {k: float(v) for k, v in zip(OUTCOME_CATEGORIES, sums)}
