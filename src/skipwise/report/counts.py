"""Mergeable counts behind every figure of the item report: one code path for both engines.

The in-memory engine counts the whole file as one chunk; the dask engine counts
each partition on a worker and adds the chunks up on the client with ``+``.  The
workbook is then built from the merged counts only (:mod:`skipwise.report.workbook`),
so the two engines give the same sheets on the same rows.

Two passes over the chunks are needed, because two choices depend on the whole
file: the items of the pattern grid (the highest item nonresponse rates) and the
groups of a ``by`` column (a numeric column with many values is cut at its
quintiles).  Pass one gives :class:`ReportCounts`; the client makes the two
choices (:func:`group_spec`, the pattern items); pass two gives
:class:`SecondCounts` (pattern counts and subgroup rates).

References
----------
Groves, R. M. et al. (2009). *Survey Methodology*, 2nd ed., ch. 6 (item nonresponse).
Little, R. J. A. and Rubin, D. B. (2019). *Statistical Analysis with Missing Data*, 3rd ed.,
§1.2 (missingness patterns).
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd

from skipwise.rates import ItemRates, item_rates

__all__ = ["CaseCounts", "GroupValues", "GroupSpec", "PatternCounts", "ReportCounts", "SecondCounts",
           "case_counts", "group_values", "group_spec", "pattern_counts", "MAX_GROUPS"]

#: Most distinct values a ``by`` column may have (one sheet column each).
MAX_GROUPS = 200
_PAIR = np.int64(1 << 32)   # (applicable, answered) pairs coded as applicable * 2**32 + answered


def _merge_keys(keys: list[np.ndarray], *values: list[np.ndarray | None]) -> tuple:
    """Unique sorted keys and the sums of each value array over equal keys."""
    allk = np.concatenate(keys)
    uniq, inv = np.unique(allk, return_inverse=True)
    inv = inv.reshape(-1)
    out = [uniq]
    for vals in values:
        if vals[0] is None:
            out.append(None)
            continue
        v = np.concatenate(vals)
        summed = np.bincount(inv, weights=v, minlength=len(uniq))
        out.append(summed.astype(v.dtype) if v.dtype.kind in "iu" else summed)
    return tuple(out)


@dataclass(frozen=True, kw_only=True)
class CaseCounts:
    """Cases by (items in universe, items answered): the completeness figures' one source.

    ``keys`` code the pairs (applicable * 2**32 + answered), ``cases`` counts them,
    ``weight`` sums the case weights (None unweighted).
    """

    keys: np.ndarray
    cases: np.ndarray
    weight: np.ndarray | None
    n: int
    broke_off: int
    with_faults: int
    applicable_sum: int
    nonresponse_sum: int

    def __add__(self, other: CaseCounts) -> CaseCounts:
        keys, cases, weight = _merge_keys([self.keys, other.keys], [self.cases, other.cases],
                                          [self.weight, other.weight])
        return CaseCounts(keys=keys, cases=cases, weight=weight, n=self.n + other.n,
                          broke_off=self.broke_off + other.broke_off, with_faults=self.with_faults + other.with_faults,
                          applicable_sum=self.applicable_sum + other.applicable_sum,
                          nonresponse_sum=self.nonresponse_sum + other.nonresponse_sum)

    @property
    def applicable(self) -> np.ndarray:
        return self.keys // _PAIR

    @property
    def answered(self) -> np.ndarray:
        return self.keys % _PAIR


def case_counts(fig) -> CaseCounts:
    """The :class:`CaseCounts` of a chunk's :class:`~skipwise.report.tables.Figures`."""
    keys = fig.applicable.astype(np.int64) * _PAIR + fig.answered.astype(np.int64)
    uniq, inv = np.unique(keys, return_inverse=True)
    inv = inv.reshape(-1)
    cases = np.bincount(inv, minlength=len(uniq)).astype(np.int64)
    weight = None if fig.weight is None else np.bincount(inv, weights=fig.weight, minlength=len(uniq))
    return CaseCounts(keys=uniq, cases=cases, weight=weight, n=len(keys), broke_off=int(fig.broke_off.sum()),
                      with_faults=int(np.count_nonzero(fig.faults > 0)), applicable_sum=int(fig.applicable.sum()),
                      nonresponse_sum=int(fig.nonresponse.sum()))


