"""Survey metadata carried beside a DataFrame: labels, missing-value definitions, formats.

A :class:`SurveyMeta` lives in ``df.attrs["survey_meta"]``.  Readers fill it from
the file (SPSS dictionary, Stata value-label tables, Parquet schema metadata);
writers put it back.  Every mapping is keyed by column name, and value-label
keys are the *stored* values of the column (``-91``, ``1``, ``"x"`` or, for
Stata extended missing values, the strings ``".a"`` ... ``".z"``).
"""

from __future__ import annotations

import copy as _copy
import json
import math
from dataclasses import dataclass, field
from typing import Iterable, Mapping

import numpy as np
import pandas as pd

__all__ = ["SurveyMeta", "get_meta", "set_meta", "META_ATTR", "normalize_value"]

#: Key of ``DataFrame.attrs`` holding the :class:`SurveyMeta`.
META_ATTR = "survey_meta"

#: Version of the JSON layout written by :meth:`SurveyMeta.to_json`.
_JSON_VERSION = 1


def normalize_value(value: object) -> object:
    """A plain Python scalar for a stored value: numpy scalars unboxed, integral floats as int.

    SPSS keeps every number as a double, so a code read from a ``.sav`` file is
    ``-91.0``; normalising it to ``-91`` makes codes from every format compare
    and print alike (``-91 == -91.0`` and both hash alike, so lookups work either way).
    """
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and math.isfinite(value) and value.is_integer():
        return int(value)
    return value


