"""Joint patterns of item nonresponse over a chosen set of items.

Each case's pattern over ``k`` items is encoded as one integer (``k <= 64``:
bit ``i`` set when item ``i`` has nonresponse) or as a packed byte row
(``k > 64``), and the patterns are counted with :func:`numpy.unique`, so no
Python loop ever runs over cases.

References
----------
Little, R. J. A. and Rubin, D. B. (2019). *Statistical Analysis with Missing
Data*, 3rd ed., §1.2 (missingness patterns).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

__all__ = ["PatternTable", "nonresponse_patterns", "pick_items"]


@dataclass(frozen=True, kw_only=True)
class PatternTable:
    """The most frequent nonresponse patterns.

    Attributes
    ----------
    items
        The items of the grid, in interview order.
    grid
        Boolean matrix (patterns x items): True where the item has nonresponse.
    counts
        Cases showing each pattern (most frequent first).
    weighted
        Weighted total of each pattern, or None without weights.
    total_cases, total_weight
        All cases (and their weight): the denominator of the shares.
    distinct
        Number of distinct patterns in the file.
    other_cases, other_weight
        Cases (weight) with a pattern not shown.
    """

    items: tuple[str, ...]
    grid: np.ndarray
    counts: np.ndarray
    weighted: np.ndarray | None
    total_cases: int
    total_weight: float | None
    distinct: int
    other_cases: int
    other_weight: float | None

    @property
    def shares(self) -> np.ndarray:
        return self.counts / max(self.total_cases, 1)

    def to_frame(self) -> pd.DataFrame:
        """Patterns as rows: one 0/1 column per item, then cases and share."""
        out = pd.DataFrame(self.grid.astype(np.int8), columns=list(self.items))
        out["cases"] = self.counts
        out["share"] = self.shares
        return out


def pick_items(rates: pd.Series, top: int) -> tuple[str, ...]:
    """The ``top`` items with the highest nonresponse rate (rate > 0), returned in interview order.

    Ties keep interview order (a stable sort), so the choice is reproducible.
    """
    r = rates.fillna(0.0)
    r = r[r > 0]
    if r.empty:
        return ()
    order = np.argsort(-r.to_numpy(), kind="stable")[:top]
    chosen = set(r.index[order])
    return tuple(name for name in rates.index if name in chosen)


def nonresponse_patterns(mask: np.ndarray, items: tuple[str, ...], *, top: int,
                         weight: np.ndarray | None = None) -> PatternTable:
    """Count the joint nonresponse patterns of ``items`` and keep the ``top`` most frequent.

    Parameters
    ----------
    mask
        Boolean matrix (cases x len(items)), True where the cell is item nonresponse.
    items
        Names of the matrix's columns.
    top
        How many patterns to keep; ties in count are broken by more missing
        items first, then by the pattern's code, so the result is reproducible.
    weight
        Optional case weights: weighted totals are returned beside the counts.

    Returns
    -------
    PatternTable
        Counted through :func:`skipwise.report.counts.pattern_counts`, whose counts of chunks
        of rows add up (the dask engine's path).
    """
    from skipwise.report.counts import pattern_counts

    return pattern_counts(mask, weight).table(items, top)
