"""Read survey files (SPSS, Stata, CSV, Excel, Parquet) keeping special codes as stored.

SPSS user-missing values stay as their codes (never NaN); Stata extended
missing values ``.a`` ... ``.z`` stay as the strings ``".a"`` ... ``".z"`` in an
object column that otherwise holds floats (plain system missing ``.`` is NaN);
value labels are *not* applied.  Labels and missing-value definitions go into
a :class:`~skipwise.io.meta.SurveyMeta` in ``df.attrs["survey_meta"]``.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Callable

import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError, did_you_mean
from skipwise.io.meta import SurveyMeta, normalize_value, set_meta
from skipwise.publish import clean_message

__all__ = ["read_survey", "SUPPORTED_EXTENSIONS", "READ_ONLY_FORMATS", "format_of", "output_format_of",
           "META_KEY", "MIXED_KEY", "SAS_OUTPUT_REASON"]

#: File extensions read and written (case-insensitive), mapped to the format name.
SUPPORTED_EXTENSIONS: dict[str, str] = {
    ".sav": "sav", ".zsav": "zsav", ".dta": "dta", ".csv": "csv", ".xlsx": "xlsx", ".parquet": "parquet",
    ".sas7bdat": "sas7bdat", ".xpt": "xpt",
}
#: Formats read but never written (see :func:`output_format_of`).
READ_ONLY_FORMATS: frozenset[str] = frozenset({"sas7bdat", "xpt"})
#: Why SAS files are read but not written (one text for every command that refuses them).
SAS_OUTPUT_REASON = ("skipwise reads SAS files but does not write them: the transport format (.xpt) cannot "
                     "carry value labels or missing-value definitions, and .sas7bdat has no open writer")

#: Parquet schema-metadata key holding :meth:`SurveyMeta.to_json`.
META_KEY = b"skipwise.meta"
#: Parquet schema-metadata key listing columns stored as text because they mix numbers and ".a" letters.
MIXED_KEY = b"skipwise.mixed"

_EXT_MISSING = r"\.[a-zA-Z_]"  # Stata .a-.z, SAS .A-.Z and ._
# The commands have no encoding option: the hint says what to do with the file; the library's
# read_survey(encoding=...) is named as such, not as a command argument.
_ENCODING_HINT = ("save or export the file as UTF-8 text, then run the command again (from Python, "
                  "skipwise.io.read_survey(path, encoding='cp1252') reads other encodings)")


def format_of(path: str | Path) -> str:
    """Format name for ``path``'s extension; SkipwiseError FILE_FORMAT if unsupported."""
    path = Path(path)
    fmt = SUPPORTED_EXTENSIONS.get(path.suffix.lower())
    if fmt is None:
        raise SkipwiseError(Problem(
            code=ProblemCode.FILE_FORMAT, category=Category.USAGE, file=str(path),
            message=f"unsupported file type '{path.suffix or '(none)'}'",
            hint="use one of " + ", ".join(SUPPORTED_EXTENSIONS),
        ))
    return fmt


def output_format_of(path: str | Path) -> str:
    """Format name for an output ``path``; SkipwiseError FILE_FORMAT if it cannot be written.

    SAS files (``.sas7bdat``, ``.xpt``) are input-only: the message says why and what to write instead.
    """
    writable = [e for e, f in SUPPORTED_EXTENSIONS.items() if f not in READ_ONLY_FORMATS]
    if Path(path).suffix.lower() not in SUPPORTED_EXTENSIONS:
        raise SkipwiseError(Problem(
            code=ProblemCode.FILE_FORMAT, category=Category.USAGE, file=str(path),
            message=f"unsupported file type '{Path(path).suffix or '(none)'}'", hint="use one of " + ", ".join(writable)))
    fmt = format_of(path)
    if fmt in READ_ONLY_FORMATS:
        raise SkipwiseError(Problem(
            code=ProblemCode.FILE_FORMAT, category=Category.USAGE, file=str(path),
            message=SAS_OUTPUT_REASON,
            hint="write .dta (it keeps the special missing values .A-.Z, as .a-.z), .parquet (it keeps "
                 "them as stored) or .sav"))
    return fmt