@dataclass(kw_only=True)
class SurveyMeta:
    """Labels and missing-value definitions of a survey file.

    Parameters
    ----------
    source_format
        Format the data was read from: ``"sav"``, ``"zsav"``, ``"dta"``, ``"csv"``,
        ``"xlsx"`` or ``"parquet"`` (None when built in memory).
    file_label
        The file's own label, if any.
    column_labels
        Variable labels, ``{column: label}``.
    value_labels
        ``{column: {stored value: label}}``.
    missing_values
        SPSS discrete user-missing values per column; for Stata, the extended
        missing letters used, as ``".a"`` ... ``".z"``.
    missing_ranges
        SPSS user-missing ranges per column, ``[(lo, hi), ...]`` (inclusive).
    formats
        Original variable formats (``"F8.2"``, ``"DATE11"``, ``"%td"`` ...), kept
        where a writer of the same family can use them.
    measure
        SPSS measurement level per column (``"nominal"``, ``"ordinal"``, ``"scale"``).
    encoding
        Text encoding the file declared or was read with.
    """

    source_format: str | None = None
    file_label: str | None = None
    column_labels: dict[str, str] = field(default_factory=dict)
    value_labels: dict[str, dict[object, str]] = field(default_factory=dict)
    missing_values: dict[str, list[object]] = field(default_factory=dict)
    missing_ranges: dict[str, list[tuple[float, float]]] = field(default_factory=dict)
    formats: dict[str, str] = field(default_factory=dict)
    measure: dict[str, str] = field(default_factory=dict)
    encoding: str | None = None

    # -- per-column mappings, in one place so subset/merge/rename stay in step
    _PER_COLUMN = ("column_labels", "value_labels", "missing_values", "missing_ranges", "formats", "measure")

    def copy(self) -> "SurveyMeta":
        """A deep copy (the inner dicts and lists are not shared)."""
        return _copy.deepcopy(self)

    def columns(self) -> set[str]:
        """Every column some piece of metadata refers to."""
        found: set[str] = set()
        for name in self._PER_COLUMN:
            found.update(getattr(self, name))
        return found

    def subset(self, columns: Iterable[str]) -> "SurveyMeta":
        """A copy keeping only the metadata of ``columns`` (file-level fields kept)."""
        keep = set(columns)
        out = self.copy()
        for name in self._PER_COLUMN:
            setattr(out, name, {c: v for c, v in getattr(out, name).items() if c in keep})
        return out

    def merged(self, other: "SurveyMeta") -> "SurveyMeta":
        """A copy where every column described in ``other`` takes ``other``'s entries.

        Per-column mappings are updated key by key (a column's value labels are
        replaced as a whole, not mixed); file-level fields are taken from
        ``other`` where it sets them.
        """
        out = self.copy()
        extra = other.copy()
        for name in self._PER_COLUMN:
            getattr(out, name).update(getattr(extra, name))
        for name in ("source_format", "file_label", "encoding"):
            if getattr(extra, name) is not None:
                setattr(out, name, getattr(extra, name))
        return out

    def with_column(
        self,
        column: str,
        *,
        label: str | None = None,
        value_labels: Mapping[object, str] | None = None,
        missing_values: Iterable[object] | None = None,
        missing_ranges: Iterable[tuple[float, float]] | None = None,
        measure: str | None = None,
    ) -> "SurveyMeta":
        """A copy with metadata for one (typically new) column set; None leaves a field alone."""
        out = self.copy()
        if label is not None:
            out.column_labels[column] = label
        if value_labels is not None:
            out.value_labels[column] = dict(value_labels)
        if missing_values is not None:
            out.missing_values[column] = list(missing_values)
        if missing_ranges is not None:
            out.missing_ranges[column] = [(float(lo), float(hi)) for lo, hi in missing_ranges]
        if measure is not None:
            out.measure[column] = measure
        return out

    def renamed(self, mapping: Mapping[str, str]) -> "SurveyMeta":
        """A copy with columns renamed as in ``mapping`` (unmentioned columns unchanged)."""
        out = self.copy()
        for name in self._PER_COLUMN:
            setattr(out, name, {mapping.get(c, c): v for c, v in getattr(out, name).items()})
        return out

    # -- JSON (Parquet schema metadata) ------------------------------------------------------
    def to_json(self) -> str:
        """Serialise to JSON; value-label keys keep their int / float / str type.

        JSON object keys can only be strings, so value labels and missing values
        are written as lists of ``[value, label]`` pairs: JSON itself tells
        ``1`` from ``1.0`` from ``"1"``.
        """
        def plain(v: object) -> object:
            return v.item() if isinstance(v, np.generic) else v

        doc = {
            "skipwise_meta": _JSON_VERSION,
            "source_format": self.source_format,
            "file_label": self.file_label,
            "encoding": self.encoding,
            "column_labels": dict(self.column_labels),
            "value_labels": {c: [[plain(k), lab] for k, lab in vl.items()] for c, vl in self.value_labels.items()},
            "missing_values": {c: [plain(v) for v in vals] for c, vals in self.missing_values.items()},
            "missing_ranges": {c: [[float(lo), float(hi)] for lo, hi in rs] for c, rs in self.missing_ranges.items()},
            "formats": dict(self.formats),
            "measure": dict(self.measure),
        }
        return json.dumps(doc, ensure_ascii=False, allow_nan=False)

    @classmethod
    def from_json(cls, text: str | bytes) -> "SurveyMeta":
        """Inverse of :meth:`to_json`.

        Raises
        ------
        ValueError
            If ``text`` is not a metadata document of a known version.
        """
        doc = json.loads(text)
        if not isinstance(doc, dict) or doc.get("skipwise_meta") != _JSON_VERSION:
            raise ValueError("not a skipwise metadata document of version 1")
        return cls(
            source_format=doc.get("source_format"),
            file_label=doc.get("file_label"),
            encoding=doc.get("encoding"),
            column_labels=dict(doc.get("column_labels", {})),
            value_labels={c: {k: lab for k, lab in pairs} for c, pairs in doc.get("value_labels", {}).items()},
            missing_values={c: list(vals) for c, vals in doc.get("missing_values", {}).items()},
            missing_ranges={c: [(float(lo), float(hi)) for lo, hi in rs]
                            for c, rs in doc.get("missing_ranges", {}).items()},
            formats=dict(doc.get("formats", {})),
            measure=dict(doc.get("measure", {})),
        )


def get_meta(df: pd.DataFrame) -> SurveyMeta:
    """A copy of the frame's :class:`SurveyMeta`, or an empty one if it has none."""
    meta = df.attrs.get(META_ATTR)
    return meta.copy() if isinstance(meta, SurveyMeta) else SurveyMeta()


def set_meta(df: pd.DataFrame, meta: SurveyMeta) -> pd.DataFrame:
    """Store ``meta`` (a copy) in ``df.attrs`` and return ``df`` itself (not a copy)."""
    df.attrs[META_ATTR] = meta.copy()
    return df
