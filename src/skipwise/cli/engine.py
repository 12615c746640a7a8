"""The engine options shared by the commands that can run on a cluster (docs/scale.md)."""

from __future__ import annotations

import contextlib
import sys
from enum import Enum
from pathlib import Path
from typing import Optional

import typer

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError

__all__ = ["Engine", "PartFormat", "ENGINE_HELP", "SCHEDULER_HELP", "PARTITION_HELP", "PARTS_HELP", "classify_with_dask",
           "choose_engine", "dask_parts", "memory_budget", "data_size", "report_with_dask",
           "check_with_dask"]


class Engine(str, Enum):
    MEMORY = "memory"
    DASK = "dask"
    AUTO = "auto"


class PartFormat(str, Enum):
    PARQUET = "parquet"
    CSV = "csv"


ENGINE_HELP = ("'memory' (default): read the whole file into memory. 'dask': work on partitions on a Dask "
               "cluster; DATA may be a Parquet file, a folder or a glob of Parquet files, or one .sav, .zsav, "
               ".dta, .sas7bdat or .csv file (converted to Parquet parts in one pass first). 'auto': dask when "
               "the file would not fit the memory budget ($SKIPWISE_MEMORY_BUDGET, default: the memory "
               "available) and the output allows it; it says so, and never changes the form of the output (a "
               "folder or glob DATA goes to dask, and a folder OUT needs an explicit --engine dask).")
SCHEDULER_HELP = ("Address of a running Dask scheduler (e.g. tcp://10.0.0.5:8786); default: $SKIPWISE_SCHEDULER, "
                  "else a local cluster on this machine, started and stopped by the command.")
PARTITION_HELP = "Rows per partition at most, where a file's row groups allow splitting it (dask engine)."
PARTS_HELP = "Form of the parts of a folder OUT (dask engine): parquet (default) or csv."
#: Readable by the dask engine (besides Parquet files, folders and globs).
DASK_INPUTS = (".parquet", ".sav", ".zsav", ".dta", ".sas7bdat", ".csv")
#: Classification needs about this many times the data's in-memory size (measured on the demo's
#: tiled survey: reading, the status matrices and the written copy; no published source).
WORKING_FACTOR = 4


def _usage(message: str, hint: str, path: Path | None = None) -> SkipwiseError:
    return SkipwiseError(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE,
                                 file=str(path) if path else None, message=message, hint=hint))


def parse_bytes(text: str) -> int:
    """``"8GB"``, ``"512 MiB"`` or a number of bytes as bytes."""
    import re

    m = re.fullmatch(r"\s*([0-9.]+)\s*([kmgt]?)(i?b?)\s*", text.lower())
    if not m:
        raise _usage(f"memory budget {text!r} is not a size", "e.g. SKIPWISE_MEMORY_BUDGET=8GB")
    power = " kmgt".index(m.group(2) or " ")
    return int(float(m.group(1)) * (1024 if m.group(3).startswith("i") else 1000) ** power)


def memory_budget() -> int:
    """Bytes the in-memory engine may use: ``$SKIPWISE_MEMORY_BUDGET``, else the memory available now."""
    import os

    from skipwise.engine_spec import MEMORY_BUDGET_ENV

    if os.environ.get(MEMORY_BUDGET_ENV):
        return parse_bytes(os.environ[MEMORY_BUDGET_ENV])
    try:
        import psutil

        return int(psutil.virtual_memory().available)
    except ImportError:  # pragma: no cover - psutil comes with distributed
        return 1 << 62


def data_size(data: Path) -> int:
    """The data's in-memory size, estimated from the file's own header (8 bytes a cell)."""
    import glob as _glob

    text = str(data)
    if data.is_dir() or any(ch in text for ch in "*?["):
        files = sorted(data.glob("*.parquet")) if data.is_dir() else [Path(p) for p in _glob.glob(text)]
    else:
        files = [data]
    total = 0
    for f in files:
        suffix = f.suffix.lower()
        try:
            if suffix == ".parquet":
                import pyarrow.parquet as pq

                md = pq.ParquetFile(f).metadata
                total += md.num_rows * md.num_columns * 8
                continue
            if suffix in (".sav", ".zsav", ".dta"):
                import pyreadstat

                reader = pyreadstat.read_dta if suffix == ".dta" else pyreadstat.read_sav
                _, m = reader(str(f), metadataonly=True)
                if m.number_rows:
                    total += m.number_rows * m.number_columns * 8
                    continue
        except Exception:  # an unreadable header: the command's own reader says what is wrong
            pass
        total += 2 * f.stat().st_size if f.exists() else 0  # text and compressed files: about twice their size
    return total


