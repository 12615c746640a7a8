"""The codebook for people: the same description as the DDI document, as Markdown or HTML.

A table of contents with links; the study block; per variable its label,
question text, universe in words (the rule as written beside it), a frequency
table of the stored values (unweighted and weighted) or summary statistics;
status variables and replicate weights described once each, with the
replicate method, its scale factors and the variance formula.  Numbers are
written with thousands separators and never in scientific notation.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from skipwise import __version__
from skipwise.ddi.write import (CodebookInput, Moments, _labels, blanks, case_count, column_moments, frequencies,
                                item_categories)
from skipwise.io.meta import normalize_value
from skipwise.pipeline.render import Block, to_html, to_markdown
from skipwise.questionnaire.model import STUDY_KEYS, ItemType
from skipwise.rules.words import universe_words

__all__ = ["codebook_blocks", "codebook_markdown", "codebook_html", "fmt_number", "fmt_sum", "CAUTIONS"]

CAUTIONS = (
    "Weights and imputation correct only for what the observed variables explain: they do not repair "
    "data missing not at random (MNAR).",
    "Survey files hold respondents' answers: store and share them only under your organization's data "
    "protection rules, and follow its methodology standards.",
)

_STUDY_LABELS = {"title": "Title", "id": "Study id", "producer": "Producer", "population": "Population (universe)",
                 "geography": "Geographic coverage", "nation": "Country", "fieldwork_start": "Fieldwork from",
                 "fieldwork_end": "Fieldwork to", "mode": "Mode of data collection",
                 "sample_design": "Sample design", "weighting": "Weighting", "citation": "Citation",
                 "abstract": "Abstract"}


def fmt_number(v: object, digits: int = 4) -> str:
    """A number for people: thousands separators, about ``digits`` significant digits, no exponent."""
    if v is None:
        return ""
    if isinstance(v, (int, np.integer)) and not isinstance(v, bool):
        return f"{int(v):,}"
    f = float(v)  # type: ignore[arg-type]
    if not math.isfinite(f):
        return ""
    if f.is_integer():
        return f"{int(f):,}"
    decimals = max(0, digits - 1 - int(math.floor(math.log10(abs(f))))) if f else 0
    return f"{f:,.{min(decimals, 10)}f}"


def fmt_sum(v: object) -> str:
    """A sum of weights: thousands separators and one decimal (whole numbers without)."""
    f = float(v)  # type: ignore[arg-type]
    if not math.isfinite(f):
        return ""
    return f"{int(f):,}" if f.is_integer() else f"{f:,.1f}"


def codebook_markdown(inp: CodebookInput, extra: list[Block] | None = None) -> str:
    return to_markdown(codebook_blocks(inp, extra))


def codebook_html(inp: CodebookInput, extra: list[Block] | None = None) -> str:
    q = inp.questionnaire
    return to_html(codebook_blocks(inp, extra), f"Codebook: {inp.study.get('title') or q.title or q.name}")


def codebook_blocks(inp: CodebookInput, extra: list[Block] | None = None) -> list[Block]:
    """The codebook as render blocks; ``extra`` (e.g. a package's files and methods) goes after the study."""
    q, frame = inp.questionnaire, inp.frame
    title = inp.study.get("title") or q.title or q.name
    status_cols = [c for c in map(str, frame.columns) if inp.statuses is not None and c.endswith("_status")
                   and c[: -len("_status")] in inp.statuses.columns]
    rep_cols = list(inp.replicates.columns) if inp.replicates is not None else []
    described = [c for c in map(str, frame.columns) if c not in status_cols and c not in rep_cols]
    owner = q.column_owner
    toc = [("Study", "study"), ("Variables", "variables")]
    toc += [(f"Section: {s.label or s.name}", f"section-{s.name}") for s in q.sections
            if any(c in described for n in s.items for c in q.item(n).columns)]
    others = [c for c in described if c not in owner]
    if others:
        toc.append(("Other variables", "other-variables"))
    if status_cols:
        toc.append(("Status variables", "status-variables"))
    if rep_cols:
        toc.append(("Replicate weights", "replicate-weights"))
    extra_blocks: list[Block] = []
    for block in extra or []:
        if block[0] == "h" and block[1] == 2:  # a section of the caller's: linked from the contents
            name = f"x-{block[2]}"
            toc.insert(toc.index(("Variables", "variables")), (str(block[2]), name))
            extra_blocks.append(("anchor", name))
        extra_blocks.append(block)
    b: list[Block] = [
        ("h", 1, f"Codebook: {title}"),
        ("p", f"Data file `{inp.file_name}` ({inp.file_format}): {case_count(inp):,} cases, {frame.shape[1]:,} "
              f"variables. Written by skipwise {__version__}"
              + (f" on {inp.produced.isoformat()}" if inp.produced else "") + "."),
        ("h", 2, "Contents"), ("links", toc),
        ("h", 2, "Cautions"), ("ul", list(CAUTIONS)),
        ("anchor", "study"), ("h", 2, "Study"),
    ]
    study_rows = [[_STUDY_LABELS.get(k, k), inp.study[k]] for k in STUDY_KEYS if inp.study.get(k)]
    b.append(("table", ["", ""], study_rows) if study_rows else
             ("p", "No study block was given (add `study:` to the questionnaire or the run plan)."))
    b += extra_blocks
    b += [("anchor", "variables"), ("h", 2, "Variables"),
          ("table", ["variable", "label", "type", "role"], [_overview_row(inp, c) for c in described])]
    if status_cols:
        b.append(("p", f"Also {len(status_cols):,} status variables (`<item>_status`, see Status variables)"
                       + (f" and {len(rep_cols):,} replicate weights (see Replicate weights)." if rep_cols else ".")))
    for s in q.sections:
        cols = [c for n in s.items for c in q.item(n).columns if c in described]
        if not cols:
            continue
        b += [("anchor", f"section-{s.name}"), ("h", 2, f"Section: {s.label or s.name}")]
        if s.asked_if:
            b.append(("p", f"Section rule as written: `asked_if: {s.asked_if}`."))
        for col in cols:
            b += _item_blocks(inp, col)
    if others:
        b += [("anchor", "other-variables"), ("h", 2, "Other variables")]
        for col in others:
            b += _other_blocks(inp, col)
    if status_cols:
        b += _status_blocks(inp, status_cols)
    if rep_cols:
        b += _replicate_blocks(inp)
    return b


def _role(inp: CodebookInput, col: str) -> str:
    q = inp.questionnaire
    if col in q.column_owner:
        return "item"
    if col == q.case_id:
        return "case id"
    if col in q.context:
        return "context"
    if col in inp.weight_columns:
        return "weight"
    return "other"


def _overview_row(inp: CodebookInput, col: str) -> list[str]:
    q, meta = inp.questionnaire, inp.meta
    owner = q.column_owner.get(col)
    item = q.item(owner) if owner else None
    label = meta.column_labels.get(col) or (item.label if item else "") or inp.weight_columns.get(col, "")
    kind = item.type.value if item else ("number" if pd.api.types.is_numeric_dtype(inp.frame[col]) else "text")
    return [f"`{col}`", label, kind, _role(inp, col)]


def _freq_table(inp: CodebookInput, col: str, values: dict, missing: dict) -> Block:
    w = _weights(inp)
    counts, wsum = frequencies(inp, col, w)
    head = ["value", "label", "kind", "cases"] + (["weighted"] if w is not None else [])
    rows = []
    for v, label in values.items():
        kind = "answer"
        if v in missing:
            reason, code_kind = missing[v]
            number = (getattr(inp.questionnaire, "reason_numbers", None) or {}).get(reason)
            kind = f"special code: {reason} ({code_kind}" + (f", status {number}" if number else "") + ")"
        row = [fmt_number(v) if not isinstance(v, str) else v, label, kind, fmt_number(counts.get(v, 0))]
        if w is not None:
            row.append(fmt_sum(wsum.get(v, 0.0)))
        rows.append(row)
    blank, blank_w = blanks(inp, col, w)
    if blank:
        rows.append(["(blank)", "", "no value stored", fmt_number(blank)]
                    + ([fmt_sum(blank_w)] if w is not None else []))
    return ("table", head, rows)


def _weights(inp: CodebookInput) -> np.ndarray | None:
    if inp.weight is None or inp.weight not in inp.frame.columns:
        return None
    return pd.to_numeric(inp.frame[inp.weight], errors="coerce").to_numpy(float)


def _stats_table(m: Moments, n: int) -> Block:
    rows = [["valid cases", fmt_number(m.n)], ["other cases", fmt_number(n - m.n)]]
    if m.n:
        rows += [["mean", fmt_number(m.mean)],
                 ["standard deviation", fmt_number(m.sd) if m.n > 1 else ""],
                 ["minimum", fmt_number(m.min)], ["maximum", fmt_number(m.max)]]
    return ("table", ["statistic", "value"], rows)


def _item_blocks(inp: CodebookInput, col: str) -> list[Block]:
    q = inp.questionnaire
    it = q.item(q.column_owner[col])
    label = inp.meta.column_labels.get(col) or it.label
    props = [["label", label], ["type", it.type.value]]
    if getattr(it, "text", None):
        props.append(["question text", it.text])
    props.append(["universe", universe_words(it, q)])
    if it.rule_text:
        props.append(["routing rule as written", f"`asked_if: {it.rule_text}`"])
    if it.range is not None:
        props.append(["valid range", f"{fmt_number(it.range[0])} to {fmt_number(it.range[1])}"])
    if getattr(it, "optional", False):
        props.append(["answer", "optional: a blank in universe is left_blank, not item nonresponse"])
    if len(it.columns) > 1:
        props.append(["set", f"a column of the check-all-that-apply set `{it.name}`"])
    out: list[Block] = [("anchor", col), ("h", 3, f"`{col}`: {label}" if label else f"`{col}`"),
                        ("table", ["property", "value"], props)]
    if inp.rates is not None and it.name in inp.rates.items and it.columns[0] == col:
        out += _rate_blocks(inp, it)
    values, missing = item_categories(it)
    if it.type in (ItemType.INTEGER, ItemType.NUMBER):
        out += [("p", "Summary of the answered values:"),
                _stats_table(column_moments(inp, col, it.name), case_count(inp))]
    if values:
        out += [("p", "Stored values over all cases:"), _freq_table(inp, col, values, missing)]
    return out


def _rate_blocks(inp: CodebookInput, it) -> list[Block]:
    """The item's rates from the package's one rate function: shares of D that add up to 1."""
    from skipwise.rates import format_rate

    r = inp.rates
    tables = [("cases", r.table(False).loc[it.name])]
    if r.weighted:
        tables.append((f"weighted ({inp.weight})", r.table(True).loc[it.name]))
    head = ["", *[name for name, _ in tables]]
    row0 = tables[0][1]
    rows = [["D: in universe, excluding break-off and optional blanks", *[fmt_sum(t["D"]) for _, t in tables]],
            ["answered rate", *[format_rate(t["answered_rate"]) for _, t in tables]],
            ["item nonresponse rate", *[format_rate(t["nonresponse_rate"]) for _, t in tables]]]
    for reason in (*r.reasons, "item_missing"):
        if row0[reason]:
            rows.append([f"  of which {reason.replace('_', ' ')}", *[format_rate(t[f"{reason}_rate"]) for _, t in tables]])
    rows.append(["fault rate (wrong code, invalid)", *[format_rate(t["fault_rate"]) for _, t in tables]])
    apart = [f"{k.replace('_', ' ')} {fmt_number(row0[k])}" for k in ("gate_unknown", "breakoff", "off_route",
                                                                     "left_blank", "invalid_apart")
             if k in row0.index and row0[k]]
    out: list[Block] = [("p", "Item rates (the package's one set of rates, shares of D):"), ("table", head, rows)]
    if apart:
        out.append(("p", "Counted apart: " + "; ".join(apart) + "."))
    if bool(row0["below_min_base"]):
        out.append(("p", f"Fewer than {r.min_base} cases in D: too few to judge; left out of rankings."))
    return out


def _other_blocks(inp: CodebookInput, col: str) -> list[Block]:
    q, meta, frame = inp.questionnaire, inp.meta, inp.frame
    label = meta.column_labels.get(col) or inp.weight_columns.get(col, "")
    role = {"case id": "case identifier", "context": "context (frame or paradata) variable: read by routing "
            "rules, never classified", "weight": "weight variable", "other": "other variable"}.get(_role(inp, col))
    out: list[Block] = [("anchor", col), ("h", 3, f"`{col}`: {label}" if label else f"`{col}`"),
                        ("table", ["property", "value"], [["label", label], ["role", role]])]
    labels = _labels(meta, col)
    if labels:
        missing = {normalize_value(v): ("declared missing", "missing") for v in meta.missing_values.get(col, [])}
        out.append(_freq_table(inp, col, labels, missing))
    elif col != q.case_id and pd.api.types.is_numeric_dtype(frame[col]) and not pd.api.types.is_bool_dtype(frame[col]):
        m = column_moments(inp, col)
        out.append(_stats_table(m, case_count(inp)))
        if col in inp.weight_columns:
            out.append(("p", f"Sum of the weights: {fmt_sum(m.total)}."))
    return out


def _status_blocks(inp: CodebookInput, cols: list[str]) -> list[Block]:
    labels = {n: inp.status_labels.get(s, s.replace("_", " ")) for s, n in inp.status_numbers.items()}
    first = _labels(inp.meta, cols[0])
    labels.update(first)
    rows = [[fmt_number(n), lab] for n, lab in sorted(labels.items(), key=lambda kv: float(kv[0]))]
    return [("anchor", "status-variables"), ("h", 2, "Status variables"),
            ("p", f"{len(cols):,} variables `<item>_status` hold the status skipwise gave each cell of the item "
                  "(one number per status, the same in every item). They describe the answers; they are not "
                  "answers themselves."),
            ("table", ["number", "status"], rows),
            ("p", "Variables: " + ", ".join(f"`{c}`" for c in cols) + ".")]


def _replicate_blocks(inp: CodebookInput) -> list[Block]:
    rep = inp.replicates
    assert rep is not None
    cols = list(rep.columns)
    span = f"`{cols[0]}` to `{cols[-1]}`" if len(cols) > 1 else f"`{cols[0]}`"
    return [("anchor", "replicate-weights"), ("h", 2, "Replicate weights"),
            ("p", f"{len(cols):,} replicate weights, {span}, method: {rep.method}."),
            ("p", rep.formula),
            ("p", "Compute the estimate once with the final weight and once with each replicate weight; the "
                  "variance is the scaled sum of squared deviations above. No finite population correction is "
                  "applied unless the weighting plan says so.")]
