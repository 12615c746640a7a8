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
    "ITEM_RATE", "ITEM_RATE_W", "items_table", "status_shares", "subgroup_rates", "SubgroupTable",
    "completeness_table", "completeness_summary", "fault_counts", "fault_rows", "COMPLETENESS_BINS",
]

ITEM_RATE = "Item nonresponse rate"
ITEM_RATE_W = "Item nonresponse rate (weighted)"
MISSING_GROUP = "(missing)"


def _nr_codes(c: Classification) -> list[int]:
    return [c.code(s) for s in c.nonresponse_statuses if s in c.categories]


def items_table(c: Classification, weight: np.ndarray | None = None) -> pd.DataFrame:
    """One row per item in interview order: rule, counts of every status and the rates.

    Rates follow DESIGN §3: (nonresponse reasons + ``item_missing``) over the
    cases in the item's universe excluding ``breakoff``; each reason's rate has
    the same denominator.  With ``weight`` the weighted rates (ratios of
    weighted totals) are added beside the unweighted ones.
    """
    s = c.item_summary()
    reasons = list(c.questionnaire.nonresponse_reasons)
    out = pd.DataFrame({
        "Section": s["section"], "Item": s["item"], "Label": s["label"], "Asked if (rule as written)": s["rule"],
        "Cases": s["cases"], "In universe (excl. breakoff)": s["in_universe"],
    })
    for status in c.categories:
        out[status] = s[status].astype(np.int64)
    out["Nonresponse"] = s["nonresponse"].astype(np.int64)
    out[ITEM_RATE] = s["nonresponse_rate"]
    if weight is not None:
        sw = c.item_summary(weight=weight)
        out["In universe (weighted)"] = sw["in_universe"]
        out[ITEM_RATE_W] = sw["nonresponse_rate"]
    with np.errstate(invalid="ignore", divide="ignore"):
        denom = s["in_universe"].to_numpy(dtype=np.float64)
        for reason in reasons:
            out[f"{reason} rate"] = s[f"{reason}_rate"]
        out[f"{S.ITEM_MISSING} rate"] = np.where(denom > 0, s[S.ITEM_MISSING] / np.where(denom > 0, denom, 1), np.nan)
        if weight is not None:
            for reason in reasons:
                out[f"{reason} rate (weighted)"] = sw[f"{reason}_rate"]
    return out.reset_index(drop=True)


def status_shares(c: Classification, weight: np.ndarray | None = None) -> pd.DataFrame:
    """Share of all (case, item) cells holding each status, unweighted and weighted."""
    counts = c.counts().sum(axis=0)
    total = max(int(counts.sum()), 1)
    out = pd.DataFrame({"status": list(c.categories), "cells": counts.to_numpy(dtype=np.int64),
                        "share": counts.to_numpy(dtype=np.float64) / total})
    if weight is not None:
        wc = c.counts(weight).sum(axis=0).to_numpy(dtype=np.float64)
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
    """Σw·1[nonresponse] / Σw·1[in universe, not breakoff] per item within each group."""
    n, p = c.codes.shape
    w = np.ones(n) if weight is None else weight
    nr_codes = _nr_codes(c)
    brk = c.code(S.BREAKOFF)
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
            num[j] = np.bincount(g, weights=w * np.isin(col, nr_codes), minlength=k)
            den[j] = np.bincount(g, weights=w * (applicable[:, j] & (col != brk)), minlength=k)
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


def completeness_table(c: Classification, weight: np.ndarray | None = None) -> pd.DataFrame:
    """Distribution of cases by the share of their applicable items that were answered.

    Bins are computed in integers (``10 * answered // applicable``) so a share
    such as 3/10 always falls in its own tenth, never below it.
    """
    cases = c.cases
    applicable = cases["applicable"].to_numpy(dtype=np.int64)
    answered = cases["answered"].to_numpy(dtype=np.int64)
    bins = np.where(applicable > 0, (10 * answered) // np.maximum(applicable, 1), 11)
    bins = np.where((applicable > 0) & (answered == applicable), 10, bins)
    counts = np.bincount(bins, minlength=12)
    out = pd.DataFrame({"Share of applicable items answered": list(COMPLETENESS_BINS), "Cases": counts,
                        "Share of cases": counts / max(len(bins), 1)})
    if weight is not None:
        wc = np.bincount(bins, weights=weight, minlength=12)
        out["Weighted share"] = wc / wc.sum() if wc.sum() > 0 else np.nan
    return out


def completeness_summary(c: Classification, weight: np.ndarray | None = None) -> list[tuple[str, object, str]]:
    """Headline figures of case completeness: (label, value, kind) with kind 'int', 'pct' or 'dec'."""
    cases = c.cases
    share = cases["share_answered"].to_numpy(dtype=np.float64)
    has = ~np.isnan(share)
    n = len(cases)
    rows: list[tuple[str, object, str]] = [
        ("Cases", n, "int"),
        ("Cases with at least one applicable item", int(has.sum()), "int"),
        ("Mean share of applicable items answered", float(share[has].mean()) if has.any() else None, "pct"),
        ("Median share of applicable items answered", float(np.median(share[has])) if has.any() else None, "pct"),
        ("Lowest share answered", float(share[has].min()) if has.any() else None, "pct"),
        ("Cases that answered every applicable item",
         int((has & (cases["answered"] == cases["applicable"])).sum()), "int"),
        ("Cases that broke off", int(cases["broke_off"].sum()), "int"),
        ("Cases with at least one routing fault", int((cases["faults"] > 0).sum()), "int"),
        ("Mean applicable items per case", float(cases["applicable"].mean()) if n else None, "dec"),
        ("Mean items with nonresponse per case", float(cases["nonresponse"].mean()) if n else None, "dec"),
    ]
    if weight is not None and has.any() and weight[has].sum() > 0:
        rows.insert(3, ("Weighted mean share answered", float(np.average(share[has], weights=weight[has])), "pct"))
    return rows


def fault_counts(c: Classification) -> pd.DataFrame:
    """Per item with any routing fault: count of each fault status and the total."""
    counts = c.counts()[list(S.FAULT_STATUSES)]
    counts["total"] = counts.sum(axis=1)
    counts = counts[counts["total"] > 0]
    return counts.rename_axis("item").reset_index()


def fault_rows(c: Classification, limit: int) -> tuple[pd.DataFrame, int]:
    """The first ``limit`` routing faults in file order (then interview order), and the total number.

    Only the cases holding the first faults are passed to
    :attr:`Classification.faults`, so a file with millions of faults costs no
    more than the rows shown.
    """
    fault_codes = [c.code(s) for s in S.FAULT_STATUSES]
    mask = np.isin(c.codes, fault_codes)
    per_case = mask.sum(axis=1)
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
    sub_mask = mask[rows]
    pos = np.concatenate([np.flatnonzero(sub_mask[:, j]) for j in range(sub_mask.shape[1]) if sub_mask[:, j].any()])
    order = np.argsort(pos, kind="stable")
    return faults.iloc[order].head(limit).reset_index(drop=True), total


def _empty_faults() -> pd.DataFrame:
    cols = ["case_id", "item", "status", "value", "rule", "inputs"]
    return pd.DataFrame({col: pd.Series(dtype=object) for col in cols})
