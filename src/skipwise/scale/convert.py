"""SPSS, Stata, SAS and CSV files as Parquet parts: one sequential streaming pass before the cluster works.

A compressed ``.sav`` cannot be read cheaply from an offset, and a CSV's rows
cannot be found without reading the text before them, so the client reads the
file once from start to end in chunks of ``partition_rows`` rows
(``pyreadstat.read_file_in_chunks`` for SPSS, Stata and SAS; ``pandas.read_csv``
with ``chunksize`` for CSV) and writes each chunk as one Parquet part into a
scratch folder.  Each chunk is finished exactly as :func:`skipwise.io.read_survey`
finishes a whole file (codes kept as stored, blank text as missing, Stata and
SAS letters as ``".a"``), so a partition holds the rows the in-memory engine
would hold.

What only the whole file knows is gathered on the way and shipped to the
workers once: the file's metadata (labels and missing-value definitions,
including every Stata letter used anywhere) and the one type of each column
(a column that holds text in any chunk is text in every partition; whole
numbers in one chunk and decimals in another are decimals everywhere, as the
whole file reads).  The client holds one chunk at a time.
"""

from __future__ import annotations

import contextlib
import shutil
import tempfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Iterator

import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError
from skipwise.io.meta import SurveyMeta
from skipwise.publish import clean_message
from skipwise.scale.sources import Part, parquet_parts

__all__ = ["CONVERTED_FORMATS", "Converted", "convert_to_parts", "needs_conversion", "scratch_folder", "harmonize",
           "sav_compression"]

#: Input formats the dask engine converts to Parquet parts first.
CONVERTED_FORMATS = {".sav": "sav", ".zsav": "zsav", ".dta": "dta", ".sas7bdat": "sas7bdat", ".csv": "csv"}


@dataclass(frozen=True, kw_only=True)
class Converted:
    """Parts written by :func:`convert_to_parts` and what the workers need with them."""

    parts: list[Part]
    meta: SurveyMeta
    dtypes: dict[str, str] = field(default_factory=dict)   # column -> the one type of every partition
    rows: int = 0


def needs_conversion(path: str | Path) -> bool:
    """Whether the dask engine reads ``path`` through a conversion to Parquet parts first."""
    return Path(str(path)).suffix.lower() in CONVERTED_FORMATS and Path(str(path)).is_file()


def sav_compression(path: str | Path) -> int:
    """The compression an SPSS file's header declares: 0 none, 1 bytecode (.sav), 2 zlib (.zsav); 0 for others.

    pyreadstat reads a chunk at an offset by decompressing the file from its start up to the offset
    (only an uncompressed file is entered by a seek), so converting a compressed file in chunks decompresses
    its first rows again for every chunk.  The header's layout code (2 or 3, at byte 64) tells the byte
    order; the compression code is the 32-bit integer at byte 72.
    """
    path = Path(path)
    if path.suffix.lower() not in (".sav", ".zsav"):
        return 0
    with open(path, "rb") as f:
        head = f.read(76)
    if len(head) < 76 or head[:4] not in (b"$FL2", b"$FL3"):
        return 0
    order = "<" if int.from_bytes(head[64:68], "little") in (2, 3) else ">"
    import struct

    return int(struct.unpack(order + "i", head[72:76])[0])


@contextlib.contextmanager
def scratch_folder(beside: Path) -> Iterator[Path]:
    """A hidden scratch folder beside ``beside`` (on the same, shared file system), removed at the end."""
    parent = Path(beside).resolve().parent
    folder = Path(tempfile.mkdtemp(prefix=".skipwise-parts-", dir=parent))
    try:
        yield folder
    finally:
        shutil.rmtree(folder, ignore_errors=True)


def _widest(old: str | None, new: str) -> str:
    """The type a column has in the whole file, from the types of two chunks of it."""
    if old is None or old == new:
        return new
    if "object" in (old, new):
        return "object"
    numeric = {"int64", "int32", "int16", "int8", "float64", "float32", "bool"}
    if old in numeric and new in numeric:
        return "float64"
    return "object"


def harmonize(frame: pd.DataFrame, dtypes: dict[str, str]) -> pd.DataFrame:
    """Give a partition's columns the whole file's types (see the module docstring)."""
    for col, dtype in dtypes.items():
        if col in frame.columns and str(frame[col].dtype) != dtype:
            frame[col] = frame[col].astype(dtype)
    return frame


