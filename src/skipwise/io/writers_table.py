"""Long listings written as CSV column by column: the same bytes as ``DataFrame.to_csv``, without a
Python pass per cell.

``DataFrame.to_csv`` hands every cell to the :mod:`csv` module one at a time; a fault listing of
tens of millions of rows spends most of a run there.  :func:`write_csv_frames` builds each column's
text at once instead: numbers with numpy / Arrow, text columns once per *distinct* value (the
:mod:`csv` module itself quotes each distinct text, so quoting follows its rules exactly), the
rows joined by Arrow.  Several frames (parts of one listing) are written one after another under
one header, so a listing never has to be held whole in memory.

The bytes are those of ``pd.concat(frames).to_csv(path, index=False)`` with pandas' defaults
(utf-8, ``,``, minimal quoting, ``\\n`` line ends, missing cells empty).  A column of a type not
handled here (dates, categories, mixed objects) makes that part go through pandas itself.
"""

from __future__ import annotations

import csv
import io
from pathlib import Path
from typing import Iterable

import numpy as np
import pandas as pd

__all__ = ["write_csv_frames"]

#: Rows turned into text at once (bounds the memory of one step, about 100 bytes a row).
ROWS_PER_STEP = 500_000


def write_csv_frames(frames: Iterable[pd.DataFrame], path: str | Path, columns: list[str]) -> int:
    """Write the rows of ``frames`` (each with ``columns``) under one header; return the row count.

    Parameters
    ----------
    frames
        Parts of one listing, in order; every part has the columns ``columns`` (in that order).
    path
        The file to write (a publisher's temporary file; it is created or replaced).
    columns
        The header, used as well when ``frames`` yields nothing.
    """
    rows = 0
    with open(path, "wb") as fh:
        fh.write(_csv_line([str(c) for c in columns]).encode("utf-8"))
        for frame in frames:
            for start in range(0, len(frame), ROWS_PER_STEP):
                part = frame.iloc[start:start + ROWS_PER_STEP]
                fh.write(_rows_bytes(part))
                rows += len(part)
    return rows


def _csv_line(fields: list[object]) -> str:
    buf = io.StringIO()
    csv.writer(buf, lineterminator="\n").writerow(fields)
    return buf.getvalue()


def _rows_bytes(frame: pd.DataFrame) -> bytes | memoryview:
    import pyarrow as pa
    import pyarrow.compute as pc

    if frame.shape[1] < 2:  # the csv module quotes a lone empty field: leave that case to pandas
        return _by_pandas(frame)
    texts = []
    for k in range(frame.shape[1]):
        text = _field_texts(frame.iloc[:, k])
        if text is None:
            return _by_pandas(frame)
        texts.append(text)
    def text(v: str):
        return pa.scalar(v, pa.large_string())

    texts[-1] = pc.binary_join_element_wise(texts[-1], text(""), text("\n"))
    joined = pc.binary_join_element_wise(*texts, text(","))
    offsets = np.frombuffer(joined.buffers()[1], dtype=np.int64)[joined.offset:joined.offset + len(joined) + 1]
    return memoryview(joined.buffers()[2])[int(offsets[0]):int(offsets[-1])]


def _by_pandas(frame: pd.DataFrame) -> bytes:
    return frame.to_csv(header=False, index=False, lineterminator="\n").encode("utf-8")


def _field_texts(s: pd.Series):
    """The column's CSV fields as an Arrow large_string array (no nulls), or None if not handled here.

    Each kind is turned into text as pandas' CSV writer does: floats by numpy's ``astype(str)``,
    whole numbers and booleans as Python prints them, missing cells empty.
    """
    import pyarrow as pa
    import pyarrow.compute as pc

    dtype = s.dtype
    n = len(s)
    if isinstance(dtype, np.dtype) and dtype.kind == "f":
        x = s.to_numpy()
        text = pa.array(x.astype(str), type=pa.large_string())
        miss = np.isnan(x)
        return pc.if_else(pa.array(miss), pa.scalar("", pa.large_string()), text) if miss.any() else text
    if isinstance(dtype, np.dtype) and dtype.kind in "iu":
        return pa.array(s.to_numpy()).cast(pa.large_string())
    if isinstance(dtype, np.dtype) and dtype.kind == "b":
        return pc.if_else(pa.array(s.to_numpy()), pa.scalar("True", pa.large_string()),
                          pa.scalar("False", pa.large_string()))
    if isinstance(dtype, pd.StringDtype) or dtype == object:
        try:
            arr = pa.array(s.array if isinstance(dtype, pd.StringDtype) else s.to_numpy(), from_pandas=True)
        except (pa.ArrowException, TypeError, ValueError):
            return None
        if isinstance(arr, pa.ChunkedArray):
            arr = arr.combine_chunks()
        if pa.types.is_null(arr.type):
            return pa.array(np.full(n, "", dtype=object), type=pa.large_string())
        if not (pa.types.is_string(arr.type) or pa.types.is_large_string(arr.type)):
            return None  # numbers or other objects in an object column: pandas' own str() of each
        coded = pc.dictionary_encode(arr)
        distinct = coded.dictionary.to_pylist()
        quoted = [_field(v) for v in distinct] + [""]  # the last one: missing cells
        codes = coded.indices.fill_null(len(distinct))
        return pa.array(quoted, type=pa.large_string()).take(codes)
    return None


_BUF = io.StringIO()
_WRITER = csv.writer(_BUF, lineterminator="\n")


def _field(text: str) -> str:
    """One text as the csv module writes it inside a row (quoted and doubled where it must be)."""
    _BUF.seek(0)
    _BUF.truncate()
    _WRITER.writerow([text, "x"])
    return _BUF.getvalue()[:-3]  # without ",x\n"