@dataclass(frozen=True, kw_only=True)
class GroupValues:
    """Distinct values of a ``by`` column and their cases (missing apart); ``over`` past MAX_GROUPS."""

    counts: pd.Series
    missing: int
    numeric: bool
    over: bool = False

    def __add__(self, other: GroupValues) -> GroupValues:
        over = self.over or other.over
        counts = self.counts.add(other.counts, fill_value=0).astype(np.int64)
        if len(counts) + bool(self.missing + other.missing) > MAX_GROUPS:
            over, counts = True, counts.iloc[:0]
        return GroupValues(counts=counts, missing=self.missing + other.missing,
                           numeric=self.numeric and other.numeric, over=over)

    @property
    def distinct(self) -> int:
        """Distinct values, the missing value counting as one (as ``nunique(dropna=False)``)."""
        return len(self.counts) + bool(self.missing)


def group_values(series: pd.Series) -> GroupValues:
    numeric = pd.api.types.is_numeric_dtype(series) and not pd.api.types.is_bool_dtype(series)
    counts = series.value_counts(dropna=True, sort=False)
    missing = int(series.isna().sum())
    over = len(counts) + bool(missing) > MAX_GROUPS
    return GroupValues(counts=counts.iloc[:0] if over else counts.astype(np.int64), missing=missing,
                       numeric=numeric, over=over)


@dataclass(frozen=True, kw_only=True)
class GroupSpec:
    """The groups of a ``by`` column: each distinct value's group number and each group's label."""

    values: pd.Index
    group_of: np.ndarray
    labels: list[str]

    def codes(self, series: pd.Series) -> pd.Series:
        """Group number per case (float, NaN where missing), as :func:`tables.group_codes` gives them."""
        pos = self.values.get_indexer(series)
        if not len(self.group_of):  # every value missing: one group, the missing one
            return pd.Series(np.full(len(series), np.nan), index=series.index)
        codes = np.where(pos >= 0, self.group_of[np.maximum(pos, 0)].astype(np.float64), np.nan)
        return pd.Series(codes, index=series.index)


def _sorted_index(counts: pd.Series) -> pd.Series:
    try:
        return counts.sort_index()
    except TypeError:  # values of mixed types: sort by their text
        return counts.iloc[np.argsort([str(v) for v in counts.index], kind="stable")]


def group_spec(values: GroupValues, value_labels: dict | None = None) -> GroupSpec:
    """Groups from a column's merged distinct values: labelled or few codes as they are, else quintile bins.

    A numeric column without value labels and with more than ``MAX_UNBINNED`` distinct
    values is cut at its quintiles (``pandas.qcut`` on the column's values, rebuilt from the
    distinct values and their counts: the same multiset gives the same quantiles), each bin
    named by its observed ends (common practice, no source).
    """
    from skipwise.report.tables import BINS, MAX_UNBINNED, _fmt_number, _group_label, _plain_key

    labels_of = {_plain_key(k): str(v) for k, v in (value_labels or {}).items()}
    counts = _sorted_index(values.counts)
    if values.numeric and not labels_of and len(counts) > MAX_UNBINNED:
        uniq = counts.index.to_numpy(dtype=np.float64)
        x = np.repeat(uniq, counts.to_numpy())
        bins = np.asarray(pd.qcut(x, BINS, labels=False, duplicates="drop"))
        starts = np.cumsum(counts.to_numpy()) - counts.to_numpy()
        ubins = bins[starts]
        present = np.unique(ubins)
        group_of = np.searchsorted(present, ubins)
        labels = []
        for g in range(len(present)):
            lo, hi = uniq[group_of == g].min(), uniq[group_of == g].max()
            labels.append(f"{_fmt_number(lo)}\u2013{_fmt_number(hi)}" if lo != hi else _fmt_number(lo))
        return GroupSpec(values=pd.Index(counts.index), group_of=group_of, labels=labels)
    labels = [labels_of.get(_plain_key(u), _group_label(u)) for u in counts.index]
    return GroupSpec(values=pd.Index(counts.index), group_of=np.arange(len(counts)), labels=labels)