def _unreadable(path: Path, message: str, hint: str | None = None) -> SkipwiseError:
    return SkipwiseError(Problem(code=ProblemCode.FILE_UNREADABLE, category=Category.DATA,
                                 file=str(path), message=message, hint=hint))


def _check_columns(path: Path, wanted: list[str] | None, available: list[str]) -> None:
    if wanted is None:
        return
    problems = [
        Problem(code=ProblemCode.MISSING_COLUMN, category=Category.USAGE, file=str(path), item=str(c),
                message=f"column '{c}' is not in the file", hint=did_you_mean(str(c), available))
        for c in wanted if c not in available
    ]
    if problems:
        raise SkipwiseError(problems)


# -- SPSS and Stata (pyreadstat) ----------------------------------------------------------------
def _blank_text_to_nan(df: pd.DataFrame, string_cols: list[str]) -> None:
    # SPSS and Stata have no missing value for text: an empty string is the blank.
    for c in string_cols:
        df[c] = df[c].mask(df[c].astype(object).isin([""]))


def _letters_to_dotted(s: pd.Series, *, upper: bool = False) -> tuple[pd.Series, list[str]]:
    """pyreadstat returns Stata extended missing as "a".."z" (SAS special missing as "A".."Z", "_");
    make them ".a".."z" (".A".."Z", "._")."""
    num = pd.to_numeric(s, errors="coerce")
    letters = s.notna() & num.isna()
    if not letters.any():
        return num, []
    out = num.astype(object)
    text = s[letters].astype(str)
    out[letters] = "." + (text.str.upper() if upper else text)
    return out, sorted(pd.unique(out[letters]).tolist())


def _read_readstat(path: Path, fmt: str, encoding: str | None, columns: list[str] | None) -> pd.DataFrame:
    import pyreadstat

    reader = pyreadstat.read_dta if fmt == "dta" else pyreadstat.read_sav
    try:
        _, head = reader(str(path), metadataonly=True, encoding=encoding)
        _check_columns(path, columns, list(head.column_names))
        df, m = reader(str(path), user_missing=True, apply_value_formats=False,
                       dates_as_pandas_datetime=True, encoding=encoding, usecols=columns)
    except (pyreadstat.ReadstatError, pyreadstat.PyreadstatError, OSError, ValueError, OverflowError) as exc:
        text = clean_message(exc)
        if "encod" in text.lower() or isinstance(exc, UnicodeError):
            raise _unreadable(path, f"text in the file cannot be decoded ({text})", _ENCODING_HINT) from None
        kind = "Stata" if fmt == "dta" else "SPSS"
        raise _unreadable(path, f"not a readable {kind} file: it may be truncated or corrupt ({text})",
                          "check the file was copied completely; re-export it from the source program") from None

    if columns is not None:
        df = df[list(columns)]
    return readstat_frame(df, m, fmt, encoding)


def readstat_frame(df: pd.DataFrame, m, fmt: str, encoding: str | None) -> pd.DataFrame:
    """pyreadstat's frame and metadata (a whole SPSS/Stata file or a chunk of its rows) as read_survey gives them."""
    types = dict(m.readstat_variable_types)
    strings = [c for c in df.columns if types.get(c) == "string"]
    _blank_text_to_nan(df, strings)
    meta = SurveyMeta(
        source_format=fmt,
        file_label=m.file_label or None,
        encoding=getattr(m, "file_encoding", None) or encoding,
        column_labels={c: lab for c, lab in m.column_names_to_labels.items() if lab},
        formats={c: f for c, f in m.original_variable_types.items() if f},
        measure={c: v for c, v in (getattr(m, "variable_measure", None) or {}).items() if v and v != "unknown"},
    )

    def label_key(k: object) -> object:
        # Stata labels on extended missing come back keyed by the bare letter.
        if fmt == "dta" and isinstance(k, str) and len(k) == 1 and k.isalpha():
            return "." + k.lower()
        return normalize_value(k)

    meta.value_labels = {c: {label_key(k): v for k, v in vl.items()}
                         for c, vl in m.variable_value_labels.items() if c in df.columns}
    if fmt == "dta":
        declared = {c: {"." + str(x).lower() for x in v} for c, v in (m.missing_user_values or {}).items()}
        for c in df.columns:
            if c in strings or df[c].dtype != object:
                continue
            df[c], used = _letters_to_dotted(df[c])
            declared.setdefault(c, set()).update(used)
        meta.missing_values = {c: sorted(v) for c, v in declared.items() if v and c in df.columns}
    else:
        for c, entries in (m.missing_ranges or {}).items():
            if c not in df.columns:
                continue
            for e in entries:
                lo, hi = e["lo"], e["hi"]
                if lo == hi:
                    meta.missing_values.setdefault(c, []).append(normalize_value(lo))
                else:
                    meta.missing_ranges.setdefault(c, []).append((float(lo), float(hi)))
    return set_meta(df, meta)


