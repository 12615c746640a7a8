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
from skipwise.rates import ItemRates, item_rates
from skipwise.rules.words import universe_words

__all__ = [
    "Figures", "compute_figures", "in_codes", "ITEM_RATE", "ITEM_RATE_W", "items_table", "status_shares", "subgroup_rates", "SubgroupTable",
    "completeness_table", "completeness_summary", "fault_counts", "fault_rows", "COMPLETENESS_BINS",
    "items_from", "shares_from", "subgroups_from",
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
    """Every sum the report needs beside the item rates.

    Attributes
    ----------
    counts, wcounts
        Items x statuses: cases (and weighted totals, or None) of each status.
    applicable, answered, nonresponse, faults
        Per case: items in universe (breakoff included, ``left_blank`` not), answered, with
        nonresponse, routing faults.
    broke_off
        Per case: at least one ``breakoff`` cell.
    weight
        The case weights used, or None.
    """

    counts: pd.DataFrame
    wcounts: pd.DataFrame | None
    applicable: np.ndarray
    answered: np.ndarray
    nonresponse: np.ndarray
    faults: np.ndarray
    broke_off: np.ndarray
    weight: np.ndarray | None


def compute_figures(c: Classification, weight: np.ndarray | None = None,
                    rates: ItemRates | None = None) -> Figures:
    """Status counts from the item rates' counts, and one loop over items for the per-case sums.

    ``rates`` (from :func:`skipwise.rates.item_rates` with the same ``weight``) already holds
    every item's count of every status, weighted and unweighted, so the status matrix is not
    counted twice.  The figures equal ``c.counts()`` and ``c.cases`` (tested).
    """
    if rates is None:
        rates = item_rates(c, weight)
    if (weight is not None) != rates.weighted:
        raise ValueError("the item rates were counted with a different weighting")
    n, p = c.codes.shape
    applicable_m = c.universe_mask().to_numpy()
    nr = _nr_codes(c)
    fault = [c.code(s) for s in S.FAULT_STATUSES]
    ans, brk, lb = c.code(S.ANSWERED), c.code(S.BREAKOFF), c.code(S.LEFT_BLANK)
    small = np.int16 if p < 32_000 else np.int32
    per_case = {name: np.zeros(n, dtype=small) for name in ("applicable", "answered", "nonresponse", "faults")}
    broke = np.zeros(n, dtype=bool)
    for j in range(p):
        col = c.codes[:, j]
        per_case["applicable"] += applicable_m[:, j] & (col != lb)  # left_blank required no answer
        per_case["answered"] += col == ans
        per_case["nonresponse"] += in_codes(col, nr)
        per_case["faults"] += in_codes(col, fault)
        broke |= col == brk
    cols, idx = list(c.categories), list(c.items)
    wcounts = None if weight is None else pd.DataFrame(rates.status_counts(cols, weighted=True),
                                                       index=idx, columns=cols)
    return Figures(
        counts=pd.DataFrame(rates.status_counts(cols), index=idx, columns=cols),
        wcounts=wcounts, broke_off=broke, weight=weight,
        **{name: arr.astype(np.int64) for name, arr in per_case.items()},
    )


def _nr_codes(c: Classification) -> list[int]:
    return [c.code(s) for s in c.nonresponse_statuses if s in c.categories]


def _ratio(num: np.ndarray, den: np.ndarray) -> np.ndarray:
    num = np.asarray(num, dtype=np.float64)
    den = np.asarray(den, dtype=np.float64)
    return np.where(den > 0, num / np.where(den > 0, den, 1.0), np.nan)


#: Column of the rate's denominator D on the Items sheet.
BASE_COL = "D: in universe, excl. breakoff and left_blank"
#: Column marking items whose unweighted D is under the minimum base.
SMALL_COL = "Below minimum base"
ANSWERED_RATE, FAULT_RATE = "Answered rate", "Fault rate"


def items_table(c: Classification, fig: Figures, rates: ItemRates | None = None) -> pd.DataFrame:
    """One row per item in interview order (see :func:`items_from`), from a classification's figures."""
    rates = rates if rates is not None else item_rates(c, fig.weight)
    return items_from(c.questionnaire, tuple(c.items), tuple(c.categories), fig.counts, rates)


def items_from(q, item_names: tuple[str, ...], categories: tuple[str, ...], counts: pd.DataFrame,
               rates: ItemRates) -> pd.DataFrame:
    """One row per item in interview order: rule, counts of every status and the rates.

    Every rate comes from :func:`skipwise.rates.item_rates` (the package's one
    definition): answered, item nonresponse and fault shares of D, where D is the
    cells in universe excluding ``breakoff`` and ``left_blank``; each reason's
    rate has the same denominator.  With weights the weighted rate (a ratio of
    weighted totals) stands right beside each unweighted one.
    """
    u = rates.table(False)
    w = rates.table(True) if rates.weighted else None
    items = [q.item(i) for i in item_names]
    out = pd.DataFrame({
        "Section": [it.section for it in items], "Item": list(item_names), "Label": [it.label for it in items],
        "Who was asked": [universe_words(it, q) for it in items],
        "Asked if (rule as written)": [it.rule_text for it in items],
        "Cases": u["cases"].to_numpy(), BASE_COL: u["D"].to_numpy(),
        SMALL_COL: np.where(u["below_min_base"].to_numpy(), f"yes (D < {rates.min_base})", ""),
    })
    for status in categories:
        out[status] = counts[status].to_numpy()
    out["invalid where asked (in D)"] = u["invalid_in_universe"].to_numpy()
    out["Nonresponse"] = u["nonresponse"].to_numpy()
    out["Faults (in D)"] = u["faults"].to_numpy()
    if w is not None:
        out["D (weighted)"] = w["D"].to_numpy()
        out["Cases of weight 0 in D"] = w["zero_weight"].to_numpy()
    pairs = [(ITEM_RATE, "nonresponse_rate"), (ANSWERED_RATE, "answered_rate"), (FAULT_RATE, "fault_rate")]
    pairs += [(f"{reason} rate", f"{reason}_rate") for reason in (*q.nonresponse_reasons, S.ITEM_MISSING)]
    for label, col in pairs:
        out[label] = u[col].to_numpy()
        if w is not None:
            out[f"{label} (weighted)"] = w[col].to_numpy()
    return out


def status_shares(c: Classification, fig: Figures) -> pd.DataFrame:
    """Share of all (case, item) cells holding each status, unweighted and weighted."""
    return shares_from(tuple(c.categories), fig.counts, fig.wcounts)


def shares_from(categories: tuple[str, ...], counts_frame: pd.DataFrame,
                wcounts_frame: pd.DataFrame | None) -> pd.DataFrame:
    """Share of all (case, item) cells holding each status, from the items x statuses counts."""
    counts = counts_frame.sum(axis=0)
    total = max(int(counts.sum()), 1)
    out = pd.DataFrame({"status": list(categories), "cells": counts.to_numpy(dtype=np.int64),
                        "share": counts.to_numpy(dtype=np.float64) / total})
    if wcounts_frame is not None:
        wc = wcounts_frame.sum(axis=0).to_numpy(dtype=np.float64)
        out["weighted share"] = wc / wc.sum() if wc.sum() > 0 else np.nan
    return out


@dataclass(frozen=True, kw_only=True)
class SubgroupTable:
    """Item nonresponse rate of every item in every group of every ``by`` column.

    ``rates`` has one row per item and one column per (variable, group label);
    ``sizes`` holds the (weighted) number of cases of each group; ``small`` is
    True where the group cell's unweighted D is under the minimum base (shown,
    marked, never ranked).
    """

    rates: pd.DataFrame
    sizes: pd.Series
    weighted: bool
    small: pd.DataFrame | None = None
    min_base: int = 30


#: A numeric grouping column without value labels and with more distinct values than this is
#: shown in quintile bins (common practice, no source).
MAX_UNBINNED = 12
BINS = 5


def _fmt_number(x: float) -> str:
    return f"{int(x)}" if float(x).is_integer() else f"{x:.4g}"


def group_codes(values: pd.Series, value_labels: dict | None = None) -> tuple[pd.Series, list[str]]:
    """Groups of a ``by`` column as (group number per case, NaN where missing) and one label per group.

    Labelled codes read by their value label ("Northfold" rather than "1"), codes
    as whole numbers ("1", never "1.0"), and a numeric column with many distinct
    values in quintile bins named by their observed ends ("19–41").  The groups are
    chosen from the column's distinct values and counts (:func:`skipwise.report.counts.group_spec`),
    which chunks of rows add up to.
    """
    from skipwise.report.counts import group_spec, group_values

    spec = group_spec(group_values(values), value_labels)
    return spec.codes(values), spec.labels


def _plain_key(value: object) -> object:
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and value.is_integer():
        return int(value)
    return value


def _group_label(value: object) -> str:
    if isinstance(value, (float, np.floating)) and float(value).is_integer():
        return str(int(value))
    return str(value)


def subgroup_rates(c: Classification, data: pd.DataFrame, by: tuple[str, ...],
                   weight: np.ndarray | None = None, *, min_base: int = 30,
                   value_labels: dict[str, dict] | None = None) -> SubgroupTable:
    """Item nonresponse rate (:func:`skipwise.rates.item_rates`) per item within each group."""
    from skipwise.report.counts import count_second, group_spec, group_values

    specs = {var: group_spec(group_values(data[var]), (value_labels or {}).get(var)) for var in by}
    second = count_second(c, data, weight, chosen=(), specs=specs)
    return subgroups_from(tuple(c.items), second.subgroups, specs, weighted=weight is not None, min_base=min_base)


def subgroups_from(items: tuple[str, ...], parts: dict, specs: dict, *, weighted: bool,
                   min_base: int = 30) -> SubgroupTable:
    """The Subgroups table from merged subgroup rates and group sizes (one entry per ``by`` column)."""
    cols: dict[tuple[str, str], np.ndarray] = {}
    small: dict[tuple[str, str], np.ndarray] = {}
    sizes: dict[tuple[str, str], float] = {}
    p = len(items)
    for var, (r, group_sizes) in parts.items():
        r = r.with_min_base(min_base)
        t = r.table(weighted)
        labels = specs[var].labels
        for gi, key in enumerate(r.groups):  # the table is group-major: p rows per group
            lab = MISSING_GROUP if key is None else labels[int(key)]
            part = t.iloc[gi * p:(gi + 1) * p]
            cols[(var, lab)] = part["nonresponse_rate"].to_numpy()
            small[(var, lab)] = part["below_min_base"].to_numpy(dtype=bool)
            sizes[(var, lab)] = float(group_sizes[0 if key is None else int(key) + 1])
    rates = pd.DataFrame(cols, index=list(items))
    flags = pd.DataFrame(small, index=list(items))
    if cols:
        rates.columns = pd.MultiIndex.from_tuples(list(cols))
        flags.columns = pd.MultiIndex.from_tuples(list(small))
    return SubgroupTable(rates=rates, sizes=pd.Series(sizes, dtype=np.float64), weighted=weighted,
                         small=flags, min_base=min_base)


#: Completeness bins: tenths of the share of applicable items answered, then exactly 100 %.
COMPLETENESS_BINS: tuple[str, ...] = (
    *(f"{10 * i}% to under {10 * (i + 1)}%" for i in range(10)), "100% (all answered)", "no applicable items",
)


def completeness_table(fig) -> pd.DataFrame:
    """Distribution of cases by the share of their applicable items that were answered.

    Bins are computed in integers (``10 * answered // applicable``) so a share
    such as 3/10 always falls in its own tenth, never below it.  ``fig`` is a
    chunk's :class:`Figures` or merged :class:`~skipwise.report.counts.CaseCounts`.
    """
    cases = _cases(fig)
    applicable, answered = cases.applicable, cases.answered
    bins = np.where(applicable > 0, (10 * answered) // np.maximum(applicable, 1), 11)
    bins = np.where((applicable > 0) & (answered == applicable), 10, bins)
    counts = np.bincount(bins, weights=cases.cases, minlength=12).round().astype(np.int64)
    out = pd.DataFrame({"Share of applicable items answered": list(COMPLETENESS_BINS), "Cases": counts,
                        "Share of cases": counts / max(cases.n, 1)})
    if cases.weight is not None:
        wc = np.bincount(bins, weights=cases.weight, minlength=12)
        out["Weighted share"] = wc / wc.sum() if wc.sum() > 0 else np.nan
    return out


def _cases(fig):
    from skipwise.report.counts import CaseCounts, case_counts

    return fig if isinstance(fig, CaseCounts) else case_counts(fig)


def _order_stat(values: np.ndarray, counts: np.ndarray, i: int) -> float:
    """The ``i``-th smallest (0-based) of the values repeated ``counts`` times (values sorted)."""
    return float(values[np.searchsorted(np.cumsum(counts), i, side="right")])


def completeness_summary(fig) -> list[tuple[str, object, str]]:
    """Headline figures of case completeness: (label, value, kind) with kind 'int', 'pct' or 'dec'.

    Computed from the cases per (applicable, answered) pair, so chunks of rows add up; the
    median is the middle order statistic (the mean of the two middle ones for an even count).
    """
    cases = _cases(fig)
    has = cases.applicable > 0
    n = cases.n
    app, ans = cases.applicable[has], cases.answered[has]
    share = ans / np.maximum(app, 1)
    cnt = cases.cases[has]
    order = np.argsort(share, kind="stable")
    s_sorted, c_sorted = share[order], cnt[order]
    m = int(cnt.sum())
    if m:
        mid = (_order_stat(s_sorted, c_sorted, m // 2) if m % 2 else
               (_order_stat(s_sorted, c_sorted, m // 2 - 1) + _order_stat(s_sorted, c_sorted, m // 2)) / 2)
    rows: list[tuple[str, object, str]] = [
        ("Cases", n, "int"),
        ("Cases with at least one applicable item", m, "int"),
        ("Mean share of applicable items answered", float((share * cnt).sum() / m) if m else None, "pct"),
        ("Median share of applicable items answered", mid if m else None, "pct"),
        ("Lowest share answered", float(share.min()) if m else None, "pct"),
        ("Cases that answered every applicable item", int(cnt[ans == app].sum()), "int"),
        ("Cases that broke off", cases.broke_off, "int"),
        ("Cases with at least one routing fault", cases.with_faults, "int"),
        ("Mean applicable items per case", cases.applicable_sum / n if n else None, "dec"),
        ("Mean items with nonresponse per case", cases.nonresponse_sum / n if n else None, "dec"),
    ]
    if cases.weight is not None and m and cases.weight[has].sum() > 0:
        w = cases.weight[has]
        rows.insert(3, ("Weighted mean share answered", float((share * w).sum() / w.sum()), "pct"))
    return rows


def fault_counts(fig) -> pd.DataFrame:
    """Per item with any routing fault: count of each fault status and the total (``fig``: Figures or counts)."""
    counts = (fig.counts if isinstance(fig, Figures) else fig)[list(S.FAULT_STATUSES)].copy()
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
