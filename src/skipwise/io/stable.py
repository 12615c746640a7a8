"""Byte-for-byte reproducible files: one fixed timestamp in every data file and workbook.

A rerun of the same plan must give identical bytes, so the writers' "now" is replaced by one
fixed moment (the plan's ``output.timestamp``, else the data file's own modification time):

- ``.sav`` / ``.zsav``: pyreadstat writes the current date and time into the file header and
  has no argument for it; :func:`stamp_sav` overwrites the two fields in place.
- ``.dta``: likewise for the header's ``<timestamp>`` element (:func:`stamp_dta`).
- ``.xlsx``: a zip archive whose entries carry their write time and whose
  ``docProps/core.xml`` holds the created / modified properties; :func:`stamp_xlsx` rewrites the
  archive with fixed entry times and those two properties set.

Parquet and text files carry no write time.  Volatile facts (run times, absolute paths) belong
in the package's manifest.json only.
"""

from __future__ import annotations

import datetime as dt
import os
import re
import zipfile
from pathlib import Path

__all__ = ["stamp_file", "stamp_sav", "stamp_dta", "stamp_xlsx", "timestamp_of", "parse_timestamp"]

# SPSS system file header record [memory: GNU PSPP manual, "System File Format", "File Header
# Record"]: rec_type char[4] at 0, prod_name char[60] at 4, layout_code int32 at 64,
# nominal_case_size int32 at 68, compression int32 at 72, weight_index int32 at 76, ncases int32
# at 80, bias float64 at 84, creation_date char[9] "dd mmm yy" at 92, creation_time char[8]
# "hh:mm:ss" at 101, file_label char[64] at 109.  The same header opens a compressed .zsav.
_SAV_DATE = slice(92, 101)
_SAV_TIME = slice(101, 109)
_SAV_MAGIC = (b"$FL2", b"$FL3")
_MONTHS = ("Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec")

# Stata .dta 117-119 header [memory: Stata manual, "dta — Description of .dta file format",
# section 5.1]: "<timestamp>", one byte holding the length (17, or 0 for none), then
# "dd Mon yyyy hh:mm", then "</timestamp>", all inside the first <header> element.
_DTA_STAMP = re.compile(rb"<timestamp>(.)", re.S)

# Office Open XML core properties [memory: ECMA-376 Part 2, "Core Properties"]: W3CDTF dates.
_CORE = "docProps/core.xml"
_CORE_DATES = re.compile(r"(<dcterms:(created|modified)\b[^>]*>)[^<]*(</dcterms:\2>)")


def parse_timestamp(text: str) -> dt.datetime:
    """An ISO 8601 date or date-time as a naive UTC datetime (ValueError if it is neither)."""
    value = dt.datetime.fromisoformat(text.strip().replace("Z", "+00:00"))
    if value.tzinfo is not None:
        value = value.astimezone(dt.timezone.utc).replace(tzinfo=None)
    return value.replace(microsecond=0)


def timestamp_of(path: str | Path) -> dt.datetime:
    """The modification time of ``path`` as a naive UTC datetime (whole seconds)."""
    seconds = int(os.stat(path).st_mtime)
    return dt.datetime.fromtimestamp(seconds, dt.timezone.utc).replace(tzinfo=None)


def stamp_sav(path: Path, when: dt.datetime) -> None:
    """Write ``when`` into the creation date and time of an SPSS header (in place)."""
    date = f"{when.day:02d} {_MONTHS[when.month - 1]} {when.year % 100:02d}".encode("ascii")
    time = when.strftime("%H:%M:%S").encode("ascii")
    with open(path, "r+b") as fh:
        head = bytearray(fh.read(_SAV_TIME.stop))
        if bytes(head[:4]) not in _SAV_MAGIC or len(head) < _SAV_TIME.stop:
            raise ValueError(f"{path} does not start with an SPSS file header")
        head[_SAV_DATE], head[_SAV_TIME] = date, time
        fh.seek(0)
        fh.write(head)


def stamp_dta(path: Path, when: dt.datetime) -> None:
    """Write ``when`` into the ``<timestamp>`` of a Stata 117-119 header (in place)."""
    text = f"{when.day:02d} {_MONTHS[when.month - 1]} {when.year:04d} {when:%H:%M}".encode("ascii")
    with open(path, "r+b") as fh:
        head = fh.read(4096)
        m = _DTA_STAMP.search(head, 0, head.find(b"</header>"))
        if m is None or head[m.start(1)] != len(text):
            raise ValueError(f"{path} has no 17-character header timestamp to set")
        fh.seek(m.start(1) + 1)
        fh.write(text)


def stamp_xlsx(path: Path, when: dt.datetime) -> None:
    """Rewrite a workbook with fixed zip entry times and created/modified properties.

    Entry order, names, compression and contents are kept; only the times change.  The new
    archive is written beside the old one and renamed over it.
    """
    iso = when.strftime("%Y-%m-%dT%H:%M:%SZ")
    # zip entry times are local-time fields without a zone, from 1980 on
    stamp = max(when, dt.datetime(1980, 1, 1)).timetuple()[:6]
    tmp = path.with_name(f".{path.name}.stamp")
    try:
        with zipfile.ZipFile(path) as src, zipfile.ZipFile(tmp, "w") as dst:
            for info in src.infolist():
                data = src.read(info.filename)
                if info.filename == _CORE:
                    data = _CORE_DATES.sub(lambda m: f"{m.group(1)}{iso}{m.group(3)}",
                                           data.decode("utf-8")).encode("utf-8")
                fixed = zipfile.ZipInfo(info.filename, date_time=stamp)
                fixed.compress_type = info.compress_type
                fixed.external_attr = info.external_attr
                fixed.create_system = 0
                dst.writestr(fixed, data)
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()


_STAMPERS = {".sav": stamp_sav, ".zsav": stamp_sav, ".dta": stamp_dta, ".xlsx": stamp_xlsx}


def stamp_file(path: str | Path, when: dt.datetime) -> bool:
    """Fix the write time inside ``path`` if its format carries one; True if it did."""
    path = Path(path)
    fn = _STAMPERS.get(path.suffix.lower())
    if fn is None:
        return False
    fn(path, when)
    return True