# -- text and spreadsheets ----------------------------------------------------------------------
def _read_csv(path: Path, fmt: str, encoding: str | None, columns: list[str] | None) -> pd.DataFrame:
    enc = encoding or "utf-8-sig"  # utf-8, tolerating a byte-order mark
    opts = dict(encoding=enc, keep_default_na=False, na_values=[""])
    try:
        header = list(pd.read_csv(path, nrows=0, **opts).columns)
        _check_header(path, list(pd.read_csv(path, nrows=1, header=None, dtype=str, **opts).iloc[0])
                      if header else [])
        _check_columns(path, columns, header)
        df = pd.read_csv(path, usecols=columns, **opts)
    except UnicodeDecodeError as exc:
        if exc.object[:2] in (b"\xff\xfe", b"\xfe\xff"):
            raise _unreadable(path, "the file is UTF-16 text (it starts with a UTF-16 byte-order mark); "
                                    "skipwise reads CSV files as UTF-8", _ENCODING_HINT) from None
        raise _unreadable(path, f"the file is not valid {encoding or 'utf-8'} text ({exc.reason} "
                                f"at byte value 0x{exc.object[exc.start]:02x})", _ENCODING_HINT) from None
    except LookupError:
        raise _unreadable(path, f"unknown text encoding '{encoding}'", "use a Python codec name such as 'cp1252'") from None
    except pd.errors.EmptyDataError:
        raise _unreadable(path, "the file is empty (no header row)", "export the data with a header row") from None
    except (pd.errors.ParserError, ValueError, OSError) as exc:
        raise _unreadable(path, f"not a readable CSV file ({clean_message(exc)})") from None
    if columns is not None:
        df = df[list(columns)]
    return set_meta(df, SurveyMeta(source_format=fmt, encoding=encoding or "utf-8"))


def _check_header(path: Path, names: list[object]) -> None:
    """Refuse a header naming a column twice (pandas would silently rename the second 'age.1')."""
    from collections import Counter

    seen = Counter(str(n).strip() for n in names if not (isinstance(n, float) and n != n))
    twice = [n for n, k in seen.items() if k > 1]
    if twice:
        from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError

        raise SkipwiseError([Problem(code=ProblemCode.DUPLICATE_NAME, category=Category.DATA, file=str(path),
                                     item=n, message=f"the header names the column '{n}' {seen[n]} times",
                                     hint="give every column its own name in the header row") for n in twice])


def _read_xlsx(path: Path, fmt: str, encoding: str | None, columns: list[str] | None) -> pd.DataFrame:
    try:
        df = pd.read_excel(path, sheet_name=0, engine="openpyxl", keep_default_na=False, na_values=[""])
    except Exception as exc:  # openpyxl raises zip, XML and key errors for damaged workbooks
        raise _unreadable(path, f"not a readable Excel workbook ({type(exc).__name__}: {clean_message(exc)})",
                          "open and re-save it as .xlsx in a spreadsheet program") from None
    if len(df.columns):
        _check_header(path, list(pd.read_excel(path, sheet_name=0, engine="openpyxl", header=None, nrows=1).iloc[0]))
    df.columns = [str(c) for c in df.columns]
    _check_columns(path, columns, list(df.columns))
    _note_uncached_formulas(path, df)
    if columns is not None:
        df = df[list(columns)]
    return set_meta(df, SurveyMeta(source_format=fmt))