@dataclass(frozen=True, kw_only=True)
class PatternCounts:
    """Cases (and weight) of every joint nonresponse pattern over the chosen items.

    ``keys`` code a pattern as one integer (bit ``i``: item ``i`` has nonresponse) when
    there are at most 64 items, else as the bytes of the packed row.
    """

    k: int
    keys: np.ndarray
    counts: np.ndarray
    weight: np.ndarray | None
    n: int
    total_weight: float | None

    def __add__(self, other: PatternCounts) -> PatternCounts:
        keys, counts, weight = _merge_keys([self.keys, other.keys], [self.counts, other.counts],
                                           [self.weight, other.weight])
        tw = None if self.total_weight is None else self.total_weight + other.total_weight
        return replace(self, keys=keys, counts=counts, weight=weight, n=self.n + other.n, total_weight=tw)

    def bits(self) -> np.ndarray:
        if self.k <= 64:
            keys = self.keys.astype(np.uint64)
            return ((keys[:, None] >> np.arange(self.k, dtype=np.uint64)[None, :]) & np.uint64(1)).astype(bool)
        if not len(self.keys):
            return np.zeros((0, self.k), dtype=bool)
        packed = np.stack([np.frombuffer(b, dtype=np.uint8) for b in self.keys])
        return np.unpackbits(packed, axis=1, count=self.k).astype(bool)

    def table(self, items: tuple[str, ...], top: int):
        """The ``top`` most frequent patterns: ties by more missing items first, then by the pattern's code."""
        from skipwise.report.patterns import PatternTable

        weighted = self.weight is not None
        if self.n == 0 or self.k == 0:
            return PatternTable(items=items, grid=np.zeros((0, self.k), dtype=bool),
                                counts=np.zeros(0, dtype=np.int64), weighted=np.zeros(0) if weighted else None,
                                total_cases=self.n, total_weight=self.total_weight, distinct=0, other_cases=0,
                                other_weight=0.0 if weighted else None)
        bits = self.bits()
        order = np.lexsort((np.arange(len(self.counts)), -bits.sum(axis=1), -self.counts))
        keep = order[:top]
        w_keep = self.weight[keep] if weighted else None
        return PatternTable(items=items, grid=bits[keep], counts=self.counts[keep].astype(np.int64), weighted=w_keep,
                            total_cases=self.n, total_weight=self.total_weight, distinct=len(self.counts),
                            other_cases=int(self.n - self.counts[keep].sum()),
                            other_weight=float(self.weight[order[top:]].sum()) if weighted else None)


def pattern_counts(mask: np.ndarray, weight: np.ndarray | None = None) -> PatternCounts:
    """Count the patterns of a (cases x k) boolean matrix; no loop over cases."""
    n, k = mask.shape
    if k <= 64:
        key = np.zeros(n, dtype=np.uint64)
        for i in range(k):  # loop over items, not cases
            key |= mask[:, i].astype(np.uint64) << np.uint64(i)
    else:
        packed = np.packbits(mask, axis=1)
        key = np.array([row.tobytes() for row in packed] if n else [], dtype=object)
    if n and k:
        uniq, inv = np.unique(key, return_inverse=True)
        inv = inv.reshape(-1)
        counts = np.bincount(inv, minlength=len(uniq)).astype(np.int64)
        wsum = None if weight is None else np.bincount(inv, weights=weight, minlength=len(uniq))
    else:
        uniq, counts = key[:0], np.zeros(0, dtype=np.int64)
        wsum = None if weight is None else np.zeros(0)
    return PatternCounts(k=k, keys=uniq, counts=counts, weight=wsum, n=n,
                         total_weight=None if weight is None else float(weight.sum()))