def choose_engine(engine: Engine, data: Path, *, output_allows: bool, echo) -> Engine:
    """``--engine auto``: dask when the data would not fit the memory budget and the output allows it."""
    if engine is not Engine.AUTO:
        return engine
    readable = data.is_dir() or any(ch in str(data) for ch in "*?[") or data.suffix.lower() in DASK_INPUTS
    if data.is_dir() or any(ch in str(data) for ch in "*?["):
        if not output_allows:  # only the dask engine reads parts, and its output here is a folder
            raise _usage("--engine auto never changes the form of the output (DESIGN section 7): DATA is a folder "
                         "or glob of parts, which only the dask engine reads, and the output asked for is a "
                         "folder of parts (or a form the dask engine does not write)",
                         "pass --engine dask to write a folder of parts, or name a .parquet or .csv OUT", data)
        echo("--engine auto: DATA is a folder or a glob of parts; using the dask engine")
        return Engine.DASK
    need, budget = WORKING_FACTOR * data_size(data), memory_budget()
    if need <= budget:
        return Engine.MEMORY
    if not (output_allows and readable):
        echo(f"--engine auto: the data needs about {need / 1e9:,.1f} GB in memory (budget {budget / 1e9:,.1f} GB), "
             "but the input or the output is one the dask engine does not handle; using the in-memory engine")
        return Engine.MEMORY
    echo(f"--engine auto: the data needs about {need / 1e9:,.1f} GB in memory, more than the budget of "
         f"{budget / 1e9:,.1f} GB; using the dask engine (partitions on a Dask cluster)")
    return Engine.DASK


@contextlib.contextmanager
def dask_parts(data: Path, out: Path, partition_rows: int):
    """The partitions of DATA: its Parquet parts, or a conversion's (with the whole file's metadata and types).

    Yields ``(parts, meta, dtypes)``; a conversion's scratch folder is removed at the end.
    """
    from skipwise.scale.convert import convert_to_parts, needs_conversion, sav_compression, scratch_folder
    from skipwise.scale.sources import parquet_dtypes, parquet_parts

    if not needs_conversion(data):
        parts = parquet_parts(data, partition_rows)
        yield parts, None, parquet_dtypes(parts)  # the whole data's types in every partition
        return
    with scratch_folder(out) as scratch:
        size = data.stat().st_size
        if sav_compression(data):
            # pyreadstat enters a compressed file at an offset by decompressing it from the start
            typer.echo(f"converting {data.name} ({size / 1e6:,.1f} MB) to Parquet parts of {partition_rows:,} rows "
                       "in one pass; the file is compressed, so each chunk is decompressed from the start of the "
                       "file (the extra work grows with the square of the number of chunks: a larger "
                       "--partition-rows makes fewer)", err=True)
        elif data.suffix.lower() == ".sas7bdat":
            # measured in docs/scale.md: each chunk costs more the larger the file (benchmarks/bench_chunk_reread.py)
            typer.echo(f"converting {data.name} ({size / 1e6:,.1f} MB) to Parquet parts of {partition_rows:,} rows "
                       "in one pass; pyreadstat enters each chunk of a .sas7bdat at a cost that grows with the file "
                       "(the extra work grows with the square of the number of chunks: a larger --partition-rows "
                       "makes fewer)", err=True)
        else:
            typer.echo(f"converting {data.name} ({size / 1e6:,.1f} MB) to Parquet parts of {partition_rows:,} rows "
                       "(one pass; the file is read once)", err=True)
        done = [0]

        def tick(rows: int) -> None:
            done[0] += rows
            typer.echo(f"    converted {done[0]:,} rows", err=True)

        conv = convert_to_parts(data, scratch, partition_rows=partition_rows, progress=tick)
        yield conv.parts, conv.meta, conv.dtypes


