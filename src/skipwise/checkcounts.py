"""Mergeable counts behind ``skipwise check``: one code path for the in-memory and the dask engine.

:func:`check_counts` counts a chunk of rows (its first row's number in the file
given): blank case ids, the undeclared values of every item column with their
cases and first row, and the hits of every declared code.  Chunks add up with
``+``.  Duplicate case ids need every id at once: :func:`duplicate_summary`
summarizes a set of (id, row) pairs, and summaries of disjoint sets of ids (the
dask engine hashes ids into buckets, one summary per bucket) add up too.
:func:`skipwise.checkdata.check_data` turns merged counts into findings.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

__all__ = ["CheckCounts", "DuplicateSummary", "check_counts", "duplicate_summary", "id_frame"]


@dataclass(frozen=True, kw_only=True)
class DuplicateSummary:
    """Case ids on more than one row: distinct ids, their rows, and the first ``top`` ids by first row."""

    distinct: int = 0
    rows: int = 0
    first: pd.DataFrame = field(default_factory=lambda: pd.DataFrame({"id": [], "row": []}))
    top: int = 5

    def __add__(self, other: DuplicateSummary) -> DuplicateSummary:
        first = pd.concat([self.first, other.first], ignore_index=True).sort_values("row", kind="stable")
        return DuplicateSummary(distinct=self.distinct + other.distinct, rows=self.rows + other.rows,
                                first=first.head(self.top).reset_index(drop=True), top=self.top)


def id_frame(ids: pd.Series, start: int) -> pd.DataFrame:
    """The non-blank ids of a chunk with their 0-based row numbers in the file."""
    rows = start + np.arange(len(ids), dtype=np.int64)
    keep = ~ids.isna().to_numpy()
    return pd.DataFrame({"id": ids[keep].to_numpy(), "row": rows[keep]})


def duplicate_summary(frame: pd.DataFrame, top: int) -> DuplicateSummary:
    """Duplicates among the (id, row) pairs of ``frame`` (every row of each id it holds)."""
    if frame.empty:
        return DuplicateSummary(top=top)
    g = frame.groupby("id", sort=False)["row"].agg(["size", "min"])
    dup = g[g["size"] > 1]
    first = dup.sort_values("min", kind="stable").head(top)
    return DuplicateSummary(distinct=len(dup), rows=int(dup["size"].sum()),
                            first=pd.DataFrame({"id": first.index.to_numpy(), "row": first["min"].to_numpy()}),
                            top=top)


@dataclass(frozen=True, kw_only=True)
class CheckCounts:
    """Counts of :func:`check_counts` for a chunk (or merged chunks) of one file."""

    n: int
    top: int
    blank_ids: int = 0
    blank_rows: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))
    #: (item, column) -> undeclared values: DataFrame with columns value, cases, row (first row)
    undeclared: dict[tuple[str, str], pd.DataFrame] = field(default_factory=dict)
    #: item -> hits of each of its declared codes
    hits: dict[str, np.ndarray] = field(default_factory=dict)
    duplicates: DuplicateSummary | None = None

    def __add__(self, other: CheckCounts) -> CheckCounts:
        undeclared = dict(self.undeclared)
        for key, frame in other.undeclared.items():
            undeclared[key] = _merge_values(undeclared[key], frame) if key in undeclared else frame
        hits = {item: self.hits[item] + other.hits[item] for item in self.hits}
        dups = None if self.duplicates is None or other.duplicates is None else self.duplicates + other.duplicates
        return dataclasses.replace(
            self, n=self.n + other.n, blank_ids=self.blank_ids + other.blank_ids,
            blank_rows=np.concatenate([self.blank_rows, other.blank_rows])[:self.top], undeclared=undeclared,
            hits=hits, duplicates=dups)


def _merge_values(a: pd.DataFrame, b: pd.DataFrame) -> pd.DataFrame:
    both = pd.concat([a, b], ignore_index=True)
    return both.groupby("value", sort=False, dropna=False).agg(cases=("cases", "sum"), row=("row", "min")) \
        .reset_index()


def _value_rows(values: pd.Series, rows: np.ndarray) -> pd.DataFrame:
    """Distinct stored values with their cases and first row, in order of first appearance."""
    frame = pd.DataFrame({"value": values.to_numpy(dtype=object), "row": rows})
    return frame.groupby("value", sort=False, dropna=False).agg(cases=("row", "size"), row=("row", "min")) \
        .reset_index()


def check_counts(data: pd.DataFrame, q, *, top: int, start: int = 0, whole: bool = False) -> CheckCounts:
    """Count a chunk of rows whose first row is row ``start`` (0-based) of the file.

    With ``whole`` (the chunk is the whole file) the duplicate case ids are summarized too;
    otherwise the caller gathers them (:func:`duplicate_summary` over buckets of ids).
    """
    from skipwise.caseids import id_values
    from skipwise.checkdata import _decoded_columns
    from skipwise.classify import cells as K
    from skipwise.questionnaire.model import ItemType

    out: dict = {"n": len(data), "top": top}
    if q.case_id in data.columns:
        stored = id_values(data[q.case_id])
        blank = stored.isna().to_numpy()
        out["blank_ids"] = int(blank.sum())
        out["blank_rows"] = (start + np.flatnonzero(blank)[:top]).astype(np.int64)
        if whole:
            out["duplicates"] = duplicate_summary(id_frame(stored, start), top)
    undeclared, hits = {}, {}
    rows = start + np.arange(len(data), dtype=np.int64)
    for item in q.items:
        if item.type is not ItemType.MULTI and item.name not in data.columns:
            continue
        decoded = _decoded_columns(item, data)
        if not decoded:
            continue
        h = np.zeros(len(item.codes), dtype=np.int64)
        for col, dec in decoded:
            bad = dec.kind == K.INVALID
            if bad.any():
                undeclared[(item.name, col)] = _value_rows(data[col][bad], rows[bad])
            coded = dec.code[dec.code >= 0]
            h += np.bincount(coded, minlength=len(item.codes))[:len(item.codes)]
        hits[item.name] = h
    return CheckCounts(undeclared=undeclared, hits=hits, **out)
