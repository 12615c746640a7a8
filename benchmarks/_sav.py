"""A fast writer of plain numeric .sav files, for benchmark inputs only (not part of skipwise).

pyreadstat writes a .sav cell by cell (about 120 s for 1,000,000 x 200 on the project's machine),
which is set-up time for a benchmark whose input is such a file.  An uncompressed .sav of numeric
columns is a dictionary followed by the cases as rows of little-endian doubles, the system-missing
value being -DBL_MAX (the system file layout as the PSPP developers' guide describes it, from
memory; what matters is that it is what ReadStat writes, which the check below proves).  So the file is written as pyreadstat's own header for a few
rows, its two case counts set to the frame's, then the frame's rows as raw doubles.  Before
writing, `write_numeric_sav` checks the method against pyreadstat on a small slice of the same
frame: the two files must be byte for byte equal (the header's date and time masked).
"""

from __future__ import annotations

import tempfile
from pathlib import Path

import numpy as np
import pandas as pd
import pyreadstat

_HEAD_ROWS = 1009                   # an unusual count, to find the header's case counts
_DATE = slice(92, 109)              # creation date and time in the file header
_BLOCK = 50_000                     # rows converted at a time


def _header(frame: pd.DataFrame, tmp: Path) -> bytes:
    """pyreadstat's header of ``frame`` (its first rows written), with the case counts located."""
    path = tmp / "head.sav"
    pyreadstat.write_sav(frame.iloc[:_HEAD_ROWS], str(path))
    raw = path.read_bytes()
    return raw[: len(raw) - _HEAD_ROWS * frame.shape[1] * 8]


def _with_cases(head: bytes, n: int) -> bytes:
    """``head`` with its two case counts (int32 at byte 80, int64 in the info record) set to ``n``."""
    out = bytearray(head)
    if int.from_bytes(out[80:84], "little") != _HEAD_ROWS:
        raise RuntimeError("unexpected .sav header: the case count is not at byte 80")
    needle = _HEAD_ROWS.to_bytes(8, "little")
    at = out.find(needle, 176)
    if at < 0 or out.find(needle, at + 1) >= 0:
        raise RuntimeError("unexpected .sav header: the 64-bit case count was not found once")
    out[80:84] = n.to_bytes(4, "little")
    out[at:at + 8] = n.to_bytes(8, "little")
    return bytes(out)


def _rows(frame: pd.DataFrame, path: Path, head: bytes) -> None:
    sysmis = -np.finfo(np.float64).max
    with open(path, "wb") as fh:
        fh.write(_with_cases(head, len(frame)))
        for start in range(0, len(frame), _BLOCK):
            block = frame.iloc[start:start + _BLOCK].to_numpy(dtype=np.float64, copy=True)
            block[np.isnan(block)] = sysmis
            fh.write(block.astype("<f8", copy=False).tobytes())


def write_numeric_sav(frame: pd.DataFrame, path: Path) -> None:
    """Write ``frame`` (numeric columns only) as pyreadstat.write_sav would, checked on a slice first."""
    if not all(np.issubdtype(t, np.number) for t in frame.dtypes):
        raise ValueError("write_numeric_sav takes numeric columns only")
    with tempfile.TemporaryDirectory() as tmp:
        head = _header(frame, Path(tmp))
        probe = frame.iloc[: 2 * _HEAD_ROWS + 7]
        ours, theirs = Path(tmp) / "ours.sav", Path(tmp) / "theirs.sav"
        _rows(probe, ours, head)
        pyreadstat.write_sav(probe, str(theirs))
        a, b = bytearray(ours.read_bytes()), bytearray(theirs.read_bytes())
        a[_DATE] = b[_DATE] = b"x" * (_DATE.stop - _DATE.start)
        if a != b:
            raise RuntimeError("the fast .sav writer does not match pyreadstat's file; use pyreadstat.write_sav")
    _rows(frame, path, head)