@dataclass(frozen=True, kw_only=True)
class ReportCounts:
    """Pass one over a chunk: every count the workbook needs except patterns and subgroups."""

    items: tuple[str, ...]
    categories: tuple[str, ...]
    counts: np.ndarray                 # items x statuses
    wcounts: np.ndarray | None
    rates: ItemRates
    cases: CaseCounts
    total_weight: float | None
    zero_weight: int
    bad_weights: int
    faults_total: int
    fault_head: pd.DataFrame           # the first ``fault_limit`` faults, file order
    fault_limit: int
    groups: dict[str, GroupValues] = field(default_factory=dict)

    def __add__(self, other: ReportCounts) -> ReportCounts:
        if self.fault_limit <= 0 or len(self.fault_head) >= self.fault_limit:
            head = self.fault_head
        else:
            head = pd.concat([self.fault_head, other.fault_head], ignore_index=True).head(self.fault_limit)
        add = (lambda a, b: None if a is None else a + b)
        return replace(self, counts=self.counts + other.counts, wcounts=add(self.wcounts, other.wcounts),
                       rates=self.rates + other.rates, cases=self.cases + other.cases,
                       total_weight=add(self.total_weight, other.total_weight),
                       zero_weight=self.zero_weight + other.zero_weight, bad_weights=self.bad_weights + other.bad_weights,
                       faults_total=self.faults_total + other.faults_total, fault_head=head,
                       groups={v: self.groups[v] + other.groups[v] for v in self.groups})

    @property
    def n(self) -> int:
        return self.cases.n

    def counts_frame(self, weighted: bool = False) -> pd.DataFrame:
        arr = self.wcounts if weighted else self.counts
        return pd.DataFrame(arr, index=list(self.items), columns=list(self.categories))


@dataclass(frozen=True, kw_only=True)
class SecondCounts:
    """Pass two over a chunk: pattern counts and, per ``by`` column, subgroup rates and group sizes."""

    patterns: PatternCounts
    subgroups: dict[str, tuple[ItemRates, np.ndarray]] = field(default_factory=dict)

    def __add__(self, other: SecondCounts) -> SecondCounts:
        return SecondCounts(patterns=self.patterns + other.patterns,
                            subgroups={v: (r + other.subgroups[v][0], s + other.subgroups[v][1])
                                       for v, (r, s) in self.subgroups.items()})


def count_first(c, data: pd.DataFrame, weight: np.ndarray | None, *, by: tuple[str, ...], fault_limit: int,
                bad_weights: int = 0) -> ReportCounts:
    """Pass one over a chunk (its classification ``c`` and data; ``weight`` NaN-free or None)."""
    from skipwise.report import tables as T

    rates = item_rates(c, weight)
    fig = T.compute_figures(c, weight, rates)
    head, total = T.fault_rows(c, fig, fault_limit)
    return ReportCounts(
        items=tuple(c.items), categories=tuple(c.categories), counts=fig.counts.to_numpy(),
        wcounts=None if fig.wcounts is None else fig.wcounts.to_numpy(), rates=rates,
        cases=case_counts(fig), total_weight=None if weight is None else float(weight.sum()),
        zero_weight=0 if weight is None else int(np.count_nonzero(weight == 0)), bad_weights=bad_weights,
        faults_total=total, fault_head=head, fault_limit=fault_limit,
        groups={var: group_values(data[var]) for var in by})


def count_second(c, data: pd.DataFrame, weight: np.ndarray | None, *, chosen: tuple[str, ...],
                 specs: dict[str, GroupSpec]) -> SecondCounts:
    """Pass two over a chunk: patterns over the ``chosen`` items, subgroup rates over ``specs``' groups."""
    from skipwise.report.tables import in_codes

    nr_codes = [c.code(s) for s in c.nonresponse_statuses if s in c.categories]
    idx = [c.items.index(name) for name in chosen]
    mask = np.column_stack([in_codes(c.codes[:, j], nr_codes) for j in idx]) if idx else \
        np.zeros((len(c.index), 0), dtype=bool)
    subgroups = {}
    w = np.ones(len(c.index)) if weight is None else weight
    for var, spec in specs.items():
        codes = spec.codes(data[var])
        gnum = codes.fillna(-1).to_numpy(dtype=np.int64)
        sizes = np.bincount(gnum + 1, weights=w, minlength=len(spec.labels) + 1)  # [missing, group 0, ...]
        subgroups[var] = (item_rates(c, weight, by=codes), sizes)
    return SecondCounts(patterns=pattern_counts(mask, weight), subgroups=subgroups)
