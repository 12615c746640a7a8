"""The item report on a Dask cluster: every figure from per-partition counts merged on the client.

The workbook is built by the in-memory engine's own code
(:func:`skipwise.report.workbook.write_report_from_counts`) from the same
mergeable counts (:mod:`skipwise.report.counts`), so both engines give the same
sheets on the same rows.  Two passes:

1. each worker reads and classifies its partition and returns
   :class:`~skipwise.report.counts.ReportCounts` (status counts, the item
   rates' counts, cases per completeness pair, the partition's first fault rows,
   the distinct values of the ``by`` columns); the partition's statuses (not its
   data) stay in the worker's memory;
2. the client picks the pattern grid's items and the ``by`` groups from the
   merged counts, and each worker counts its kept statuses' patterns and
   subgroup rates.

The client holds counts and at most ``fault_rows`` fault rows, never the data.
"""

from __future__ import annotations

import dataclasses
from pathlib import Path
from typing import Callable

import numpy as np
import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError
from skipwise.scale.sources import Part, read_part

__all__ = ["report_on_cluster", "ClusterReport"]


@dataclasses.dataclass(frozen=True, kw_only=True)
class ClusterReport:
    path: Path
    counts: object       # skipwise.report.counts.ReportCounts, merged
    partitions: int


@dataclasses.dataclass(frozen=True)
class _Kept:
    """What a worker keeps of a partition between the passes: statuses, the ``by`` columns, weights."""

    c: object
    data: pd.DataFrame
    weight: np.ndarray | None


def _first(part: Part, q, meta, dtypes, weight: str | None, by: tuple[str, ...], limit: int,
           blank_weight_zero: bool = False):
    from skipwise.classify import classify
    from skipwise.report.counts import count_first

    frame = read_part(part, meta, dtypes)
    c = classify(frame, q)
    w, bad = None, 0
    if weight is not None:
        w = pd.to_numeric(frame[weight], errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan)
        if blank_weight_zero:  # a weight the run made: a case outside the weighting file carries weight 0
            w = np.where(np.isnan(w), 0.0, w)
        bad_mask = ~np.isfinite(w) | (w < 0)
        bad = int(bad_mask.sum())
        w = np.where(bad_mask, 0.0, w)
    counts = count_first(c, frame, w, by=by, fault_limit=limit, bad_weights=bad)
    small = frame[list(by)]
    kept = _Kept(dataclasses.replace(c, data=small), small, w)
    return kept, counts


def _counts_of(pair):
    return pair[1]


def _second(pair, chosen: tuple[str, ...], specs: dict):
    from skipwise.report.counts import count_second

    kept = pair[0]
    return count_second(kept.c, kept.data, kept.weight, chosen=chosen, specs=specs)


def _gather_in_order(futures: list, progress: Callable[[int], None] | None, rows: list[int]) -> list:
    from distributed import as_completed

    index = {f.key: i for i, f in enumerate(futures)}
    out: dict[int, object] = {}
    for fut in as_completed(futures):
        i = index[fut.key]
        out[i] = fut.result()  # a worker's SkipwiseError is raised here, as itself
        if progress is not None:
            progress(rows[i])
    return [out[i] for i in range(len(futures))]


def _merge(parts: list):
    total = parts[0]
    for p in parts[1:]:
        total = total + p
    return total


def _option_problems(first, weight: str | None, by: tuple[str, ...], file: str | None) -> list[Problem]:
    """The in-memory engine's checks that need the whole file: bad weights, too many groups."""
    from skipwise.report.counts import MAX_GROUPS

    problems = []
    for b in by:
        values = first.groups[b]
        if values.over or values.distinct > MAX_GROUPS:
            shown = f"{values.distinct:,}" if not values.over else f"more than {MAX_GROUPS}"
            problems.append(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE, file=file, item=b,
                                    message=f"grouping column '{b}' has {shown} distinct values (at most "
                                            f"{MAX_GROUPS} fit the Subgroups sheet)",
                                    hint="group the values into fewer classes first"))
    if weight is not None and first.bad_weights:
        problems.append(Problem(code=ProblemCode.BAD_WEIGHTS, category=Category.DATA, file=file, item=weight,
                                message=f"weight column '{weight}' has {first.bad_weights:,} missing, non-numeric, "
                                        "infinite or negative value(s)",
                                hint="give every case a finite weight of 0 or more"))
    return problems