def _readstat_chunks(path: Path, fmt: str, rows: int, encoding: str | None) -> Iterator[pd.DataFrame]:
    import pyreadstat

    from skipwise.io.readers import readstat_frame
    from skipwise.io.readers_sas import sas_frame

    if fmt == "sas7bdat":
        reader, opts = pyreadstat.read_sas7bdat, dict(user_missing=True, dates_as_pandas_datetime=True)
    else:
        reader = pyreadstat.read_dta if fmt == "dta" else pyreadstat.read_sav
        opts = dict(user_missing=True, apply_value_formats=False, dates_as_pandas_datetime=True)
    what = {"sas7bdat": "SAS data set (.sas7bdat)", "dta": "Stata file"}.get(fmt, "SPSS file")
    try:
        for df, m in pyreadstat.read_file_in_chunks(reader, str(path), chunksize=rows, encoding=encoding, **opts):
            yield (sas_frame(df, m, fmt, encoding, path) if fmt == "sas7bdat" else
                   readstat_frame(df, m, fmt, encoding))
    except (pyreadstat.ReadstatError, pyreadstat.PyreadstatError, OSError, ValueError, OverflowError) as exc:
        raise SkipwiseError(Problem(code=ProblemCode.FILE_UNREADABLE, category=Category.DATA, file=str(path),
                                    message=f"not a readable {what}: it may be truncated or corrupt "
                                            f"({clean_message(exc)})",
                                    hint="check the file was copied completely")) from None


def _csv_chunks(path: Path, rows: int, encoding: str | None) -> Iterator[pd.DataFrame]:
    from skipwise.io.meta import set_meta

    _header_checks(path, encoding)
    opts = dict(encoding=encoding or "utf-8-sig", keep_default_na=False, na_values=[""])
    try:
        for chunk in pd.read_csv(path, chunksize=rows, **opts):
            yield set_meta(chunk, SurveyMeta(source_format="csv", encoding=encoding or "utf-8"))
    except (UnicodeDecodeError, pd.errors.ParserError, ValueError) as exc:
        raise SkipwiseError(Problem(code=ProblemCode.FILE_UNREADABLE, category=Category.DATA, file=str(path),
                                    message=f"not a readable CSV file ({clean_message(exc)})",
                                    hint="save or export the file as UTF-8 text")) from None


def _header_checks(path: Path, encoding: str | None) -> None:
    """The in-memory reader's checks (encoding, empty file, a column named twice) on the first rows only."""
    import itertools

    from skipwise.io.readers import read_survey

    with tempfile.TemporaryDirectory() as tmp:
        probe = Path(tmp) / path.name
        with open(path, "rb") as src, open(probe, "wb") as dst:
            dst.writelines(itertools.islice(src, 2))
        read_survey(probe, encoding=encoding)


def convert_to_parts(path: str | Path, folder: Path, *, partition_rows: int, encoding: str | None = None,
                     progress: Callable[[int], None] | None = None) -> Converted:
    """Write ``path`` as Parquet parts of at most ``partition_rows`` rows into ``folder``, in one pass.

    Parameters
    ----------
    path
        A ``.sav``, ``.zsav``, ``.dta``, ``.sas7bdat`` or ``.csv`` file (never modified).
    folder
        An empty scratch folder (see :func:`scratch_folder`).
    partition_rows
        Rows per chunk and part.
    progress
        Called with the rows of each chunk as it is written.

    Returns
    -------
    Converted
        The parts (one per chunk, in file order), the whole file's metadata and column types.
    """
    from skipwise.io import get_meta, write_survey

    path = Path(path)
    if not path.is_file():
        raise SkipwiseError(Problem(code=ProblemCode.FILE_NOT_FOUND, category=Category.USAGE, file=str(path),
                                    message="file not found", hint="check the path and the working directory"))
    fmt = CONVERTED_FORMATS[path.suffix.lower()]
    chunks = _csv_chunks(path, partition_rows, encoding) if fmt == "csv" else \
        _readstat_chunks(path, fmt, partition_rows, encoding)
    meta: SurveyMeta | None = None
    dtypes: dict[str, str] = {}
    rows = 0
    for i, chunk in enumerate(chunks):
        part_meta = get_meta(chunk)
        if meta is None:
            meta = part_meta.copy()
        elif fmt in ("dta", "sas7bdat"):  # Stata and SAS letters: the ones used in any chunk
            for col, values in part_meta.missing_values.items():
                meta.missing_values[col] = sorted(set(meta.missing_values.get(col, [])) | set(values))
        for col in chunk.columns:
            dtypes[col] = _widest(dtypes.get(col), str(chunk[col].dtype))
        write_survey(chunk, folder / f"chunk-{i:05d}.parquet", part_meta, overwrite=True)
        rows += len(chunk)
        if progress is not None:
            progress(len(chunk))
    if meta is None:  # pragma: no cover - pyreadstat yields one (empty) chunk for an empty file
        raise SkipwiseError(Problem(code=ProblemCode.FILE_UNREADABLE, category=Category.DATA, file=str(path),
                                    message="the file holds no rows", hint="re-export the data"))
    return Converted(parts=parquet_parts(folder, partition_rows), meta=meta, dtypes=dtypes, rows=rows)