class ReadNote(UserWarning):
    """Something about an input file the user should know (shown as a note; the read goes on)."""


def _note_uncached_formulas(path: Path, df: pd.DataFrame) -> None:
    """Warn about formula cells without a stored result: they read as empty cells.

    A workbook saved by a program that does not compute formulas (e.g. one written by a
    script) holds the formula but no cached value, so the cell would silently count as
    item_missing.  The first sheet's XML is scanned only when it holds a formula at all.
    """
    import re
    import warnings
    import zipfile

    try:
        with zipfile.ZipFile(path) as z:
            sheets = sorted(n for n in z.namelist() if re.fullmatch(r"xl/worksheets/sheet\d+\.xml", n))
            xml = z.read(sheets[0]).decode("utf-8", "replace") if sheets else ""
    except (OSError, zipfile.BadZipFile, KeyError):
        return
    if "<f" not in xml:
        return
    cells = re.findall(r'<c r="([A-Z]+)(\d+)"[^>]*?(?:/>|>(.*?)</c>)', xml, flags=re.S)
    # No computed value: no <v>, or an empty one (<v/>, <v></v>, as some writers store an uncomputed formula).
    empty = [(col, row) for col, row, body in cells if re.search(r"<f[ >/]", body)
             and not re.search(r"<v>[^<]", body) and "<is>" not in body]
    if not empty:
        return
    columns = sorted({col for col, _ in empty}, key=lambda c: (len(c), c))
    shown = ", ".join(f"{c}{r}" for c, r in empty[:5]) + (f" and {len(empty) - 5:,} more" if len(empty) > 5 else "")
    warnings.warn(f"{path}: {len(empty):,} formula cell(s) hold no computed value ({shown}; sheet columns "
                  f"{', '.join(columns[:10])}) and are read as empty (item_missing): open the workbook in a "
                  f"spreadsheet program, let it calculate and save it, or export the values", ReadNote, stacklevel=3)


def _restore_mixed(df: pd.DataFrame, cols: list[str]) -> None:
    for c in cols:
        if c not in df.columns:
            continue
        s = df[c].astype(object)
        letters = s.astype(str).str.fullmatch(_EXT_MISSING).fillna(False).astype(bool) & s.notna()
        out = pd.to_numeric(s.where(~letters), errors="coerce").astype(object)
        out[letters] = s[letters]
        df[c] = out


def _read_parquet(path: Path, fmt: str, encoding: str | None, columns: list[str] | None) -> pd.DataFrame:
    import pyarrow
    import pyarrow.parquet as pq

    try:
        schema = pq.read_schema(path)
        _check_columns(path, columns, list(schema.names))
        table = pq.read_table(path, columns=columns)
    except (pyarrow.ArrowException, OSError) as exc:
        raise _unreadable(path, f"not a readable Parquet file ({clean_message(exc)})",
                          "check the file was copied completely") from None
    return parquet_frame(table, path, fmt)


def parquet_frame(table, path: Path, fmt: str = "parquet") -> pd.DataFrame:
    """A Parquet table (a whole file or some of its row groups) as read_survey returns it, metadata restored."""
    raw = table.schema.metadata or {}
    meta = SurveyMeta()
    if META_KEY in raw:
        try:
            meta = SurveyMeta.from_json(raw[META_KEY])
        except (ValueError, TypeError, KeyError) as exc:
            raise _unreadable(path, f"the file's skipwise metadata is damaged ({clean_message(exc)})") from None
    table = table.replace_schema_metadata({k: v for k, v in raw.items() if k == b"pandas"})
    df = table.to_pandas()
    df.attrs.clear()
    if MIXED_KEY in raw:
        _restore_mixed(df, json.loads(raw[MIXED_KEY]))
    meta = meta.subset(df.columns)
    meta.source_format = fmt
    return set_meta(df, meta)


def _read_sas(path: Path, fmt: str, encoding: str | None, columns: list[str] | None,
              catalog: Path | None = None) -> pd.DataFrame:
    from skipwise.io.readers_sas import read_sas

    return read_sas(path, fmt, encoding, columns, catalog)


