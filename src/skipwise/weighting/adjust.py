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

__all__ = ["CollapseRecord", "ClassAdjustment", "ClassSums", "ClassFactors", "class_codes", "class_keys",
           "class_labels", "merge_class_keys", "class_sums", "class_factors", "apply_class_factors",
           "collapse_classes", "class_adjust", "DEFAULT_MIN_RESPONDENTS", "DEFAULT_MAX_FACTOR"]

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


def class_keys(frame: pd.DataFrame, variables: list[str] | tuple[str, ...], *,
               rows: np.ndarray | None = None, step: str = "classes") -> tuple[np.ndarray, list[tuple]]:
    """Checked cross-classification of ``variables``: a local id per case in ``rows`` (-1 elsewhere)
    and the class keys (tuples of values) in sorted order; row-local, so partitions can be merged
    with :func:`merge_class_keys`."""
    n = len(frame)
    rows = np.ones(n, dtype=bool) if rows is None else rows
    if not variables:
        return np.where(rows, 0, -1).astype(np.intp), [()]
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
    codes = np.full(n, -1, dtype=np.intp)
    codes[rows] = ids
    return codes, keys


def class_labels(variables: list[str] | tuple[str, ...], keys: list[tuple]) -> list[str]:
    """The label of each class key, ``var=value, var=value``."""
    if not variables:
        return ["all cases"]
    return [", ".join(f"{v}={k}" for v, k in zip(variables, key)) for key in keys]


def merge_class_keys(variables: list[str] | tuple[str, ...], key_lists: list[list[tuple]]
                     ) -> tuple[list[tuple], list[np.ndarray]]:
    """The sorted union of the class keys of several partitions, and each partition's local → global codes.

    The union is sorted as a groupby of the whole file sorts its keys, so the global codes are
    those :func:`class_codes` gives the whole file.
    """
    if not variables:
        return [()], [np.zeros(1, dtype=np.intp) for _ in key_lists]
    union = pd.DataFrame([k for keys in key_lists for k in keys], columns=list(variables))
    if len(union):
        index = union.groupby(list(variables), sort=True, dropna=False).size().index
        keys = list(index) if isinstance(index, pd.MultiIndex) else [(k,) for k in index]
    else:
        keys = []
    where = {k: i for i, k in enumerate(keys)}
    return keys, [np.array([where[k] for k in part], dtype=np.intp) for part in key_lists]


def class_codes(frame: pd.DataFrame, variables: list[str] | tuple[str, ...], *,
                rows: np.ndarray | None = None, step: str = "classes") -> tuple[np.ndarray, list[str]]:
    """One class code per case from the cross-classification of ``variables`` (sorted order).

    Cases outside ``rows`` (a boolean mask) get code -1 and need no value.
    """
    codes, keys = class_keys(frame, variables, rows=rows, step=step)
    return codes, class_labels(variables, keys)


@dataclass(frozen=True, kw_only=True)
class ClassSums:
    """Per-class sums of one adjustment step; row-local and mergeable (``+``)."""

    total: np.ndarray      # weight of the cases of ``total_mask``
    kept: np.ndarray       # weight of the cases kept
    n_kept: np.ndarray
    n_total: np.ndarray

    def __add__(self, other: "ClassSums") -> "ClassSums":
        return ClassSums(total=self.total + other.total, kept=self.kept + other.kept,
                         n_kept=self.n_kept + other.n_kept, n_total=self.n_total + other.n_total)

    def grouped(self, group_of_class: np.ndarray, n_groups: int) -> "ClassSums":
        """The sums of the (collapsed) groups of classes."""
        def by(v: np.ndarray) -> np.ndarray:
            return np.bincount(group_of_class, weights=v, minlength=n_groups)
        return ClassSums(total=by(self.total), kept=by(self.kept), n_kept=by(self.n_kept).round().astype(np.int64),
                         n_total=by(self.n_total).round().astype(np.int64))


def class_sums(w: np.ndarray, codes: np.ndarray, n_classes: int, total_mask: np.ndarray,
               kept_mask: np.ndarray) -> ClassSums:
    """Weight in and weight kept per class, and the numbers of cases (``codes`` >= 0 on ``total_mask``)."""
    return ClassSums(total=np.bincount(codes[total_mask], weights=w[total_mask], minlength=n_classes),
                     kept=np.bincount(codes[kept_mask], weights=w[kept_mask], minlength=n_classes),
                     n_kept=np.bincount(codes[kept_mask], minlength=n_classes).astype(np.int64),
                     n_total=np.bincount(codes[total_mask], minlength=n_classes).astype(np.int64))


