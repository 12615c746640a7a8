"""SAS data sets (``.sas7bdat``, with a ``.sas7bcat`` format catalog) and transport files (``.xpt``).

Read only (see :data:`skipwise.io.readers.SAS_OUTPUT_REASON`).  Variable labels and formats go
into the :class:`~skipwise.io.meta.SurveyMeta`; SAS special missing values ``.A``-``.Z`` and
``._`` are kept as the strings ``".A"``-``".Z"``, ``"._"`` in an object column that otherwise holds
floats (plain ``.`` is NaN), like Stata's extended missing letters, and listed in
``missing_values``.  Value labels come from the format catalog, matched by each variable's
format name, as SAS itself applies them.
"""

from __future__ import annotations

import re
from pathlib import Path

import pandas as pd

from skipwise.io.meta import SurveyMeta, normalize_value, set_meta
from skipwise.io.readers import _ENCODING_HINT, _blank_text_to_nan, _check_columns, _letters_to_dotted, _unreadable

__all__ = ["read_sas", "catalog_for"]


# pyreadstat gives SAS special missing values as the bare letter ("A".."Z", "_"); they are kept as
# ".A".."Z" and "._", as SAS prints them (SAS does not tell .a from .A).


def catalog_for(path: Path) -> Path | None:
    """The format catalog beside a ``.sas7bdat``: same folder, same stem, extension ``.sas7bcat``.

    The extension's case is ignored (``survey.sas7bdat`` finds ``survey.SAS7BCAT``); SAS
    itself names the catalog of a data set ``formats.sas7bcat`` when it is shared by a library,
    so a file of that name in the same folder is taken when no same-stem catalog exists.
    """
    try:
        siblings = sorted(p for p in path.parent.iterdir() if p.suffix.lower() == ".sas7bcat" and p.is_file())
    except OSError:
        return None
    for stem in (path.stem, "formats"):
        for cand in siblings:
            if cand.stem.lower() == stem.lower():
                return cand
    return None


def _sas_label_key(k: object, numeric: bool) -> object:
    if numeric and isinstance(k, str) and len(k) == 1 and (k.isalpha() or k == "_"):
        return "." + k.upper()
    return normalize_value(k)


def _format_name(fmt: object) -> str:
    """A SAS format's name without width and decimals: "$SEXF." / "AGEGRP3." / "YESNO" -> "$SEXF" / "AGEGRP" / "YESNO"."""
    return re.sub(r"\d*\.\d*$", "", str(fmt)).upper()


def _catalog_labels(path: Path, catalog: Path, m, columns: list[str], encoding: str | None
                    ) -> dict[str, dict[object, str]]:
    """Value labels of ``columns`` from a SAS format catalog, by each variable's format name."""
    import pyreadstat

    try:
        _, cat = pyreadstat.read_sas7bcat(str(catalog), encoding=encoding)
    except (pyreadstat.ReadstatError, pyreadstat.PyreadstatError, OSError, ValueError) as exc:
        raise _unreadable(catalog, f"not a readable SAS format catalog ({exc})",
                          f"check the catalog belongs to {path.name}, or move it away to read the data "
                          "without value labels") from None
    # one spelling for both sides: the catalog may name a set "YESNO." (ReadStat's reader keeps the dot)
    sets = {_format_name(k): v for k, v in (cat.value_labels or {}).items()}
    types = dict(m.readstat_variable_types)
    out: dict[str, dict[object, str]] = {}
    for col in columns:
        name = _format_name(m.original_variable_types.get(col) or "")
        labels = sets.get(name) or sets.get(name.lstrip("$"))
        if labels:
            numeric = types.get(col) != "string"
            out[col] = {_sas_label_key(k, numeric): str(v) for k, v in labels.items()}
    return out


def read_sas(path: Path, fmt: str, encoding: str | None, columns: list[str] | None,
              catalog: Path | None = None) -> pd.DataFrame:
    import pyreadstat
    from pyreadstat._readstat_parser import parser_entry_point

    # pyreadstat's read_xport has no user_missing switch; its parser entry point (used by every
    # read_* function) has, so special missing values come back as letters for .xpt as for .sas7bdat.
    kind = "sas7bdat" if fmt == "sas7bdat" else "xport"
    try:
        _, head = parser_entry_point(str(path), kind, metadataonly=True, encoding=encoding)
        _check_columns(path, columns, list(head.column_names))
        df, m = parser_entry_point(str(path), kind, user_missing=True, dates_as_pandas_datetime=True,
                                   encoding=encoding, usecols=columns)
    except (pyreadstat.ReadstatError, pyreadstat.PyreadstatError, OSError, ValueError, OverflowError) as exc:
        text = str(exc)
        if "encod" in text.lower() or isinstance(exc, UnicodeError):
            raise _unreadable(path, f"text in the file cannot be decoded ({text})", _ENCODING_HINT) from None
        what = "SAS data set (.sas7bdat)" if fmt == "sas7bdat" else "SAS transport file (.xpt)"
        raise _unreadable(path, f"not a readable {what}: it may be truncated or corrupt ({text})",
                          "check the file was copied completely; re-export it from SAS") from None
    if columns is not None:
        df = df[list(columns)]
    return sas_frame(df, m, fmt, encoding, path, catalog)


def sas_frame(df: pd.DataFrame, m, fmt: str, encoding: str | None, path: Path,
              catalog: Path | None = None) -> pd.DataFrame:
    """pyreadstat's frame and metadata (a whole SAS file or a chunk of its rows) as read_survey gives them."""
    types = dict(m.readstat_variable_types)
    strings = [c for c in df.columns if types.get(c) == "string"]
    _blank_text_to_nan(df, strings)
    meta = SurveyMeta(
        source_format=fmt,
        file_label=m.file_label or None,
        encoding=getattr(m, "file_encoding", None) or encoding,
        column_labels={c: lab for c, lab in m.column_names_to_labels.items() if lab and c in df.columns},
        formats={c: f for c, f in m.original_variable_types.items() if f and c in df.columns},
    )
    declared: dict[str, set[str]] = {}
    for c in df.columns:
        if c in strings or df[c].dtype != object:
            continue
        df[c], used = _letters_to_dotted(df[c], upper=True)
        if used:
            declared[c] = set(used)
    meta.missing_values = {c: sorted(v) for c, v in declared.items()}
    if fmt == "sas7bdat":
        catalog = catalog if catalog is not None else catalog_for(path)
        if catalog is not None:
            meta.value_labels = _catalog_labels(path, catalog, m, list(df.columns), encoding)
    return set_meta(df, meta)
