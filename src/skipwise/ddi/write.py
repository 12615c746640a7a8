"""A data file's documentation as a DDI-Codebook 2.5 XML document.

The Data Documentation Initiative's Codebook schema (DDI Alliance 2012,
"DDI-Codebook 2.5") is the format data archives take survey documentation in.
The document written here holds

- ``docDscr``: who produced the document, when, with which version of skipwise;
- ``stdyDscr``: title, id and the study-level metadata of the questionnaire's
  ``study:`` block (overridden key by key by a run plan's);
- ``fileDscr``: file name, case and variable counts, format;
- ``dataDscr``: one ``var`` per column (label, question text, universe in words
  with the rule as written beside it, value-label categories with unweighted and
  weighted frequencies of the stored values over all cases, special codes as
  missing categories, summary statistics of numeric items, format), the
  ``<item>_status`` and weight variables described, sections, check-all-that-apply
  sets and replicate weights as variable groups.

Frequencies (``catStat``) count the values stored in the delivered file over
every case; item rates are not repeated here (they come from the package's one
rate function, shown in the item report and the html/md codebook).
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from dataclasses import dataclass, field
from datetime import date
from typing import Any, Mapping, Sequence

import numpy as np
import pandas as pd

from skipwise import __version__
from skipwise.io.meta import SurveyMeta, normalize_value
from skipwise.questionnaire.model import STUDY_KEYS, CodeKind, ItemType, Questionnaire
from skipwise.rules.words import universe_words

__all__ = ["DDI_NAMESPACE", "CodebookInput", "ReplicateGroup", "STUDY_KEYS", "ddi_document", "ddi_bytes",
           "clean_xml_text", "replicate_formula", "study_metadata", "Moments", "ColumnSummary", "moments_of",
           "case_count", "frequencies", "blanks", "column_moments"]

#: The namespace of DDI-Codebook 2.5 documents.
DDI_NAMESPACE = "ddi:codebook:2_5"


# Characters XML 1.0 does not allow (C0 controls but tab, newline, carriage return; surrogates; U+FFFE/F).
_NOT_XML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ud800-\udfff\ufffe\uffff]")


def clean_xml_text(text: object) -> str:
    """``text`` as a string XML 1.0 can hold: forbidden control characters removed."""
    return _NOT_XML.sub("", str(text))


@dataclass(frozen=True, kw_only=True)
class ReplicateGroup:
    """Replicate weight columns and how to compute a variance with them."""

    columns: tuple[str, ...]
    method: str
    formula: str          # the variance formula in words, with its scale factors


@dataclass(frozen=True)
class Moments:
    """Summary statistics of a column's valid (finite) values: count, mean, sample standard
    deviation (n - 1 in the denominator; NaN under 2 values), minimum, maximum and sum."""

    n: int
    mean: float
    sd: float
    min: float
    max: float
    total: float


def moments_of(values: np.ndarray) -> Moments:
    """The :class:`Moments` of ``values`` in memory (NaN and infinite values are not valid)."""
    valid = values[np.isfinite(values)]
    if not len(valid):
        return Moments(0, np.nan, np.nan, np.nan, np.nan, float(np.nansum(values)))
    return Moments(len(valid), float(valid.mean()), float(valid.std(ddof=1)) if len(valid) > 1 else np.nan,
                   float(valid.min()), float(valid.max()), float(np.nansum(values)))


@dataclass(frozen=True, kw_only=True)
class ColumnSummary:
    """What a codebook says about one column when the data are not in memory (the dask engine
    merges these from per-partition partial sums, :mod:`skipwise.scale.colstats`).

    ``counts`` and ``wsum`` hold the cases and the summed weight of each listed stored value,
    ``blank``/``blank_w`` those of the blank cells, ``values`` the moments of the column's finite
    values (numeric columns), ``answered`` those of an item's answered cells.
    """

    counts: Mapping[object, int]
    wsum: Mapping[object, float]
    blank: int
    blank_w: float
    values: Moments | None = None
    answered: Moments | None = None


@dataclass(frozen=True, kw_only=True)
class CodebookInput:
    """Everything the DDI document describes.

    ``statuses`` is the classification's status table (``Classification.status``)
    aligned with ``frame``; ``weight`` names the column used for weighted
    frequencies; ``weight_columns`` maps every weight column to its label.
    """

    questionnaire: Questionnaire
    frame: pd.DataFrame
    meta: SurveyMeta
    file_name: str
    file_format: str
    statuses: pd.DataFrame | None = None
    status_numbers: Mapping[str, int] = field(default_factory=dict)
    status_labels: Mapping[str, str] = field(default_factory=dict)
    weight: str | None = None
    weight_columns: Mapping[str, str] = field(default_factory=dict)
    replicates: ReplicateGroup | None = None
    study: Mapping[str, str] = field(default_factory=dict)
    produced: date | None = None
    rates: Any = None     # skipwise.rates.ItemRates of the classification (weighted with ``weight`` if given)
    #: With ``summaries`` (the dask engine), ``frame`` holds no rows, only the columns and their types;
    #: ``rows`` is the number of cases and every figure comes from the column's summary.
    rows: int | None = None
    summaries: Mapping[str, ColumnSummary] | None = None


def case_count(inp: CodebookInput) -> int:
    """Cases of the described file."""
    return inp.rows if inp.rows is not None else len(inp.frame)


def frequencies(inp: CodebookInput, col: str, w: np.ndarray | None) -> tuple[dict[object, int], dict[object, float]]:
    """Unweighted and weighted counts of the stored values of ``col`` (from its summary, if given)."""
    if inp.summaries is not None:
        s = inp.summaries[col]
        return dict(s.counts), (dict(s.wsum) if w is not None else {})
    return _frequencies(inp.frame[col], w)


def blanks(inp: CodebookInput, col: str, w: np.ndarray | None) -> tuple[int, float]:
    """Blank cells of ``col`` and their summed weight (missing weights count 0)."""
    if inp.summaries is not None:
        s = inp.summaries[col]
        return s.blank, s.blank_w
    blank = inp.frame[col].isna()
    return int(blank.sum()), float(np.nansum(np.where(blank, w, 0))) if w is not None else 0.0


def column_moments(inp: CodebookInput, col: str, item: str | None = None) -> Moments:
    """Moments of a column's finite values, or of an item's answered values when ``item`` is given."""
    if inp.summaries is not None:
        s = inp.summaries[col]
        m = s.answered if item is not None else s.values
        return m if m is not None else Moments(0, np.nan, np.nan, np.nan, np.nan, 0.0)
    if item is not None:
        return moments_of(answered_values(inp, item, col))
    return moments_of(pd.to_numeric(inp.frame[col], errors="coerce").to_numpy(float))


def _sub(parent: ET.Element, tag: str, text: object = None, **attrs: str) -> ET.Element:
    el = ET.SubElement(parent, tag, {k.replace("_", "-"): clean_xml_text(v) for k, v in attrs.items()
                                     if v is not None})
    if text is not None:
        el.text = clean_xml_text(text)
    return el


def _num(v: float) -> str:
    """A number as text with no exponent and no float noise (12 significant digits)."""
    f = float(v)
    if f.is_integer() and abs(f) < 1e15:
        return str(int(f))
    return np.format_float_positional(f, precision=12, unique=True, fractional=True, trim="-")


def ddi_bytes(inp: CodebookInput) -> bytes:
    """The DDI-Codebook 2.5 document as UTF-8 bytes with an XML declaration."""
    root = ddi_document(inp)
    ET.indent(root, space="  ")
    return ET.tostring(root, encoding="utf-8", xml_declaration=True) + b"\n"


def ddi_document(inp: CodebookInput) -> ET.Element:
    """The DDI-Codebook 2.5 document as an element tree (root ``codeBook``)."""
    ET.register_namespace("", DDI_NAMESPACE)
    q = inp.questionnaire
    study = dict(inp.study)
    title = study.get("title") or q.title or q.name
    root = ET.Element("codeBook", {"xmlns": DDI_NAMESPACE, "version": "2.5", "ID": "CB"})
    _doc_dscr(root, title, inp.produced)
    _stdy_dscr(root, title, study.get("id") or q.name, study)
    _file_dscr(root, inp)
    _data_dscr(root, inp)
    return root


def _doc_dscr(root: ET.Element, title: str, produced: date | None) -> None:
    cit = _sub(_sub(root, "docDscr"), "citation")
    _sub(_sub(cit, "titlStmt"), "titl", f"Codebook of {title}")
    prod = _sub(cit, "prodStmt")
    _sub(prod, "producer", "skipwise", abbr="skipwise", role="documentation written by")
    if produced is not None:
        _sub(prod, "prodDate", produced.isoformat(), date=produced.isoformat())
    _sub(prod, "software", f"skipwise {__version__}", version=__version__)


def _stdy_dscr(root: ET.Element, title: str, ident: str, study: Mapping[str, str]) -> None:
    sd = _sub(root, "stdyDscr")
    cit = _sub(sd, "citation")
    ts = _sub(cit, "titlStmt")
    _sub(ts, "titl", title)
    _sub(ts, "IDNo", ident)
    if study.get("producer"):
        _sub(_sub(cit, "rspStmt"), "AuthEnty", study["producer"])
    if study.get("citation"):
        _sub(cit, "biblCit", study["citation"])
    info = _sub(sd, "stdyInfo")
    if study.get("abstract"):
        _sub(info, "abstract", study["abstract"])
    summ = _sub(info, "sumDscr")
    for key, event in (("fieldwork_start", "start"), ("fieldwork_end", "end")):
        if study.get(key):
            _sub(summ, "collDate", study[key], date=str(study[key]), event=event)
    if study.get("nation"):
        _sub(summ, "nation", study["nation"])
    if study.get("geography"):
        _sub(summ, "geogCover", study["geography"])
    if study.get("population"):
        _sub(summ, "universe", study["population"], clusion="I")
    _sub(summ, "dataKind", "survey data")
    if any(study.get(k) for k in ("sample_design", "mode", "weighting")):
        coll = _sub(_sub(sd, "method"), "dataColl")
        if study.get("sample_design"):
            _sub(coll, "sampProc", study["sample_design"])
        if study.get("mode"):
            _sub(coll, "collMode", study["mode"])
        if study.get("weighting"):
            _sub(coll, "weight", study["weighting"])


def _file_dscr(root: ET.Element, inp: CodebookInput) -> None:
    ft = _sub(_sub(root, "fileDscr", ID="F1"), "fileTxt")
    _sub(ft, "fileName", inp.file_name)
    dim = _sub(ft, "dimensns")
    _sub(dim, "caseQnty", case_count(inp))
    _sub(dim, "varQnty", inp.frame.shape[1])
    _sub(ft, "fileType", inp.file_format)


# --- variables --------------------------------------------------------------------------------------

def _data_dscr(root: ET.Element, inp: CodebookInput) -> None:
    q, frame = inp.questionnaire, inp.frame
    ids = {str(c): f"V{i + 1}" for i, c in enumerate(frame.columns)}
    dd = _sub(root, "dataDscr")
    for sec in q.sections:
        cols = [ids[c] for name in sec.items for c in q.item(name).columns if c in ids]
        if cols:
            g = _sub(dd, "varGrp", type="section", var=" ".join(cols), name=sec.name)
            _sub(g, "labl", sec.label or sec.name)
    for it in q.items:
        if it.type is ItemType.MULTI and all(c in ids for c in it.columns):
            g = _sub(dd, "varGrp", type="multipleResp", var=" ".join(ids[c] for c in it.columns), name=it.name)
            _sub(g, "labl", it.label or it.name)
    rep = inp.replicates
    if rep is not None and any(c in ids for c in rep.columns):
        g = _sub(dd, "varGrp", type="analysis", name="replicate weights",
                 var=" ".join(ids[c] for c in rep.columns if c in ids))
        _sub(g, "labl", f"Replicate weights ({rep.method}, {len(rep.columns)} replicates)")
        _sub(g, "txt", rep.formula)
    weight = inp.weight if inp.weight in ids else None
    w = (pd.to_numeric(frame[weight], errors="coerce").to_numpy(float) if weight else None)
    owner = q.column_owner
    status_of = {f"{name}_status": name for name in (inp.statuses.columns if inp.statuses is not None else ())}
    rep_cols = set(rep.columns) if rep is not None else set()
    for col in frame.columns:
        col = str(col)
        var = _sub(dd, "var", ID=ids[col], name=col, files="F1")
        if col in inp.weight_columns or col in rep_cols:
            var.set("wgt", "wgt")
        if col in owner:
            _item_var(var, inp, col, w, ids.get(weight or ""))
        elif col in status_of:
            _status_var(var, inp, col, status_of[col], w, ids.get(weight or ""))
        else:
            _other_var(var, inp, col, w, ids.get(weight or ""))


def _labels(meta: SurveyMeta, col: str) -> dict[object, str]:
    return {normalize_value(k): str(v) for k, v in (meta.value_labels.get(col) or {}).items()}


def _frequencies(x: pd.Series, w: np.ndarray | None) -> tuple[dict[object, int], dict[object, float]]:
    """Unweighted and weighted counts of every stored value (missing weights count 0)."""
    keys = x.map(normalize_value)
    counts = {k: int(v) for k, v in keys.value_counts(dropna=True).items()}
    wsum: dict[object, float] = {}
    if w is not None:
        ww = pd.Series(np.nan_to_num(w, nan=0.0), index=x.index)
        wsum = {k: float(v) for k, v in ww.groupby(keys, dropna=True).sum().items()}
    return counts, wsum


def _categories(var: ET.Element, values: Mapping[object, str], freq: tuple[dict, dict], w: np.ndarray | None,
                wid: str | None, missing: Mapping[object, tuple[str, str]] = {}) -> None:
    counts, wsum = freq
    for value, label in values.items():
        miss = missing.get(value)
        cat = _sub(var, "catgry", missing="Y" if miss else None, missType=miss[0] if miss else None)
        _sub(cat, "catValu", value if isinstance(value, str) else _num(value))
        _sub(cat, "labl", label)
        if miss:
            _sub(cat, "txt", f"special code: reason {miss[0]}, kind {miss[1]}")
        _sub(cat, "catStat", counts.get(value, 0), type="freq")
        if w is not None and wid:
            _sub(cat, "catStat", _num(round(wsum.get(value, 0.0), 6)), type="freq", wgtd="wgtd", wgt_var=wid)


def _sum_stats(var: ET.Element, m: Moments, n: int) -> None:
    _sub(var, "sumStat", m.n, type="vald")
    _sub(var, "sumStat", n - m.n, type="invd")
    if m.n:
        _sub(var, "sumStat", _num(round(float(m.mean), 6)), type="mean")
        if m.n > 1:
            _sub(var, "sumStat", _num(round(float(m.sd), 6)), type="stdev")
        _sub(var, "sumStat", _num(m.min), type="min")
        _sub(var, "sumStat", _num(m.max), type="max")


#: The package's item rates, written as ``sumStat type="other"`` (shares of D, docs/contract.md §2).
RATE_STATS = (("base", "items-in-universe-D"), ("answered_rate", "answered-rate"),
              ("nonresponse_rate", "item-nonresponse-rate"), ("fault_rate", "fault-rate"))


def _rate_stats(var: ET.Element, inp: CodebookInput, item: str, wid: str | None) -> None:
    """The item's rates from the package's one rate function (only an item's first column carries them)."""
    r = inp.rates
    if r is None or item not in r.items or inp.questionnaire.item(item).columns[0] != var.get("name"):
        return
    tables = [(r.table(False).loc[item], None)] + ([(r.table(True).loc[item], wid)] if r.weighted and wid else [])
    for row, weight_id in tables:
        for key, name in RATE_STATS:
            if key == "base" and weight_id is not None:
                continue
            v = row[key]
            if key != "base" and not np.isfinite(v):
                continue
            _sub(var, "sumStat", _num(round(float(v), 6)) if key != "base" else int(v), type="other",
                 otherType=name, wgtd="wgtd" if weight_id else None, wgt_var=weight_id)


def item_categories(it, file_labels: Mapping[object, str] | None = None
                    ) -> tuple[dict[object, str], dict[object, tuple[str, str]]]:
    """An item's categories (value -> label) and its missing codes (value -> (reason, kind)).

    A set's selected/unselected marks, the item's values, then ``file_labels`` (the data file's
    own value labels) where the questionnaire has none, then the special codes.
    """
    values: dict[object, str] = {}
    if it.type is ItemType.MULTI:
        values[normalize_value(it.selected)] = "Selected"
        if it.unselected is not None:
            values[normalize_value(it.unselected)] = "Not selected"
    values.update({normalize_value(k): str(v) for k, v in (it.values or {}).items()})
    values.update({k: v for k, v in (file_labels or {}).items() if k not in values})
    missing: dict[object, tuple[str, str]] = {}
    for code in it.codes:
        v = normalize_value(code.value)
        if code.kind is not CodeKind.SUBSTANTIVE:
            missing[v] = (code.reason, code.kind.value)
        values[v] = code.label or values.get(v) or code.reason.replace("_", " ")
    return values, missing


def answered_values(inp: CodebookInput, item: str, col: str) -> np.ndarray:
    """A numeric item's stored values where the cell is answered (NaN elsewhere)."""
    x = pd.to_numeric(inp.frame[col], errors="coerce").to_numpy(float)
    if inp.statuses is not None and item in inp.statuses.columns:
        x = np.where(inp.statuses[item].to_numpy() == "answered", x, np.nan)
    return x


def _item_var(var: ET.Element, inp: CodebookInput, col: str, w: np.ndarray | None, wid: str | None) -> None:
    q, frame = inp.questionnaire, inp.frame
    it = q.item(q.column_owner[col])
    label = inp.meta.column_labels.get(col) or it.label
    if it.type is ItemType.MULTI and it.options:
        option = dict(zip(it.columns, (lab for _, lab in it.options))).get(col)
        label = label or f"{it.label or it.name}: {option}"
    if label:
        _sub(var, "labl", label)
    text = getattr(it, "text", None)
    if text:
        _sub(_sub(var, "qstn"), "qstnLit", text)
    if it.range is not None and it.type in (ItemType.INTEGER, ItemType.NUMBER):
        lo, hi = it.range
        _sub(_sub(var, "valrng"), "range", min=_num(lo), max=_num(hi))
    _sub(var, "universe", universe_words(it, q), clusion="I")
    x = frame[col]
    numeric = it.type in (ItemType.INTEGER, ItemType.NUMBER)
    if numeric:
        _sum_stats(var, column_moments(inp, col, it.name), case_count(inp))
    _rate_stats(var, inp, it.name, wid)
    if not numeric:
        _sub(var, "txt", f"Type: {it.type.value}.")
    values, missing = item_categories(it, _labels(inp.meta, col))
    _categories(var, values, frequencies(inp, col, w), w, wid, missing)
    _sub(var, "varFormat", type="numeric" if pd.api.types.is_numeric_dtype(x) else "character",
         schema="other", otherSchema="pandas", formatname=str(x.dtype))
    if it.rule_text:
        _sub(var, "notes", f"asked_if: {it.rule_text}", subject="routing rule as written")


def _status_var(var: ET.Element, inp: CodebookInput, col: str, item: str, w: np.ndarray | None,
                wid: str | None) -> None:
    _sub(var, "labl", inp.meta.column_labels.get(col) or f"Status of {item}")
    _sub(var, "txt", f"The status skipwise gave the cell of item {item}: one number per status "
                     "(docs/statuses.md). Statuses are not answers: exclude this variable from analysis "
                     "of the answers.")
    values = {n: inp.status_labels.get(s, s.replace("_", " ")) for s, n in inp.status_numbers.items()}
    values.update(_labels(inp.meta, col))   # the delivered file's own value labels win
    _categories(var, dict(sorted(values.items(), key=lambda kv: float(kv[0]))), frequencies(inp, col, w), w, wid)
    _sub(var, "varFormat", type="numeric", schema="other", otherSchema="pandas",
         formatname=str(inp.frame[col].dtype))


def _other_var(var: ET.Element, inp: CodebookInput, col: str, w: np.ndarray | None, wid: str | None) -> None:
    q, frame, meta = inp.questionnaire, inp.frame, inp.meta
    label = inp.weight_columns.get(col) or meta.column_labels.get(col)
    if label:
        _sub(var, "labl", label)
    x = frame[col]
    numeric = pd.api.types.is_numeric_dtype(x) and not pd.api.types.is_bool_dtype(x)
    labels = _labels(meta, col)
    if numeric and not labels and col != q.case_id:
        _sum_stats(var, column_moments(inp, col), case_count(inp))
    if col == q.case_id:
        _sub(var, "txt", "Case identifier.")
    elif col in q.context:
        _sub(var, "txt", "Context (frame or paradata) variable: read by routing rules, never classified.")
    elif col in inp.weight_columns:
        _sub(var, "txt", "Weight variable.")
    if labels:
        missing = {normalize_value(v): ("declared missing", "missing")
                   for v in meta.missing_values.get(col, [])}
        _categories(var, labels, frequencies(inp, col, w), w, wid, missing)
    _sub(var, "varFormat", type="numeric" if numeric else "character", schema="other", otherSchema="pandas",
         formatname=str(x.dtype))


def study_metadata(*blocks: Mapping[str, object] | None) -> dict[str, str]:
    """Study blocks merged key by key, later ones winning (questionnaire, then run plan)."""
    out: dict[str, str] = {}
    for b in blocks:
        for k, v in (b or {}).items():
            if v is not None and str(v).strip():
                out[str(k)] = str(v)
    return out


def replicate_formula(method: str, count: int, coef: Sequence[float]) -> str:
    """The variance formula of a replicate design in words, with its scale factors."""
    c = sorted({round(float(x), 10) for x in coef})
    factors = ", ".join(_num(x) for x in c)
    return (f"{method} replicates ({count:,}). Variance of an estimate: v = sum over replicates r of "
            f"c_r (theta_r - theta_bar)^2, with theta_r the estimate computed with replicate weight r, "
            f"theta_bar the mean of the replicate estimates (within the stratum for a stratified "
            f"jackknife) and scale factor c_r = {factors}.")