def collapse_classes(sums: ClassSums, labels: list[str], *, min_kept: int, max_factor: float, step: str
                     ) -> tuple[np.ndarray, list[CollapseRecord]]:
    """Merge failing classes with a neighbour until each has enough kept cases and a small factor.

    Works on the per-class sums alone (:func:`class_sums`), so the full file and the merged
    partitions of a cluster collapse alike.  Classes are kept in sorted order; a failing class
    (fewest kept cases first, then largest factor) is merged with the adjacent class whose kept
    share of weight is nearest its own, preferring a neighbour that shares all but the last class
    variable.  Returns the collapsed group of every original class.
    """
    k = len(labels)
    group_of_class = np.arange(k)
    members: list[list[int]] = [[i] for i in range(k)]
    names = list(labels)
    records: list[CollapseRecord] = []
    prefixes = [lab.rsplit(", ", 1)[0] if ", " in lab else "" for lab in labels]
    while len(members) > 1:
        g = sums.grouped(group_of_class, len(members))
        tot, kept, n_kept = g.total, g.kept, g.n_kept
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


@dataclass(frozen=True, kw_only=True)
class ClassFactors:
    """What one adjustment step does to each class: the factor, the collapsed groups, the table."""

    factor_of_class: np.ndarray
    group_of_class: np.ndarray
    table: pd.DataFrame
    collapses: tuple[CollapseRecord, ...]


def class_factors(sums: ClassSums, labels: list[str], *, step: str, min_kept: int = 1,
                  max_factor: float = math.inf, group_of_class: np.ndarray | None = None,
                  names: list[str] | None = None) -> ClassFactors:
    """The factors of one class adjustment from its per-class sums (both engines call this).

    Raises
    ------
    SkipwiseError
        ``infeasible`` when a class has weight but no kept case even after
        collapsing (or with a fixed structure).
    """
    records: list[CollapseRecord] = []
    if group_of_class is None:
        group_of_class, records = collapse_classes(sums, labels, min_kept=min_kept, max_factor=max_factor,
                                                   step=step)
    n_groups = int(group_of_class.max()) + 1 if len(group_of_class) else 1
    if names is None:
        names = [" + ".join(labels[c] for c in np.flatnonzero(group_of_class == gi)) for gi in range(n_groups)]
    g = sums.grouped(group_of_class, n_groups) if len(group_of_class) else ClassSums(
        total=np.zeros(1), kept=np.zeros(1), n_kept=np.zeros(1, np.int64), n_total=np.zeros(1, np.int64))
    tot, kept = g.total, g.kept
    bad = np.flatnonzero((tot > 0) & (kept <= 0))
    if bad.size:
        raise SkipwiseError([Problem(code=ProblemCode.INFEASIBLE, category=Category.DATA, item=step,
                                     message=f"{step} class '{names[b]}' has weight {tot[b]:,.6g} but no case to "
                                             f"carry it", hint="use fewer or broader classes")
                             for b in bad])
    factor = np.where(kept > 0, tot / np.where(kept > 0, kept, 1.0), 1.0)
    table = pd.DataFrame({"step": step, "class": names, "cases": g.n_total, "kept": g.n_kept,
                          "weight_in": tot, "weight_kept_in": kept, "factor": factor})
    of_class = factor[group_of_class] if len(group_of_class) else np.ones(0)
    return ClassFactors(factor_of_class=of_class, group_of_class=group_of_class, table=table,
                        collapses=tuple(records))


def apply_class_factors(w: np.ndarray, codes: np.ndarray, factor_of_class: np.ndarray, total_mask: np.ndarray,
                        kept_mask: np.ndarray) -> np.ndarray:
    """Row-local: dropped cases get 0, kept cases their class's factor, others keep their weight."""
    out = np.array(w, dtype=float, copy=True)
    out[total_mask & ~kept_mask] = 0.0
    out[kept_mask] *= factor_of_class[codes[kept_mask]]
    return out


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
    sums = class_sums(np.asarray(w, dtype=float), codes, len(labels), total_mask, kept_mask)
    cf = class_factors(sums, labels, step=step, min_kept=min_kept, max_factor=max_factor,
                       group_of_class=group_of_class, names=names)
    return ClassAdjustment(weights=apply_class_factors(w, codes, cf.factor_of_class, total_mask, kept_mask),
                           group_of_class=cf.group_of_class, table=cf.table, collapses=cf.collapses)
