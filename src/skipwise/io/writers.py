"""Write survey files atomically, keeping labels and missing-value definitions.

``.sav``/``.zsav`` and ``.dta`` carry variable labels, value labels and
missing-value definitions; ``.parquet`` carries the whole
:class:`~skipwise.io.meta.SurveyMeta` as JSON in its schema metadata;
``.csv`` and ``.xlsx`` hold the data only (they have no place for labels).

The format families live in their own modules (``writers_spss``,
``writers_stata``, ``writers_plain``, shared parts in ``writers_common``);
this module checks the target and dispatches.
"""

from __future__ import annotations

import errno
import os
import warnings
from pathlib import Path
from typing import Callable

import pandas as pd

from skipwise.errors import SkipwiseError
from skipwise.io.atomic import atomic_output, check_writable
from skipwise.io.meta import SurveyMeta, get_meta
from skipwise.io.readers import output_format_of
from skipwise.publish import clean_message, os_error_problem, user_path
from skipwise.io.writers_common import Job, MetadataWarning, drain_notes, problem
from skipwise.io.writers_plain import prepare_csv as _prepare_csv
from skipwise.io.writers_plain import prepare_parquet as _prepare_parquet
from skipwise.io.writers_plain import prepare_xlsx as _prepare_xlsx
from skipwise.io.writers_spss import prepare_sav as _prepare_sav
from skipwise.io.writers_stata import prepare_dta as _prepare_dta

__all__ = ["write_survey", "MetadataWarning"]


_PREPARE: dict[str, Callable[[pd.DataFrame, SurveyMeta, Path, str], Job]] = {
    "sav": _prepare_sav, "zsav": _prepare_sav, "dta": _prepare_dta,
    "csv": _prepare_csv, "xlsx": _prepare_xlsx, "parquet": _prepare_parquet,
}


def write_survey(df: pd.DataFrame, path: str | Path, meta: SurveyMeta | None = None, *,
                 overwrite: bool = True) -> Path:
    """Write ``df`` with its metadata to ``path`` (format from the extension), atomically.

    Parameters
    ----------
    df
        The data. Stata extended missing cells are the strings ``".a"``–``".z"`` in
        an otherwise numeric column (as :func:`read_survey` returns them).
    path
        Target ``.sav``, ``.zsav``, ``.dta``, ``.csv``, ``.xlsx`` or ``.parquet`` file.
    meta
        Labels and missing-value definitions; default ``get_meta(df)``. Entries
        for columns not in ``df`` are ignored.
    overwrite
        If False and ``path`` exists, raise OUTPUT_EXISTS and leave it alone.

    Returns
    -------
    pathlib.Path
        ``path``.

    Notes
    -----
    - SPSS: variable and value labels, measure, numeric formats, discrete
      user-missing values and ranges are written.  SPSS holds at most 3 discrete
      values, or 1 range + 1 value, per variable; beyond that the values are
      written as one range ``[lo, hi]`` covering them *if* no other value present
      in the column or in its value labels falls inside (a MetadataWarning says
      so); otherwise a SkipwiseError is raised.  Read back, such codes appear in
      ``missing_ranges`` rather than ``missing_values``.  Stata letters cannot
      be stored in SPSS (SkipwiseError if the data holds them).
    - Stata: variable labels, value labels (whole-number keys, and keys
      ``".a"``–``".z"`` on extended missing values) and extended missing cells are
      written.  Stata has no user-missing declaration for ordinary values: SPSS
      discrete codes and ranges stay plain values (labels kept, MetadataWarning).
      Text columns cannot carry value labels.  Date columns are written ``%td``,
      date-times ``%tc`` (ms).  Column names Stata forbids raise SkipwiseError.
    - CSV (utf-8) and Excel (one sheet) hold the data only; labels and
      missing-value definitions are not stored.  The index is not written.
    - Parquet: the metadata as JSON in the schema key ``skipwise.meta``.

    Raises
    ------
    SkipwiseError
        FILE_FORMAT for an unknown extension, OUTPUT_EXISTS, BAD_DATA for data or
        metadata the format cannot hold (every such problem is listed).  No
        partial file is ever left behind.
    """
    import pyreadstat

    path = Path(path)
    fmt = output_format_of(path)
    check_writable(path, overwrite=overwrite)
    meta = (get_meta(df) if meta is None else meta.copy()).subset(str(c) for c in df.columns)
    drain_notes()
    try:
        job = _PREPARE[fmt](df, meta, path, fmt)
    finally:
        notes = drain_notes()
    if notes:  # one warning per file, however many variables were adapted
        warnings.warn(f"{user_path(path)}: " + "; ".join(notes), MetadataWarning, stacklevel=2)
    try:
        with atomic_output(path, overwrite=overwrite) as tmp:
            try:
                job(tmp)
            except (pyreadstat.ReadstatError, pyreadstat.PyreadstatError):
                _refuse_full_disk(tmp, 1 << 20)  # readstat reports a failed write without its cause
                raise
            if fmt in ("sav", "zsav", "dta"):
                _refuse_full_disk(tmp, 1)  # ... or not at all: a full disk after the write means a cut file
    except (pyreadstat.ReadstatError, pyreadstat.PyreadstatError, ValueError, TypeError, OverflowError) as exc:
        raise SkipwiseError(problem(path, f"could not write the file ({type(exc).__name__}: {clean_message(exc)})",
                                    hint="check column types and metadata")) from None
    except OSError as exc:
        raise SkipwiseError(os_error_problem(exc, path=path)) from None
    return path


def _free_bytes(folder: Path) -> int:
    st = os.statvfs(folder)
    return st.f_bavail * st.f_frsize


def _refuse_full_disk(tmp: Path, below: int) -> None:
    """Raise ENOSPC (shown as "the disk is full" for the user's file) when less than ``below``
    bytes are left where ``tmp`` is being written."""
    try:
        free = _free_bytes(tmp.parent)
    except OSError:
        return
    if free < below:
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(tmp))
