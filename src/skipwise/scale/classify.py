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
from skipwise.scale.sources import DEFAULT_PARTITION_ROWS, Part, parquet_dtypes, parquet_parts, read_part

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
    faults_file: str
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


def classify_part(part: Part, q, staging: str, faults_staging: str, index: int, meta=None,
                  dtypes: dict[str, str] | None = None, part_format: str = "parquet",
                  fault_format: str | None = None) -> PartSummary:
    """Classify one partition on a worker and write its two parts; returns counts only.

    The data part is what the in-memory engine writes for the whole file
    (``with_status_columns`` on the metadata ``delivery_meta`` gives), the fault
    part what it lists (``fault_listing``), for this partition's rows.
    """
    from skipwise.classify import classify
    from skipwise.classify.delivery import delivery_meta
    from skipwise.classify.export import fault_listing, with_status_columns
    from skipwise.io import get_meta, write_survey
    from skipwise.rates import item_rates

    frame = read_part(part, meta, dtypes)
    cl = classify(frame, q)
    result, out_meta = with_status_columns(frame, cl, delivery_meta(get_meta(frame), q, frame))
    name = f"part-{index:05d}.{part_format}"
    target = Path(staging) / name
    write_survey(result, target, out_meta, overwrite=True)
    fault_target = Path(faults_staging) / f"part-{index:05d}.{fault_format or part_format}"
    faults = fault_listing(cl)
    if (fault_format or part_format) == "csv":
        faults.to_csv(fault_target, index=False)
    else:
        _fault_part(faults).to_parquet(fault_target, index=False)
    return PartSummary(rows=len(frame), counts=cl.counts(), rates=item_rates(cl), faults=len(faults), file=name,
                       faults_file=fault_target.name,
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
                        meta=None, dtypes: dict[str, str] | None = None, part_format: str = "parquet",
                        progress: Callable[[int], None] | None = None) -> DaskClassification:
    """Classify every partition of ``source`` on the cluster behind ``client`` into ``out``.

    ``out`` is a folder (one part per partition, ``part_format`` ``parquet`` or ``csv``)
    or one ``.parquet`` or ``.csv`` file, which the client writes from the parts
    one part at a time (its fault listing is ``OUT.faults.csv``, as the in-memory engine names it).
    ``parts`` (default: :func:`~skipwise.scale.sources.parquet_parts` of ``source``) fixes the
    partitions; ``meta`` and ``dtypes`` are the whole file's metadata and column types when the
    parts were converted (:mod:`skipwise.scale.convert`), sent to the workers once; ``progress``
    is called with the rows of each partition as it finishes.

    Raises
    ------
    SkipwiseError
        For unreadable or inconsistent input parts, an output in the way, or a
        questionnaire that does not fit the data (its columns are checked on the
        first partition before any work is sent out).
    """
    from skipwise.classify import check_columns

    out = Path(out)
    if parts is None:
        parts = parquet_parts(source, partition_rows)
        dtypes = parquet_dtypes(parts) if dtypes is None and meta is None else dtypes
    check_columns(read_part(Part(parts[0].path, (), 0), meta, dtypes), q)  # the columns only: no rows read
    if out.suffix.lower() in (".parquet", ".csv"):
        from skipwise.scale.single import classify_to_one_file

        return classify_to_one_file(source, q, out, client=client, overwrite=overwrite, parts=parts, meta=meta,
                                    dtypes=dtypes, progress=progress)
    from skipwise.publish import PackagePublisher

    faults_out = faults_folder(out)
    for folder in (out, faults_out):
        _check_parts_folder(folder, overwrite)
    with PackagePublisher(faults_out) as fpub, PackagePublisher(out) as dpub:
        ordered = run_parts(client, parts, q, dpub.staging, fpub.staging, meta=meta, dtypes=dtypes,
                            part_format=part_format, progress=progress)
        for pub, key in ((dpub, "sha256"), (fpub, "faults_sha256")):
            listing = {"tool": "skipwise classify --engine dask", "source": str(source),
                       "outputs": [{"file": s.file if key == "sha256" else s.faults_file, "rows": s.rows,
                                    "sha256": getattr(s, key)} for s in ordered]}
            (pub.staging / PART_MANIFEST).write_text(json.dumps(listing, indent=2), encoding="utf-8")
        fpub.publish()
        dpub.publish()
    return merged(ordered)


def run_parts(client, parts: list[Part], q, staging: Path, faults_staging: Path, *, meta=None,
              dtypes: dict[str, str] | None = None, part_format: str = "parquet", fault_format: str | None = None,
              progress: Callable[[int], None] | None = None) -> list[PartSummary]:
    """One :func:`classify_part` task per partition; the summaries in partition order."""
    from distributed import as_completed

    # shipped to every worker once; random keys (hash=False): a run's next step scattering the same
    # questionnaire on the same cluster never meets the release of the last step's copy
    q_future, meta_future = client.scatter([q, meta], broadcast=True, hash=False)
    futures = [client.submit(classify_part, p, q_future, str(staging), str(faults_staging), i, meta_future,
                             dtypes, part_format, fault_format, key=f"skipwise-classify-{i}-{id(parts)}", pure=False)
               for i, p in enumerate(parts)]
    summaries: dict[int, PartSummary] = {}
    index = {f.key: i for i, f in enumerate(futures)}
    for fut in as_completed(futures):
        summaries[index[fut.key]] = fut.result()  # a worker's SkipwiseError is raised here, as itself
        if progress is not None:
            progress(summaries[index[fut.key]].rows)
    return [summaries[i] for i in range(len(parts))]


def merged(ordered: list[PartSummary], files: tuple[str, ...] | None = None) -> DaskClassification:
    """The partitions' counts added up (status counts and :class:`~skipwise.rates.ItemRates`)."""
    counts = ordered[0].counts
    rates = ordered[0].rates
    for s in ordered[1:]:
        counts = counts.add(s.counts, fill_value=0)
        rates = rates + s.rates
    return DaskClassification(rows=sum(s.rows for s in ordered), counts=counts.astype("int64"), rates=rates,
                              faults=sum(s.faults for s in ordered),
                              parts=files if files is not None else tuple(s.file for s in ordered))
