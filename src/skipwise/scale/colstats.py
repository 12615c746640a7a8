"""The codebook's per-variable figures from per-partition partial sums, never the data.

A worker summarises each column of its partition of the final data file: the
cases and summed weight of every stored value the codebook lists, the blank
cells, and the moments of the valid values (count, mean, M2 = the sum of squared
deviations from the mean, minimum, maximum, sum) — of every numeric column, and
of each numeric item's answered cells.  The client merges the partitions' summaries:
counts and sums add; means and M2 merge by the pairwise formula of Chan, Golub
and LeVeque (1979, "Updating formulae and a pairwise algorithm for computing
sample variances", Stanford CS report STAN-CS-79-773; also Chan, Golub and
LeVeque 1983, The American Statistician 37:242-247):

    n = na + nb,  delta = mean_b - mean_a,
    mean = mean_a + delta * nb / n,  M2 = M2a + M2b + delta^2 * na * nb / n,

and the sample standard deviation is sqrt(M2 / (n - 1)).  The merged figures
agree with the in-memory engine's (numpy over the whole column) within 1e-9
before formatting; the formatted codebook text is then the same.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Mapping

import numpy as np
import pandas as pd

from skipwise.ddi.write import ColumnSummary, Moments

__all__ = ["PartMoments", "ColumnPartial", "part_moments", "merge_moments", "column_partials", "merge_partials",
           "summaries", "listed_values"]


@dataclass(frozen=True)
class PartMoments:
    """Mergeable moments of valid (finite) values: n, mean, M2, min, max, sum."""

    n: int = 0
    mean: float = 0.0
    m2: float = 0.0
    min: float = np.inf
    max: float = -np.inf
    total: float = 0.0

    def moments(self) -> Moments:
        if not self.n:
            return Moments(0, np.nan, np.nan, np.nan, np.nan, self.total)
        sd = float(np.sqrt(self.m2 / (self.n - 1))) if self.n > 1 else np.nan
        return Moments(self.n, self.mean, sd, self.min, self.max, self.total)


def part_moments(values: np.ndarray) -> PartMoments:
    """The moments of one partition's values (NaN and infinite values are not valid; the sum skips NaN)."""
    valid = values[np.isfinite(values)]
    total = float(np.nansum(values))
    if not len(valid):
        return PartMoments(total=total)
    mean = float(valid.mean())
    return PartMoments(len(valid), mean, float(np.square(valid - mean).sum()), float(valid.min()),
                       float(valid.max()), total)


def merge_moments(a: PartMoments, b: PartMoments) -> PartMoments:
    """Chan, Golub and LeVeque's (1979) pairwise update of n, mean and M2; min, max and sum combine."""
    if not b.n:
        return PartMoments(a.n, a.mean, a.m2, a.min, a.max, a.total + b.total)
    if not a.n:
        return PartMoments(b.n, b.mean, b.m2, b.min, b.max, a.total + b.total)
    n = a.n + b.n
    delta = b.mean - a.mean
    return PartMoments(n, a.mean + delta * b.n / n, a.m2 + b.m2 + delta * delta * a.n * b.n / n,
                       min(a.min, b.min), max(a.max, b.max), a.total + b.total)


@dataclass(frozen=True, kw_only=True)
class ColumnPartial:
    counts: dict = field(default_factory=dict)
    wsum: dict = field(default_factory=dict)
    blank: int = 0
    blank_w: float = 0.0
    values: PartMoments | None = None
    answered: PartMoments | None = None


