"""Adjustment classes: unknown eligibility and unit nonresponse, with collapsing.

Within each class the weight of the cases to be dropped (unknown eligibility,
or eligible non-respondents) is moved to the cases kept, by the factor
``Σ w (all cases of the class) / Σ w (cases kept)``.  Classes with too few
kept cases or too large a factor are collapsed with a neighbouring class, and
each collapse is recorded.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError, did_you_mean

__all__ = ["CollapseRecord", "ClassAdjustment", "class_codes", "collapse_classes", "class_adjust",
           "DEFAULT_MIN_RESPONDENTS", "DEFAULT_MAX_FACTOR"]

#: Smallest number of respondents in a nonresponse class (common practice, no source).
DEFAULT_MIN_RESPONDENTS = 20
#: Largest nonresponse adjustment factor before a class is collapsed (common practice, no source).
DEFAULT_MAX_FACTOR = 2.0


@dataclass(frozen=True, kw_only=True)
class CollapseRecord:
    """One collapse of a class into its neighbour."""

    step: str
    merged: str
    into: str
    reason: str
    respondents: int
    factor: float


@dataclass(frozen=True, kw_only=True)
class ClassAdjustment:
    """Result of one class adjustment step."""

    weights: np.ndarray
    group_of_class: np.ndarray
    table: pd.DataFrame
    collapses: tuple[CollapseRecord, ...]


def class_codes(frame: pd.DataFrame, variables: list[str] | tuple[str, ...], *,
                rows: np.ndarray | None = None, step: str = "classes") -> tuple[np.ndarray, list[str]]:
    """One class code per case from the cross-classification of ``variables`` (sorted order).

    Cases outside ``rows`` (a boolean mask) get code -1 and need no value.
    """
    n = len(frame)
    rows = np.ones(n, dtype=bool) if rows is None else rows
    if not variables:
        codes = np.where(rows, 0, -1).astype(np.intp)
        return codes, ["all cases"]
    problems = []
    for v in variables:
        if v not in frame.columns:
            problems.append(Problem(code=ProblemCode.MISSING_COLUMN, category=Category.DATA, item=v,
                                    message=f"{step} variable '{v}' is not in the data",
                                    hint=did_you_mean(v, map(str, frame.columns))))
        else:
            miss = frame[v].isna().to_numpy() & rows
            if miss.any():
                problems.append(Problem(code=ProblemCode.BAD_DATA, category=Category.DATA, item=v,
                                        message=f"{int(miss.sum())} case(s) have no value of {step} variable "
                                                f"'{v}' (first: {list(frame.index[miss][:5])})",
                                        hint="recode missing values into a category of their own"))
    if problems:
        raise SkipwiseError(problems)
    sub = frame.loc[rows, list(variables)]
    grouped = sub.groupby(list(variables), sort=True, dropna=False)
    ids = grouped.ngroup().to_numpy()
    index = grouped.size().index
    keys = list(index) if isinstance(index, pd.MultiIndex) else [(k,) for k in index]
    labels = [", ".join(f"{v}={k}" for v, k in zip(variables, key)) for key in keys]
    codes = np.full(n, -1, dtype=np.intp)
    codes[rows] = ids
    return codes, labels


def _group_stats(group: np.ndarray, n_groups: int, w: np.ndarray, total_mask: np.ndarray,
                 kept_mask: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    tot = np.bincount(group[total_mask], weights=w[total_mask], minlength=n_groups)
    kept = np.bincount(group[kept_mask], weights=w[kept_mask], minlength=n_groups)
    n_kept = np.bincount(group[kept_mask], minlength=n_groups)
    return tot, kept, n_kept


def collapse_classes(codes: np.ndarray, labels: list[str], w: np.ndarray, total_mask: np.ndarray,
                     kept_mask: np.ndarray, *, min_kept: int, max_factor: float, step: str
                     ) -> tuple[np.ndarray, list[CollapseRecord]]:
    """Merge failing classes with a neighbour until each has enough kept cases and a small factor.

    Classes are kept in sorted order; a failing class (fewest kept cases first,
    then largest factor) is merged with the adjacent class whose kept share of
    weight is nearest its own, preferring a neighbour that shares all but the
    last class variable.  Returns the collapsed group of every original class.
    """
    k = len(labels)
    group_of_class = np.arange(k)
    members: list[list[int]] = [[i] for i in range(k)]
    names = list(labels)
    records: list[CollapseRecord] = []
    prefixes = [lab.rsplit(", ", 1)[0] if ", " in lab else "" for lab in labels]
    while len(members) > 1:
        g = group_of_class[codes[total_mask | kept_mask]]
        grp = np.full(len(codes), -1, dtype=np.intp)
        grp[total_mask | kept_mask] = g
        tot, kept, n_kept = _group_stats(np.where(grp < 0, 0, grp), len(members), w, total_mask, kept_mask)
        with np.errstate(divide="ignore", invalid="ignore"):
            factor = np.where(kept > 0, tot / np.where(kept > 0, kept, 1.0), np.inf)
        has_cases = tot > 0
        fail_small = has_cases & (n_kept < min_kept)
        fail_factor = has_cases & (factor > max_factor)
        failing = np.flatnonzero(fail_small | fail_factor)
        if failing.size == 0:
            break
        order = sorted(failing, key=lambda j: (n_kept[j], -factor[j]))
        j = int(order[0])
        neighbours = [m for m in (j - 1, j + 1) if 0 <= m < len(members)]
        rate = kept / np.where(tot > 0, tot, 1.0)

        def _pref(m: int) -> tuple[int, float]:
            same = prefixes[members[m][0]] == prefixes[members[j][0]]
            return (0 if same else 1, abs(rate[m] - rate[j]))

        m = min(neighbours, key=_pref)
        reason = (f"{int(n_kept[j])} respondent(s) < {min_kept}" if fail_small[j]
                  else f"factor {factor[j]:.3g} > {max_factor:g}")
        records.append(CollapseRecord(step=step, merged=names[j], into=names[m], reason=reason,
                                      respondents=int(n_kept[j]),
                                      factor=float(factor[j]) if math.isfinite(factor[j]) else math.inf))
        lo, hi = min(j, m), max(j, m)
        members[lo] = members[lo] + members[hi]
        names[lo] = f"{names[lo]} + {names[hi]}" if lo == m else f"{names[j]} + {names[m]}"
        del members[hi], names[hi]
        for gi, mem in enumerate(members):
            group_of_class[mem] = gi
    return group_of_class, records


def class_adjust(w: np.ndarray, codes: np.ndarray, labels: list[str], total_mask: np.ndarray,
                 kept_mask: np.ndarray, *, step: str, min_kept: int = 1, max_factor: float = math.inf,
                 group_of_class: np.ndarray | None = None, names: list[str] | None = None) -> ClassAdjustment:
    """Move the weight of dropped cases to kept cases within (collapsed) classes.

    Parameters
    ----------
    w
        Current weights of all cases.
    codes, labels
        Class code of each case (-1 outside the step) and class labels.
    total_mask
        Cases whose weight the class must keep in total (kept and dropped).
    kept_mask
        Cases that keep weight (subset of ``total_mask``); the others in
        ``total_mask`` get weight 0; cases outside ``total_mask`` are unchanged.
    group_of_class
        Fixed collapsed structure (from the full sample, for replicates);
        None collapses afresh.

    Raises
    ------
    SkipwiseError
        ``infeasible`` when a class has weight but no kept case even after
        collapsing (or with a fixed structure).

    References
    ----------
    Kalton, G. & Flores-Cervantes, I. (2003). Weighting methods. *Journal of
    Official Statistics* 19(2), 81–97.
    """
    records: list[CollapseRecord] = []
    if group_of_class is None:
        group_of_class, records = collapse_classes(codes, labels, w, total_mask, kept_mask,
                                                   min_kept=min_kept, max_factor=max_factor, step=step)
    n_groups = int(group_of_class.max()) + 1 if len(group_of_class) else 1
    if names is None:
        names = [" + ".join(labels[c] for c in np.flatnonzero(group_of_class == gi)) for gi in range(n_groups)]
    grp = np.where(codes >= 0, group_of_class[np.where(codes >= 0, codes, 0)], 0)
    tot, kept, n_kept = _group_stats(grp, n_groups, w, total_mask, kept_mask)
    bad = np.flatnonzero((tot > 0) & (kept <= 0))
    if bad.size:
        raise SkipwiseError([Problem(code=ProblemCode.INFEASIBLE, category=Category.DATA, item=step,
                                     message=f"{step} class '{names[b]}' has weight {tot[b]:,.6g} but no case to "
                                             f"carry it", hint="use fewer or broader classes")
                             for b in bad])
    factor = np.where(kept > 0, tot / np.where(kept > 0, kept, 1.0), 1.0)
    out = np.array(w, dtype=float, copy=True)
    out[total_mask & ~kept_mask] = 0.0
    out[kept_mask] *= factor[grp[kept_mask]]
    n_total = np.bincount(grp[total_mask], minlength=n_groups)
    table = pd.DataFrame({"step": step, "class": names, "cases": n_total, "kept": n_kept,
                          "weight_in": tot, "weight_kept_in": kept, "factor": factor})
    return ClassAdjustment(weights=out, group_of_class=group_of_class, table=table, collapses=tuple(records))