_READERS: dict[str, Callable[[Path, str, str | None, list[str] | None], pd.DataFrame]] = {
    "sav": _read_readstat, "zsav": _read_readstat, "dta": _read_readstat,
    "csv": _read_csv, "xlsx": _read_xlsx, "parquet": _read_parquet,
    "sas7bdat": _read_sas, "xpt": _read_sas,
}



def read_survey(path: str | Path, *, encoding: str | None = None,
                columns: list[str] | None = None, catalog: str | Path | None = None) -> pd.DataFrame:
    """Read a survey data file, keeping special codes as stored values.

    Parameters
    ----------
    path
        A ``.sav``, ``.zsav``, ``.dta``, ``.csv``, ``.xlsx``, ``.parquet``, ``.sas7bdat``
        or ``.xpt`` file (extension case-insensitive).
    encoding
        Text encoding; for SPSS/Stata the file's own declaration is used when
        None, for CSV utf-8 (a byte-order mark is tolerated).
    columns
        Read only these columns (in this order for CSV, Excel and Parquet).
    catalog
        SAS format catalog (``.sas7bcat``) with the value labels of a ``.sas7bdat``;
        default: the ``.sas7bcat`` beside it with the same stem (else ``formats.sas7bcat``
        in the same folder), if there is one.

    Returns
    -------
    pandas.DataFrame
        The data, with a :class:`SurveyMeta` in ``df.attrs["survey_meta"]``.

        - SPSS: user-missing codes are kept as values (read with pyreadstat's
          ``user_missing=True``); discrete definitions go to ``missing_values``
          and ranges to ``missing_ranges``. Numbers are float64; label keys and
          missing values that are whole numbers are given as int.
        - Stata: extended missing ``.a``–``.z`` become the strings ``".a"``–``".z"``
          in an object column mixing floats and those strings; system missing
          ``.`` is NaN; the letters used are listed in ``missing_values``.
        - SPSS/Stata text variables: an empty string is read as NaN (neither
          format has a missing value for text).
        - Dates and date-times declared by the file's formats become
          ``datetime64`` columns.
        - CSV: only empty fields are missing; texts such as ``"NA"`` or
          ``"None"`` stay answers; numeric-looking columns become numbers.
        - Excel: the first sheet; blank cells are NaN.
        - Parquet: metadata restored from the schema key ``skipwise.meta``.
        - SAS (``.sas7bdat``, ``.xpt``): variable labels and formats; special missing
          values ``.A``-``.Z`` and ``._`` become the strings ``".A"``-``".Z"``, ``"._"``
          (like Stata's letters), listed in ``missing_values``; plain ``.`` is NaN.
          Value labels come from the format catalog (``.sas7bdat`` only: a transport
          file has no catalog), matched by each variable's format name.

    Raises
    ------
    SkipwiseError
        FILE_NOT_FOUND, FILE_FORMAT (unknown extension), FILE_UNREADABLE (empty,
        truncated or corrupt file, wrong encoding), MISSING_COLUMN (``columns``
        names a column the file lacks).  The input file is never modified.
    """
    path = Path(path)
    if not path.exists():
        raise SkipwiseError(Problem(
            code=ProblemCode.FILE_NOT_FOUND, category=Category.USAGE, file=str(path),
            message="file not found", hint="check the path and the working directory",
        ))
    fmt = format_of(path)
    if path.is_dir():
        raise _unreadable(path, "is a folder, not a data file")
    if path.stat().st_size == 0:
        raise _unreadable(path, "the file is empty (0 bytes)", "re-export the data")
    cols = None if columns is None else [str(c) for c in columns]
    if catalog is not None:
        catalog = Path(catalog)
        if fmt != "sas7bdat":
            raise SkipwiseError(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE, file=str(catalog),
                                        message="a SAS format catalog goes with a .sas7bdat data file only",
                                        hint=f"drop the catalog for {path.name}"))
        if not catalog.is_file():
            raise SkipwiseError(Problem(code=ProblemCode.FILE_NOT_FOUND, category=Category.USAGE,
                                        file=str(catalog), message="format catalog not found",
                                        hint="check the path of the .sas7bcat file"))
        return _read_sas(path, fmt, encoding, cols, catalog)
    return _READERS[fmt](path, fmt, encoding, cols)
