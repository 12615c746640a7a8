"""Case ids in their stored type: compared, joined and shown without passing through floats.

A 17-digit id such as 20260000000000017 is stored exactly as an integer, but two such
ids can be the same double (doubles hold integers exactly only up to 2**53), so
comparing ids as floats reports false duplicates.  Here whole-number ids stay whole
numbers (an SPSS file keeps every number as a double: its integral ids become integers,
so they print as ``100197``, not ``100197.0``), text ids stay text (surrounding blanks
removed), and a blank id is missing.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

__all__ = ["id_values", "blank_ids"]

_EXACT = 2.0 ** 53  # largest range in which a double holds every integer exactly


def id_values(series: pd.Series) -> pd.Series:
    """The ids as stored: integers (nullable ``Int64`` when a double column is whole), or text.

    Blank ids (missing, or empty text) are ``<NA>``.  The index is kept.
    """
    if pd.api.types.is_bool_dtype(series.dtype):
        return series.astype(object)
    if pd.api.types.is_integer_dtype(series.dtype):
        return series
    if pd.api.types.is_float_dtype(series.dtype):
        values = series.to_numpy(dtype=np.float64, na_value=np.nan)
        known = values[~np.isnan(values)]
        if np.all(np.floor(known) == known) and np.all(np.abs(known) < _EXACT):
            return series.astype("Int64")
        return series
    if pd.api.types.is_numeric_dtype(series.dtype) or pd.api.types.is_datetime64_any_dtype(series.dtype):
        return series
    text = series.astype(object)
    missing = text.isna()
    stripped = text.where(missing, text.astype(str).str.strip())
    return stripped.mask(missing | (stripped == ""), pd.NA)


def blank_ids(series: pd.Series) -> np.ndarray:
    """True where a case has no id (missing, or empty text)."""
    return id_values(series).isna().to_numpy()
