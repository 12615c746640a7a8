"""The engine options shared by the commands that can run on a cluster (DESIGN: files larger than memory)."""

from __future__ import annotations

from enum import Enum
from pathlib import Path
from typing import Optional

import typer

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError

__all__ = ["Engine", "ENGINE_HELP", "SCHEDULER_HELP", "PARTITION_HELP", "classify_with_dask"]


class Engine(str, Enum):
    MEMORY = "memory"
    DASK = "dask"


ENGINE_HELP = ("'memory' (default): read the whole file into memory. 'dask': classify partitions on a Dask "
               "cluster; DATA may be a Parquet file, a folder or a glob of Parquet files, and OUT names a folder "
               "that receives one Parquet part per input partition (plus OUT_faults/).")
SCHEDULER_HELP = ("Address of a running Dask scheduler (e.g. tcp://10.0.0.5:8786); default: $SKIPWISE_SCHEDULER, "
                  "else a local cluster on this machine, started and stopped by the command.")
PARTITION_HELP = "Rows per partition at most, where a file's row groups allow splitting it (dask engine)."


def _usage(message: str, hint: str, path: Path | None = None) -> SkipwiseError:
    return SkipwiseError(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE,
                                 file=str(path) if path else None, message=message, hint=hint))


def classify_with_dask(data: Path, questionnaire: Path, out: Path, *, form: str, scheduler: Optional[str],
                       partition_rows: int, overwrite: bool) -> None:
    """``skipwise classify --engine dask``: parts in, parts out, counts printed."""
    from skipwise.questionnaire import load_questionnaire
    from skipwise.scale import dask_client
    from skipwise.scale.classify import classify_on_cluster, faults_folder
    from skipwise.scale.sources import parquet_parts

    if out.suffix.lower() in (".sav", ".zsav", ".dta", ".xlsx"):
        raise _usage(f"the dask engine writes Parquet parts into a folder, not a {out.suffix} file",
                     "name a folder for OUT (e.g. -o classified/), or use --engine memory for a single file", out)
    if out.suffix:
        raise _usage("with the dask engine OUT names a folder (it receives one Parquet part per partition)",
                     "leave out the suffix, e.g. -o classified", out)
    if form != "columns":
        raise _usage("the dask engine writes the columns form only", "leave out --form, or use --engine memory")
    q = load_questionnaire(questionnaire)
    parts = parquet_parts(data, partition_rows)
    with dask_client(scheduler) as client:
        with typer.progressbar(length=max(sum(p.rows for p in parts), 1), label="    classifying") as bar:
            res = classify_on_cluster(data, q, out, client=client, overwrite=overwrite, parts=parts,
                                      progress=bar.update)
    shares = res.counts.sum(axis=0)
    total = max(int(shares.sum()), 1)
    typer.echo(f"classified {res.rows:,} cases x {len(q.items)} items in {len(res.parts):,} partitions")
    for status, count in shares.items():
        if count:
            typer.echo(f"  {status:<14} {int(count):>10,}  {100 * count / total:6.2f}%")
    typer.echo(f"wrote {out}/ ({len(res.parts):,} parts)")
    typer.echo(f"wrote {faults_folder(out)}/ ({res.faults:,} routing faults; it lists case ids)")