def report_on_cluster(parts: list[Part], q, out: Path, *, client, meta=None, dtypes=None, weight: str | None = None,
                      by: tuple[str, ...] = (), case_ids: bool = True, top_items: int = 12, top_patterns: int = 20,
                      fault_rows: int = 100_000, min_base: int = 30, input_path: str | Path | None = None,
                      overwrite: bool = False, written=None,
                      progress: Callable[[int], None] | None = None,
                      blank_weight_zero: bool = False) -> ClusterReport:
    """Write the item report of the partitions ``parts`` from counts computed on the cluster.

    Parameters are those of :func:`skipwise.report.write_item_report`; ``meta`` and ``dtypes``
    come with converted input (:mod:`skipwise.scale.convert`); ``progress`` is called with the
    rows of each partition as its first pass finishes; ``blank_weight_zero``: blank weights count
    as 0 (a weight ``run`` made, blank for a case outside its weighting file) instead of being refused.

    Raises
    ------
    SkipwiseError
        As the in-memory engine: unknown columns, bad options or weights, too many groups,
        an existing workbook without ``overwrite``.
    """
    from skipwise.classify import check_columns
    from skipwise.io.atomic import check_writable
    from skipwise.report.workbook import (EXCEL_MAX_ROWS, FAULTS_HEADER_ROW, _check_options, _sha256, _value_labels,
                                          second_pass_choices, write_report_from_counts)

    out = check_writable(out, overwrite=overwrite)
    by = tuple(by)
    file = str(input_path) if input_path else None
    head = read_part(Part(parts[0].path, (), 0), meta, dtypes)  # no rows: the columns and the metadata
    check_columns(head, q)
    _check_options(head, weight, by, top_items, top_patterns, fault_rows, file, min_base)  # names and numbers
    limit = min(fault_rows, EXCEL_MAX_ROWS - FAULTS_HEADER_ROW)
    q_f, meta_f = client.scatter([q, meta], broadcast=True, hash=False)  # shipped to every worker once
    tag = id(parts)
    kept = [client.submit(_first, p, q_f, meta_f, dtypes, weight, by, limit, blank_weight_zero, key=f"skipwise-report1-{i}-{tag}",
                          pure=False) for i, p in enumerate(parts)]
    try:
        small = [client.submit(_counts_of, k, key=f"skipwise-report1c-{i}-{tag}") for i, k in enumerate(kept)]
        first = _merge(_gather_in_order(small, progress, [p.rows for p in parts]))
        del small
        problems = _option_problems(first, weight, by, file)
        if problems:
            raise SkipwiseError(problems, headline=f"{len(problems)} problem(s) with the report options")
        chosen, specs = second_pass_choices(first, q, top_items=top_items, min_base=min_base,
                                            value_labels=_value_labels(head, q, by))
        seconds = [client.submit(_second, k, chosen, specs, key=f"skipwise-report2-{i}-{tag}")
                   for i, k in enumerate(kept)]
        second = _merge(_gather_in_order(seconds, None, [p.rows for p in parts]))
    finally:
        client.cancel(kept)
    input_sha = _sha256(Path(input_path)) if input_path and Path(input_path).is_file() else None
    path = write_report_from_counts(q, out, first, second, chosen, specs, weight=weight, by=by, case_ids=case_ids,
                                    top_patterns=top_patterns, min_base=min_base, input_path=input_path,
                                    input_sha256=input_sha, overwrite=overwrite, written=written)
    return ClusterReport(path=path, counts=first, partitions=len(parts))
