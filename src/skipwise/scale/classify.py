"""Classification on a Dask cluster: one status part per input partition, counts merged on the client.

Classification is row-local, so each partition is classified on a worker
exactly as the in-memory engine classifies the whole file; the workers write
one Parquet part of the data with its status columns (the same columns as the
in-memory ``.parquet`` output) and one part of the routing-fault listing, and
return only counts, which add up on the client (:class:`skipwise.rates.ItemRates`
merges with ``+``).  A worker holds one partition, never the file.

The parts are written into staging folders beside ``OUT`` and ``OUT_faults``
and published by renames (:class:`skipwise.publish.PackagePublisher`): each
folder is wholly the old one or wholly the new one.  The fault folder is
published first, so an interruption between the two leaves the new faults
beside the old data, never new data without its faults.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError
from skipwise.scale.sources import DEFAULT_PARTITION_ROWS, Part, parquet_parts, read_part

__all__ = ["DaskClassification", "classify_on_cluster", "faults_folder", "PART_MANIFEST"]

#: The listing of a parts folder (an underscore name: Parquet readers skip it when they read the folder).
PART_MANIFEST = "_manifest.json"


@dataclass(frozen=True, kw_only=True)
class PartSummary:
    rows: int
    counts: pd.DataFrame     # items x statuses
    rates: object            # skipwise.rates.ItemRates
    faults: int
    file: str
    sha256: str
    faults_sha256: str


@dataclass(frozen=True, kw_only=True)
class DaskClassification:
    """What the client keeps: merged counts and the list of parts, never the data."""

    rows: int
    counts: pd.DataFrame
    rates: object
    faults: int
    parts: tuple[str, ...]


def faults_folder(out: Path) -> Path:
    """Where a folder OUT's fault listing goes: ``OUT_faults`` beside it."""
    return out.with_name(out.name + "_faults")


def _sha(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for block in iter(lambda: f.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def _fault_part(faults: pd.DataFrame) -> pd.DataFrame:
    """The listing with text columns as strings (Parquet needs one type per column)."""
    out = faults.copy()
    for col in out.columns:
        if out[col].dtype == object:
            out[col] = out[col].map(lambda v: None if v is None or (isinstance(v, float) and v != v) else str(v))
            out[col] = out[col].astype("string")
    return out


def classify_part(part: Part, q, staging: str, faults_staging: str, index: int) -> PartSummary:
    """Classify one partition on a worker and write its two parts; returns counts only."""
    from skipwise.classify import classify
    from skipwise.classify.export import with_status_columns
    from skipwise.io import get_meta, write_survey
    from skipwise.rates import item_rates

    frame = read_part(part)
    cl = classify(frame, q)
    result, meta = with_status_columns(frame, cl, get_meta(frame))
    name = f"part-{index:05d}.parquet"
    target = Path(staging) / name
    write_survey(result, target, meta, overwrite=True)
    fault_target = Path(faults_staging) / name
    faults = cl.faults
    _fault_part(faults).to_parquet(fault_target, index=False)
    return PartSummary(rows=len(frame), counts=cl.counts(), rates=item_rates(cl), faults=len(faults), file=name,
                       sha256=_sha(target), faults_sha256=_sha(fault_target))


def _check_parts_folder(folder: Path, overwrite: bool) -> None:
    """Refuse a folder that is not a parts folder of ours, or one of ours without ``overwrite``."""
    if not folder.exists():
        return
    if not folder.is_dir():
        raise SkipwiseError(Problem(code=ProblemCode.OUTPUT_EXISTS, category=Category.USAGE, file=str(folder),
                                    message="the output is a file, and the dask engine writes a folder of parts",
                                    hint="name a new folder"))
    present = sorted(p.name for p in folder.iterdir())
    if not present:
        return
    if PART_MANIFEST not in present:
        raise SkipwiseError(Problem(code=ProblemCode.OUTPUT_EXISTS, category=Category.USAGE, file=str(folder),
                                    message=f"the folder is not empty and holds no {PART_MANIFEST}, so it is not a "
                                            "skipwise parts folder; nothing in it is moved or replaced",
                                    hint="name a new or empty folder"))
    if not overwrite:
        raise SkipwiseError(Problem(code=ProblemCode.OUTPUT_EXISTS, category=Category.USAGE, file=str(folder),
                                    message="output folder already exists",
                                    hint="choose another name or pass --overwrite to replace it"))


def classify_on_cluster(source: str | Path, q, out: Path, *, client, overwrite: bool = False,
                        partition_rows: int = DEFAULT_PARTITION_ROWS, parts: list[Part] | None = None,
                        progress: Callable[[int], None] | None = None) -> DaskClassification:
    """Classify every partition of ``source`` on the cluster behind ``client`` into the folder ``out``.

    ``parts`` (default: :func:`~skipwise.scale.sources.parquet_parts` of ``source``) fixes the
    partitions; ``progress`` is called with the rows of each partition as it finishes.

    Raises
    ------
    SkipwiseError
        For unreadable or inconsistent input parts, an output in the way, or a
        questionnaire that does not fit the data (its columns are checked on the
        first partition before any work is sent out).
    """
    from distributed import as_completed

    from skipwise.classify import check_columns
    from skipwise.publish import PackagePublisher

    out = Path(out)
    faults_out = faults_folder(out)
    parts = parquet_parts(source, partition_rows) if parts is None else parts
    check_columns(read_part(Part(parts[0].path, parts[0].row_groups[:1], 0)), q)
    for folder in (out, faults_out):
        _check_parts_folder(folder, overwrite)
    with PackagePublisher(faults_out) as fpub, PackagePublisher(out) as dpub:
        q_future = client.scatter(q, broadcast=True)
        futures = [client.submit(classify_part, p, q_future, str(dpub.staging), str(fpub.staging), i,
                                 key=f"skipwise-classify-{i}-{id(parts)}", pure=False)
                   for i, p in enumerate(parts)]
        summaries: dict[int, PartSummary] = {}
        index = {f.key: i for i, f in enumerate(futures)}
        for fut in as_completed(futures):
            summaries[index[fut.key]] = fut.result()  # a worker's SkipwiseError is raised here, as itself
            if progress is not None:
                progress(summaries[index[fut.key]].rows)
        ordered = [summaries[i] for i in range(len(parts))]
        for pub, key in ((dpub, "sha256"), (fpub, "faults_sha256")):
            listing = {"tool": "skipwise classify --engine dask", "source": str(source),
                       "outputs": [{"file": s.file, "rows": s.rows, "sha256": getattr(s, key)} for s in ordered]}
            (pub.staging / PART_MANIFEST).write_text(json.dumps(listing, indent=2), encoding="utf-8")
        fpub.publish()
        dpub.publish()
    counts = ordered[0].counts
    rates = ordered[0].rates
    for s in ordered[1:]:
        counts = counts.add(s.counts, fill_value=0)
        rates = rates + s.rates
    return DaskClassification(rows=sum(s.rows for s in ordered), counts=counts.astype("int64"), rates=rates,
                              faults=sum(s.faults for s in ordered), parts=tuple(s.file for s in ordered))
