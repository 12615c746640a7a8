"""The figures of the item-nonresponse report, as plain DataFrames (no workbook here).

Every figure is a sum over cases (weighted or not) computed column by column
from the classifier's int8 status matrix, so nothing loops over respondents
and partial sums of chunks of rows add up to the whole.

References
----------
Groves, R. M., Fowler, F. J., Couper, M. P., Lepkowski, J. M., Singer, E. and
Tourangeau, R. (2009). *Survey Methodology*, 2nd ed., ch. 6 (item nonresponse).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from skipwise.classify import statuses as S
from skipwise.classify.result import Classification

__all__ = [
    "Figures", "compute_figures", "in_codes", "ITEM_RATE", "ITEM_RATE_W", "items_table", "status_shares", "subgroup_rates", "SubgroupTable",
    "completeness_table", "completeness_summary", "fault_counts", "fault_rows", "COMPLETENESS_BINS",
]

ITEM_RATE = "Item nonresponse rate"
ITEM_RATE_W = "Item nonresponse rate (weighted)"
MISSING_GROUP = "(missing)"


def in_codes(col: np.ndarray, codes: list[int]) -> np.ndarray:
    """``np.isin(col, codes)``, as two comparisons when the codes form a run (statuses are ordered so)."""
    if not codes:
        return np.zeros(col.shape, dtype=bool)
    lo, hi = min(codes), max(codes)
    if sorted(codes) == list(range(lo, hi + 1)):
        return (col >= lo) & (col <= hi) if lo != hi else col == lo
    return np.isin(col, codes)


@dataclass(frozen=True, kw_only=True)
class Figures:
    """Every sum the report needs, from one pass over the items of the status matrix.

    Attributes
    ----------
    counts, wcounts
        Items x statuses: cases (and weighted totals, or None) of each status.
    denom, wdenom
        Per item: cases (weight) in the universe excluding ``breakoff`` — the rate's denominator.
    applicable, answered, nonresponse, faults
        Per case: items in universe (breakoff included), answered, with nonresponse, routing faults.
    broke_off
        Per case: at least one ``breakoff`` cell.
    weight
        The case weights used, or None.
    """

    counts: pd.DataFrame
    wcounts: pd.DataFrame | None
    denom: np.ndarray
    wdenom: np.ndarray | None
    applicable: np.ndarray
    answered: np.ndarray
    nonresponse: np.ndarray
    faults: np.ndarray
    broke_off: np.ndarray
    weight: np.ndarray | None


def compute_figures(c: Classification, weight: np.ndarray | None = None) -> Figures:
    """One loop over items (each a contiguous column of the int8 matrix); never over cases.

    The figures equal ``c.counts()``, ``c.item_summary()`` and ``c.cases``
    (tested), computed with fewer passes over a large matrix.
    """
    n, p = c.codes.shape
    k = len(c.categories)
    applicable_m = c.universe_mask().to_numpy()
    nr = _nr_codes(c)
    fault = [c.code(s) for s in S.FAULT_STATUSES]
    ans, brk, lb = c.code(S.ANSWERED), c.code(S.BREAKOFF), c.code(S.LEFT_BLANK)
    counts = np.zeros((p, k), dtype=np.int64)
    wcounts = None if weight is None else np.zeros((p, k))
    denom = np.zeros(p, dtype=np.int64)
    wdenom = None if weight is None else np.zeros(p)
    small = np.int16 if p < 32_000 else np.int32
    per_case = {name: np.zeros(n, dtype=small) for name in ("applicable", "answered", "nonresponse", "faults")}
    broke = np.zeros(n, dtype=bool)
    for j in range(p):
        col = c.codes[:, j]
        counts[j] = np.bincount(col, minlength=k)
        in_den = applicable_m[:, j] & (col != brk) & (col != lb)
        denom[j] = np.count_nonzero(in_den)
        if weight is not None:
            wcounts[j] = np.bincount(col, weights=weight, minlength=k)
            wdenom[j] = weight @ in_den
        per_case["applicable"] += applicable_m[:, j] & (col != lb)  # left_blank required no answer
        per_case["answered"] += col == ans
        per_case["nonresponse"] += in_codes(col, nr)
        per_case["faults"] += in_codes(col, fault)
        broke |= col == brk
    cols, idx = list(c.categories), list(c.items)
    return Figures(
        counts=pd.DataFrame(counts, index=idx, columns=cols),
        wcounts=None if wcounts is None else pd.DataFrame(wcounts, index=idx, columns=cols),
        denom=denom, wdenom=wdenom, broke_off=broke, weight=weight,
        **{name: arr.astype(np.int64) for name, arr in per_case.items()},
    )


def _nr_codes(c: Classification) -> list[int]:
    return [c.code(s) for s in c.nonresponse_statuses if s in c.categories]


def _ratio(num: np.ndarray, den: np.ndarray) -> np.ndarray:
    num = np.asarray(num, dtype=np.float64)
    den = np.asarray(den, dtype=np.float64)
    return np.where(den > 0, num / np.where(den > 0, den, 1.0), np.nan)


def items_table(c: Classification, fig: Figures) -> pd.DataFrame:
    """One row per item in interview order: rule, counts of every status and the rates.

    Rates follow DESIGN §3: (nonresponse reasons + ``item_missing``) over the
    cases in the item's universe excluding ``breakoff`` and ``left_blank``; each reason's rate has
    the same denominator.  With weights the weighted rates (ratios of
    weighted totals) are added beside the unweighted ones.
    """
    q = c.questionnaire
    reasons = list(q.nonresponse_reasons)
    nr_cols = list(c.nonresponse_statuses)
    items = [q.item(i) for i in c.items]
    out = pd.DataFrame({
        "Section": [it.section for it in items], "Item": list(c.items), "Label": [it.label for it in items],
        "Asked if (rule as written)": [it.rule_text for it in items],
        "Cases": len(c.index), "In universe (excl. breakoff, left_blank)": fig.denom,
    })
    for status in c.categories:
        out[status] = fig.counts[status].to_numpy()
    nonresp = fig.counts[nr_cols].sum(axis=1).to_numpy()
    out["Nonresponse"] = nonresp
    out[ITEM_RATE] = _ratio(nonresp, fig.denom)
    if fig.wcounts is not None:
        out["In universe (weighted)"] = fig.wdenom
        out[ITEM_RATE_W] = _ratio(fig.wcounts[nr_cols].sum(axis=1).to_numpy(), fig.wdenom)
    for reason in reasons:
        out[f"{reason} rate"] = _ratio(fig.counts[reason].to_numpy(), fig.denom)
    out[f"{S.ITEM_MISSING} rate"] = _ratio(fig.counts[S.ITEM_MISSING].to_numpy(), fig.denom)
    if fig.wcounts is not None:
        for reason in reasons:
            out[f"{reason} rate (weighted)"] = _ratio(fig.wcounts[reason].to_numpy(), fig.wdenom)
    return out


def status_shares(c: Classification, fig: Figures) -> pd.DataFrame:
    """Share of all (case, item) cells holding each status, unweighted and weighted."""
    counts = fig.counts.sum(axis=0)
    total = max(int(counts.sum()), 1)
    out = pd.DataFrame({"status": list(c.categories), "cells": counts.to_numpy(dtype=np.int64),
                        "share": counts.to_numpy(dtype=np.float64) / total})
    if fig.wcounts is not None:
        wc = fig.wcounts.sum(axis=0).to_numpy(dtype=np.float64)
        out["weighted share"] = wc / wc.sum() if wc.sum() > 0 else np.nan
    return out


@dataclass(frozen=True, kw_only=True)
class SubgroupTable:
    """Item nonresponse rate of every item in every group of every ``by`` column.

    ``rates`` has one row per item and one column per (variable, value);
    ``sizes`` holds the (weighted) number of cases of each group.
    """

    rates: pd.DataFrame
    sizes: pd.Series
    weighted: bool


def _groups(values: pd.Series) -> tuple[np.ndarray, list[str]]:
    codes, uniques = pd.factorize(values, sort=True, use_na_sentinel=True)
    labels = [_group_label(u) for u in uniques]
    if (codes < 0).any():
        codes = np.where(codes < 0, len(labels), codes)
        labels.append(MISSING_GROUP)
    return codes.astype(np.int64), labels


def _group_label(value: object) -> str:
    if isinstance(value, (float, np.floating)) and float(value).is_integer():
        return str(int(value))
    return str(value)


def subgroup_rates(c: Classification, data: pd.DataFrame, by: tuple[str, ...],
                   weight: np.ndarray | None = None) -> SubgroupTable:
    """Σw·1[nonresponse] / Σw·1[in universe, not breakoff or left_blank] per item within each group."""
    n, p = c.codes.shape
    w = np.ones(n) if weight is None else weight
    nr_codes = _nr_codes(c)
    brk, lb = c.code(S.BREAKOFF), c.code(S.LEFT_BLANK)
    applicable = c.universe_mask().to_numpy()
    cols: dict[tuple[str, str], np.ndarray] = {}
    sizes: dict[tuple[str, str], float] = {}
    for var in by:
        g, labels = _groups(data[var])
        k = len(labels)
        num = np.empty((p, k))
        den = np.empty((p, k))
        for j in range(p):
            col = c.codes[:, j]
            num[j] = np.bincount(g, weights=w * in_codes(col, nr_codes), minlength=k)
            den[j] = np.bincount(g, weights=w * (applicable[:, j] & (col != brk) & (col != lb)), minlength=k)
        size = np.bincount(g, weights=w, minlength=k)
        with np.errstate(invalid="ignore", divide="ignore"):
            rate = np.where(den > 0, num / np.where(den > 0, den, 1), np.nan)
        for i, lab in enumerate(labels):
            cols[(var, lab)] = rate[:, i]
            sizes[(var, lab)] = float(size[i])
    rates = pd.DataFrame(cols, index=list(c.items))
    if cols:
        rates.columns = pd.MultiIndex.from_tuples(list(cols))
    return SubgroupTable(rates=rates, sizes=pd.Series(sizes, dtype=np.float64), weighted=weight is not None)


#: Completeness bins: tenths of the share of applicable items answered, then exactly 100 %.
COMPLETENESS_BINS: tuple[str, ...] = (
    *(f"{10 * i}% to under {10 * (i + 1)}%" for i in range(10)), "100% (all answered)", "no applicable items",
)


def completeness_table(fig: Figures) -> pd.DataFrame:
    """Distribution of cases by the share of their applicable items that were answered.

    Bins are computed in integers (``10 * answered // applicable``) so a share
    such as 3/10 always falls in its own tenth, never below it.
    """
    applicable, answered, weight = fig.applicable, fig.answered, fig.weight
    bins = np.where(applicable > 0, (10 * answered) // np.maximum(applicable, 1), 11)
    bins = np.where((applicable > 0) & (answered == applicable), 10, bins)
    counts = np.bincount(bins, minlength=12)
    out = pd.DataFrame({"Share of applicable items answered": list(COMPLETENESS_BINS), "Cases": counts,
                        "Share of cases": counts / max(len(bins), 1)})
    if weight is not None:
        wc = np.bincount(bins, weights=weight, minlength=12)
        out["Weighted share"] = wc / wc.sum() if wc.sum() > 0 else np.nan
    return out


def completeness_summary(fig: Figures) -> list[tuple[str, object, str]]:
    """Headline figures of case completeness: (label, value, kind) with kind 'int', 'pct' or 'dec'."""
    weight = fig.weight
    has = fig.applicable > 0
    share = np.where(has, fig.answered / np.maximum(fig.applicable, 1), np.nan)
    n = len(share)
    rows: list[tuple[str, object, str]] = [
        ("Cases", n, "int"),
        ("Cases with at least one applicable item", int(has.sum()), "int"),
        ("Mean share of applicable items answered", float(share[has].mean()) if has.any() else None, "pct"),
        ("Median share of applicable items answered", float(np.median(share[has])) if has.any() else None, "pct"),
        ("Lowest share answered", float(share[has].min()) if has.any() else None, "pct"),
        ("Cases that answered every applicable item",
         int((has & (fig.answered == fig.applicable)).sum()), "int"),
        ("Cases that broke off", int(fig.broke_off.sum()), "int"),
        ("Cases with at least one routing fault", int((fig.faults > 0).sum()), "int"),
        ("Mean applicable items per case", float(fig.applicable.mean()) if n else None, "dec"),
        ("Mean items with nonresponse per case", float(fig.nonresponse.mean()) if n else None, "dec"),
    ]
    if weight is not None and has.any() and weight[has].sum() > 0:
        rows.insert(3, ("Weighted mean share answered", float(np.average(share[has], weights=weight[has])), "pct"))
    return rows


def fault_counts(fig: Figures) -> pd.DataFrame:
    """Per item with any routing fault: count of each fault status and the total."""
    counts = fig.counts[list(S.FAULT_STATUSES)].copy()
    counts["total"] = counts.sum(axis=1)
    counts = counts[counts["total"] > 0]
    return counts.rename_axis("item").reset_index()


def fault_rows(c: Classification, fig: Figures, limit: int) -> tuple[pd.DataFrame, int]:
    """The first ``limit`` routing faults in file order (then interview order), and the total number.

    Only the cases holding the first faults are passed to
    :attr:`Classification.faults`, so a file with millions of faults costs no
    more than the rows shown.
    """
    fault_codes = [c.code(s) for s in S.FAULT_STATUSES]
    per_case = fig.faults
    total = int(per_case.sum())
    if total == 0 or limit <= 0:
        return _empty_faults(), total
    before = np.cumsum(per_case) - per_case
    rows = np.flatnonzero((per_case > 0) & (before < limit))
    sub = Classification(
        questionnaire=c.questionnaire, codes=np.asfortranarray(c.codes[rows]), kinds=c.kinds[rows],
        universe=c.universe[rows], categories=c.categories, index=c.index[rows], case_ids=c.case_ids[rows],
        data=c.data.iloc[rows],
    )
    faults = sub.faults
    # .faults lists item by item; put it in file order, then interview order within a case.
    sub_mask = np.isin(sub.codes, fault_codes)
    pos = np.concatenate([np.flatnonzero(sub_mask[:, j]) for j in range(sub_mask.shape[1]) if sub_mask[:, j].any()])
    order = np.argsort(pos, kind="stable")
    return faults.iloc[order].head(limit).reset_index(drop=True), total


def _empty_faults() -> pd.DataFrame:
    cols = ["case_id", "item", "status", "value", "rule", "inputs"]
    return pd.DataFrame({col: pd.Series(dtype=object) for col in cols})