def classify_with_dask(data: Path, questionnaire: Path, out: Path, *, form: str, scheduler: Optional[str],
                       partition_rows: int, overwrite: bool, parts_form: str = "parquet") -> None:
    """``skipwise classify --engine dask``: partitions in, parts (or one Parquet/CSV file) out, counts printed."""
    from skipwise.questionnaire import load_questionnaire
    from skipwise.scale import dask_client
    from skipwise.scale.classify import classify_on_cluster, faults_folder

    suffix = out.suffix.lower()
    if suffix in (".sav", ".zsav", ".dta", ".xlsx", ".sas7bdat", ".xpt"):
        raise _usage(f"the dask engine writes Parquet or CSV only, not a {out.suffix} file",
                     "name a folder for OUT (e.g. -o classified/), a .parquet or .csv file, or use --engine "
                     "memory for a single file of this format", out)
    if suffix and suffix not in (".parquet", ".csv"):
        raise _usage("with the dask engine OUT names a folder (it receives one part per partition), a .parquet "
                     "or a .csv file", "e.g. -o classified or -o classified.parquet", out)
    if form != "columns":
        raise _usage("the dask engine writes the columns form only", "leave out --form, or use --engine memory")
    q = load_questionnaire(questionnaire)
    with dask_parts(data, out, partition_rows) as (parts, meta, dtypes):
        with dask_client(scheduler) as client:
            with typer.progressbar(length=max(sum(p.rows for p in parts), 1), label="    classifying") as bar:
                res = classify_on_cluster(data, q, out, client=client, overwrite=overwrite, parts=parts, meta=meta,
                                          dtypes=dtypes, part_format=parts_form, progress=bar.update)
    shares = res.counts.sum(axis=0)
    total = max(int(shares.sum()), 1)
    typer.echo(f"classified {res.rows:,} cases x {len(q.items)} items in {len(parts):,} partitions")
    for status, count in shares.items():
        if count:
            typer.echo(f"  {status:<14} {int(count):>10,}  {100 * count / total:6.2f}%")
    from skipwise.classify.hints import invalid_hint_of_counts

    hint = invalid_hint_of_counts(res.counts, data=str(data), questionnaire=str(questionnaire))
    if hint:  # from the merged counts: the text the in-memory engine prints for the whole file
        typer.echo(hint)
    if suffix:
        from skipwise.classify.export import faults_path

        typer.echo(f"wrote {out}")
        typer.echo(f"wrote {faults_path(out)} ({res.faults:,} routing faults; it lists case ids)")
        return
    typer.echo(f"wrote {out}/ ({len(res.parts):,} parts)")
    typer.echo(f"wrote {faults_folder(out)}/ ({res.faults:,} routing faults; it lists case ids)")


def report_with_dask(data: Path, questionnaire: Path, out: Path, *, scheduler: Optional[str], partition_rows: int,
                     overwrite: bool, **options) -> None:
    """``skipwise report --engine dask``: the workbook from counts merged on the client."""
    from skipwise.io.atomic import check_writable
    from skipwise.questionnaire import load_questionnaire
    from skipwise.rates import worst_lines
    from skipwise.scale import dask_client
    from skipwise.scale.report import report_on_cluster

    check_writable(out, overwrite=overwrite, inputs=[data] if data.is_file() else [])
    q = load_questionnaire(questionnaire)
    with dask_parts(data, out, partition_rows) as (parts, meta, dtypes):
        with dask_client(scheduler) as client:
            with typer.progressbar(length=max(sum(p.rows for p in parts), 1), label="    counting") as bar:
                res = report_on_cluster(parts, q, out, client=client, meta=meta, dtypes=dtypes, input_path=data,
                                        overwrite=overwrite, progress=bar.update, **options)
    first = res.counts
    typer.echo(f"{first.n:,} cases x {len(q.items)} items in {res.partitions:,} partitions")
    weighted = first.wcounts is not None
    rates = first.rates.with_min_base(options.get("min_base", 30))
    typer.echo("highest item nonresponse rates" + (" (weighted)" if weighted else "") + ":")
    for line in worst_lines(rates, weighted=weighted):
        typer.echo(line)
    typer.echo(f"wrote {res.path}" + ("" if not options.get("case_ids", True) else
                                      " (its Routing faults sheet lists case ids)"))


def check_with_dask(data: Path, q, *, scheduler: Optional[str], partition_rows: int, top: int):
    """``skipwise check --engine dask``: the findings from counts merged on the client."""
    from skipwise.scale import dask_client
    from skipwise.scale.check import check_on_cluster

    scratch_beside = data if data.is_file() else data / "x"
    with dask_parts(data, scratch_beside, partition_rows) as (parts, meta, dtypes):
        with dask_client(scheduler) as client:
            with typer.progressbar(length=max(sum(p.rows for p in parts), 1), label="    checking",
                                   file=sys.stderr) as bar:
                return check_on_cluster(parts, q, client=client, meta=meta, dtypes=dtypes, top=top,
                                        progress=bar.update)
