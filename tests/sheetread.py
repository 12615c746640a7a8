"""Read the tables and label/value lines of a skipwise workbook back (openpyxl), for tests."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
from openpyxl import load_workbook


def _rows(book, sheet: str) -> list[tuple]:
    wb = load_workbook(book) if isinstance(book, (str, Path)) else book
    return [tuple(r) for r in wb[sheet].iter_rows(values_only=True)]


def table(book, sheet: str, first_header: str, *, nth: int = 0) -> pd.DataFrame:
    """The ``nth`` table of ``sheet`` whose header row starts with ``first_header``, down to the first blank row."""
    rows = _rows(book, sheet)
    starts = [i for i, r in enumerate(rows) if r and any(v is not None for v in r)
              and next(v for v in r if v is not None) == first_header]
    i = starts[nth]
    lead = next(j for j, v in enumerate(rows[i]) if v is not None)
    header = [v for v in rows[i][lead:]]
    while header and header[-1] is None:
        header.pop()
    body = []
    for r in rows[i + 1:]:
        if not r or all(v is None for v in r):
            break
        body.append(list(r[lead:lead + len(header)]) + [None] * max(0, len(header) - len(r[lead:])))
    return pd.DataFrame(body, columns=header)


def pairs(book, sheet: str) -> dict[str, object]:
    """Label (column A) / value (column B) lines of a sheet."""
    return {r[0]: r[1] for r in _rows(book, sheet) if len(r) > 1 and isinstance(r[0], str) and r[1] is not None}


def texts(book, sheet: str) -> list[str]:
    """Every text cell of a sheet."""
    return [v for r in _rows(book, sheet) for v in r if isinstance(v, str)]
