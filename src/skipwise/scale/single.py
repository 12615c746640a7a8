"""A single ``.parquet`` or ``.csv`` OUT from the dask engine: parts joined by the client, one at a time.

The workers write their parts into a scratch folder beside OUT (as for a
folder OUT); the client then appends them in partition order to OUT's temporary
file — a Parquet file through :class:`pyarrow.parquet.ParquetWriter` (each part's
row groups become row groups of OUT), a CSV by copying the text after each
part's header — and the fault listing to ``OUT.faults.csv`` (as the in-memory engine names it).  Both
appear together or not at all (:func:`skipwise.publish.publish_files`).  The
client holds one part at a time, never the file.
"""

from __future__ import annotations

import shutil
from pathlib import Path
from typing import Callable

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError

__all__ = ["classify_to_one_file", "join_parquet", "join_csv"]


def join_parquet(parts: list[Path], target: Path) -> None:
    """Append Parquet ``parts`` (same columns) to one file; the first part's schema and metadata rule."""
    import pyarrow
    import pyarrow.parquet as pq

    writer = None
    try:
        for part in parts:
            table = pq.read_table(part)
            if writer is None:
                schema = table.schema
                writer = pq.ParquetWriter(target, schema)
            elif not table.schema.equals(schema, check_metadata=False):
                try:
                    table = table.cast(schema)
                except (pyarrow.ArrowInvalid, pyarrow.ArrowNotImplementedError, ValueError):
                    raise SkipwiseError(Problem(
                        code=ProblemCode.BAD_DATA, category=Category.DATA, file=str(part),
                        message="a column holds a different type of value in this partition than in the first, "
                                "and one Parquet file can hold one type per column",
                        hint="write a folder of parts instead (name a folder for OUT)")) from None
            else:
                table = table.replace_schema_metadata(schema.metadata)
            writer.write_table(table)
    finally:
        if writer is not None:
            writer.close()


def join_csv(parts: list[Path], target: Path) -> None:
    """Append CSV ``parts`` (same header) to one file, the header once."""
    with open(target, "wb") as dst:
        header = None
        for part in parts:
            with open(part, "rb") as src:
                first = src.readline()
                if header is None:
                    header = first
                    dst.write(first)
                elif first != header:
                    raise SkipwiseError(Problem(code=ProblemCode.BAD_DATA, category=Category.DATA, file=str(part),
                                                message="the partition's columns differ from the first one's",
                                                hint="every part must hold the same columns"))
                shutil.copyfileobj(src, dst, 1 << 20)


def classify_to_one_file(source, q, out: Path, *, client, overwrite: bool, parts, meta=None, dtypes=None,
                         progress: Callable[[int], None] | None = None):
    """Classify on the cluster into one ``.parquet`` or ``.csv`` file and its ``OUT.faults.csv``."""
    from skipwise.classify.export import faults_path
    from skipwise.publish import check_writable, publish_files
    from skipwise.scale.classify import merged, run_parts
    from skipwise.scale.convert import scratch_folder

    fault_file = faults_path(out)
    inputs = [Path(str(source))] if Path(str(source)).is_file() else []
    check_writable(out, overwrite=overwrite, inputs=inputs)
    check_writable(fault_file, overwrite=overwrite, inputs=inputs)
    form = out.suffix.lower().lstrip(".")
    with scratch_folder(out) as scratch:
        (scratch / "data").mkdir()
        (scratch / "faults").mkdir()
        # the fault parts as CSV whatever OUT is: they are joined into OUT.faults.csv
        ordered = run_parts(client, parts, q, scratch / "data", scratch / "faults", meta=meta, dtypes=dtypes,
                            part_format=form, fault_format="csv", progress=progress)
        data_parts = [scratch / "data" / s.file for s in ordered]
        fault_parts = [scratch / "faults" / s.faults_file for s in ordered]
        with publish_files([out, fault_file], overwrite=overwrite) as (tmp_out, tmp_faults):
            (join_parquet if form == "parquet" else join_csv)(data_parts, tmp_out)
            join_csv(fault_parts, tmp_faults)
    return merged(ordered, files=(out.name,))