def listed_values(frame: pd.DataFrame, q, meta) -> dict[str, set]:
    """Per column, the stored values whose frequencies the codebooks (md/html and DDI) list."""
    from skipwise.classify.export import STATUS_SUFFIX
    from skipwise.classify.statuses import STATUS_NUMBERS
    from skipwise.ddi.write import _labels, item_categories

    out: dict[str, set] = {}
    owner = q.column_owner
    numbers = {**STATUS_NUMBERS, **dict(q.reason_numbers)}
    items = {it.name for it in q.items}
    for col in map(str, frame.columns):
        labels = _labels(meta, col)
        if col in owner:
            out[col] = set(item_categories(q.item(owner[col]), labels)[0])
        elif col.endswith(STATUS_SUFFIX) and col[: -len(STATUS_SUFFIX)] in items:
            out[col] = set(numbers.values()) | set(labels)
        elif labels:
            out[col] = set(labels)
    return out


def column_partials(frame: pd.DataFrame, q, listed: Mapping[str, set], w: np.ndarray | None
                    ) -> dict[str, ColumnPartial]:
    """One partition's summary of every column of the final data (``w``: the codebook's weight or None)."""
    from skipwise.classify.export import STATUS_SUFFIX
    from skipwise.classify.statuses import STATUS_NUMBERS
    from skipwise.ddi.write import _frequencies
    from skipwise.questionnaire.model import ItemType

    answered = STATUS_NUMBERS["answered"]
    owner = q.column_owner
    out: dict[str, ColumnPartial] = {}
    for col in map(str, frame.columns):
        x = frame[col]
        counts: dict = {}
        wsum: dict = {}
        blank, blank_w = 0, 0.0
        if col in listed:
            keep = listed[col]
            c, s = _frequencies(x, w)
            counts = {k: v for k, v in c.items() if k in keep}
            wsum = {k: v for k, v in s.items() if k in keep}
            isna = x.isna().to_numpy()
            blank = int(isna.sum())
            blank_w = float(np.nansum(np.where(isna, w, 0))) if w is not None else 0.0
        values = ans = None
        if pd.api.types.is_numeric_dtype(x) and not pd.api.types.is_bool_dtype(x):
            values = part_moments(pd.to_numeric(x, errors="coerce").to_numpy(float))
        if col in owner:
            it = q.item(owner[col])
            status = f"{it.name}{STATUS_SUFFIX}"
            if it.type in (ItemType.INTEGER, ItemType.NUMBER) and status in frame.columns:
                v = pd.to_numeric(x, errors="coerce").to_numpy(float)
                ans = part_moments(np.where(frame[status].to_numpy() == answered, v, np.nan))
        out[col] = ColumnPartial(counts=counts, wsum=wsum, blank=blank, blank_w=blank_w, values=values, answered=ans)
    return out


def _add(a: dict, b: dict) -> dict:
    out = dict(a)
    for k, v in b.items():
        out[k] = out.get(k, 0) + v
    return out


def _merge_opt(a: PartMoments | None, b: PartMoments | None) -> PartMoments | None:
    if a is None or b is None:
        return a if b is None else b
    return merge_moments(a, b)


def merge_partials(a: dict[str, ColumnPartial], b: dict[str, ColumnPartial]) -> dict[str, ColumnPartial]:
    """Two partitions' summaries as one (columns of either)."""
    out = dict(a)
    for col, pb in b.items():
        pa = out.get(col)
        out[col] = pb if pa is None else ColumnPartial(
            counts=_add(pa.counts, pb.counts), wsum=_add(pa.wsum, pb.wsum), blank=pa.blank + pb.blank,
            blank_w=pa.blank_w + pb.blank_w, values=_merge_opt(pa.values, pb.values),
            answered=_merge_opt(pa.answered, pb.answered))
    return out


def summaries(merged: dict[str, ColumnPartial]) -> dict[str, ColumnSummary]:
    """The merged summaries as the codebook writers take them."""
    return {col: ColumnSummary(counts={k: int(v) for k, v in p.counts.items()},
                               wsum={k: float(v) for k, v in p.wsum.items()}, blank=p.blank, blank_w=p.blank_w,
                               values=p.values.moments() if p.values is not None else None,
                               answered=p.answered.moments() if p.answered is not None else None)
            for col, p in merged.items()}
