"""Input partitions for the dask engine: Parquet files, folders and globs, split by row groups.

A partition is a file and a run of its row groups, fixed by the input alone (not
by the number of workers), so results never depend on the cluster.  Every
partition is read as :func:`skipwise.io.read_survey` reads a whole file (codes
as stored, labels from the file's skipwise metadata).
"""

from __future__ import annotations

import glob
from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from skipwise.engine_spec import DEFAULT_PARTITION_ROWS  # rows a partition holds at most
from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError
from skipwise.publish import clean_message

__all__ = ["Part", "parquet_parts", "parquet_dtypes", "read_part", "DEFAULT_PARTITION_ROWS"]



@dataclass(frozen=True)
class Part:
    """One partition: a Parquet file and the row groups of it that belong to this partition."""

    path: str
    row_groups: tuple[int, ...]
    rows: int


def _files(source: str | Path) -> list[Path]:
    text = str(source)
    path = Path(text)
    if path.is_dir():
        files = sorted(p for p in path.iterdir() if p.suffix.lower() == ".parquet" and not p.name.startswith("."))
    elif any(ch in text for ch in "*?["):
        files = sorted(Path(p) for p in glob.glob(text) if p.lower().endswith(".parquet"))
    elif path.is_file():
        files = [path]
    else:
        raise SkipwiseError(Problem(code=ProblemCode.FILE_NOT_FOUND, category=Category.USAGE, file=text,
                                    message="no such file or folder", hint="check the path"))
    if not files:
        raise SkipwiseError(Problem(code=ProblemCode.FILE_NOT_FOUND, category=Category.USAGE, file=text,
                                    message="no Parquet files (.parquet) found",
                                    hint="the dask engine reads a Parquet file, a folder of them or a glob"))
    bad = [f for f in files if f.suffix.lower() != ".parquet"]
    if bad:
        raise SkipwiseError(Problem(code=ProblemCode.FILE_FORMAT, category=Category.USAGE, file=str(bad[0]),
                                    message="the dask engine reads Parquet files, folders and globs of them, and "
                                            "one .sav, .zsav, .dta, .sas7bdat or .csv file",
                                    hint="convert the file to Parquet first (skipwise writes .parquet), "
                                         "or use the in-memory engine"))
    return files


def parquet_parts(source: str | Path, partition_rows: int = DEFAULT_PARTITION_ROWS) -> list[Part]:
    """The partitions of a Parquet file, folder or glob, in file order; every file must have the same columns."""
    import pyarrow
    import pyarrow.parquet as pq

    parts: list[Part] = []
    names: list[str] | None = None
    for f in _files(source):
        try:
            info = pq.ParquetFile(f)
        except (pyarrow.ArrowException, OSError) as exc:
            raise SkipwiseError(Problem(code=ProblemCode.FILE_UNREADABLE, category=Category.DATA, file=str(f),
                                        message=f"not a readable Parquet file ({clean_message(exc)})",
                                        hint="check the file was copied completely")) from None
        cols = list(info.schema_arrow.names)
        if names is None:
            names = cols
        elif cols != names:
            raise SkipwiseError(Problem(code=ProblemCode.BAD_DATA, category=Category.DATA, file=str(f),
                                        message="its columns differ from the first file's",
                                        hint="every part of a folder must hold the same columns in the same order"))
        groups: list[int] = []
        rows = 0
        for g in range(info.num_row_groups):
            n = info.metadata.row_group(g).num_rows
            if groups and rows + n > partition_rows:
                parts.append(Part(str(f), tuple(groups), rows))
                groups, rows = [], 0
            groups.append(g)
            rows += n
        if groups or info.num_row_groups == 0:
            parts.append(Part(str(f), tuple(groups), rows))
    return parts


def parquet_dtypes(parts: list[Part]) -> dict[str, str] | None:
    """The pandas types the whole data would have, where a partition read alone would differ.

    pyarrow gives an integer column holding a blank anywhere as float64 and a boolean one as
    object, but as int64 (bool) in a partition without blanks: the in-memory engine reads the
    whole file, so every partition is given the whole data's type (:func:`read_part`).  Blanks
    are counted from the row groups' statistics, else by reading that one column.  None: no
    column differs.
    """
    import pyarrow as pa
    import pyarrow.parquet as pq

    blanks: dict[str, bool] = {}
    kinds: dict[str, str] = {}
    for path in dict.fromkeys(p.path for p in parts):
        pf = pq.ParquetFile(path)
        schema = pf.schema_arrow
        for j, field in enumerate(schema):
            if not (pa.types.is_integer(field.type) or pa.types.is_boolean(field.type)) or blanks.get(field.name):
                continue
            kinds[field.name] = "object" if pa.types.is_boolean(field.type) else "float64"
            known = True
            for g in range(pf.num_row_groups):
                stats = pf.metadata.row_group(g).column(j).statistics
                if stats is None or not stats.has_null_count:
                    known = False
                    break
                if stats.null_count:
                    blanks[field.name] = True
                    break
            if not known and not blanks.get(field.name):
                blanks[field.name] = pf.read(columns=[field.name]).column(0).null_count > 0
    out = {c: kinds[c] for c, b in blanks.items() if b}
    return out or None


def read_part(part: Part, meta=None, dtypes: dict[str, str] | None = None) -> pd.DataFrame:
    """One partition as a DataFrame with its survey metadata (as read_survey gives a whole file).

    ``meta`` and ``dtypes`` (the whole file's metadata and column types, see
    :mod:`skipwise.scale.convert`) replace what the part itself records.
    """
    import pyarrow.parquet as pq

    from skipwise.io.meta import set_meta
    from skipwise.io.readers import parquet_frame

    pf = pq.ParquetFile(part.path)
    table = pf.read_row_groups(list(part.row_groups)) if part.row_groups else pf.schema_arrow.empty_table()
    frame = parquet_frame(table, Path(part.path))
    if dtypes:
        from skipwise.scale.convert import harmonize

        frame = harmonize(frame, dtypes)
    if meta is not None:
        set_meta(frame, meta.subset(frame.columns))
    return frame
