"""The codebook of a hand-over package: every output variable, in Markdown and HTML.

Per variable: label, type, values, special codes with reason and kind, the
routing rule, status counts, unweighted and weighted item nonresponse; then how
the weights and the imputations were made (method summary from the plans).
"""

from __future__ import annotations

from typing import Any, Sequence

import numpy as np
import pandas as pd

from skipwise import __version__
from skipwise.io import SurveyMeta
from skipwise.pipeline.render import Block, to_html, to_markdown

__all__ = ["codebook_blocks", "codebook_markdown", "codebook_html", "CAUTIONS"]

CAUTIONS = (
    "Weights and imputation correct only for what the observed variables explain: they do not repair "
    "data missing not at random (MNAR).",
    "These files hold respondents' answers, and the routing-fault list names case ids: store and share "
    "them only under your organization's data protection rules, and follow its methodology standards.",
)


def _fmt(v: object) -> str:
    if isinstance(v, (float, np.floating)):
        return "" if np.isnan(v) else f"{float(v):,.4g}"
    if isinstance(v, (int, np.integer)) and not isinstance(v, bool):
        return f"{int(v):,}"
    return str(v)


def _pairs(mapping: dict | None) -> str:
    return "; ".join(f"{k} = {v}" for k, v in (mapping or {}).items())


def _kind(series: pd.Series) -> str:
    if pd.api.types.is_bool_dtype(series):
        return "boolean"
    if pd.api.types.is_numeric_dtype(series):
        return "number"
    if pd.api.types.is_datetime64_any_dtype(series):
        return "date"
    return "text"


def _item_rows(st, col: str, item, summary: pd.DataFrame, weighted: pd.DataFrame | None,
               first: bool) -> list[list[str]]:
    q = st.q
    rows = [["item", f"{item.name} (section {item.section})" + (f", a column of the set '{item.name}'"
                                                                    if len(item.columns) > 1 else "")],
            ["type", item.type.value]]
    if item.values:
        rows.append(["values", _pairs(dict(item.values))])
    if item.options:
        rows.append(["options", "; ".join(f"{c} = {lab}" for c, lab in item.options)])
    if item.range:
        rows.append(["range", f"{item.range[0]} to {item.range[1]}"])
    if item.codes:
        rows.append(["codes", "; ".join(f"{c.value} {c.reason} ({c.kind.value})" + (f": {c.label}" if c.label else "")
                                        for c in item.codes)])
    rows.append(["routing rule", f"`asked_if: {item.rule_text}`" if item.rule_text else "asked of every case"])
    if not first:
        rows.append(["statuses", f"see {item.columns[0]}"])
        return rows
    s = summary.loc[item.name]
    cats = [c for c in st.cl.categories if c in s.index and s[c]]
    rows.append(["status counts", "; ".join(f"{c} {int(s[c]):,}" for c in cats)])
    rows.append(["in universe (excl. breakoff)", _fmt(s["in_universe"])])
    rows.append(["item nonresponse (unweighted)", f"{int(s['nonresponse']):,} = {_pct(s['nonresponse_rate'])}"])
    reasons = [r for r in q.nonresponse_reasons if f"{r}_rate" in s.index and s[r]]
    if reasons:
        rows.append(["by reason (unweighted)", "; ".join(f"{r} {_pct(s[f'{r}_rate'])}" for r in reasons)])
    if weighted is not None:
        rows.append(["item nonresponse (weighted)", _pct(weighted.loc[item.name, "nonresponse_rate"])])
    return rows


def _pct(v: float) -> str:
    return "n/a" if v is None or np.isnan(v) else f"{100 * float(v):.2f}%"


def codebook_blocks(st, frame: pd.DataFrame, meta: SurveyMeta, files: Sequence[tuple[str, str]],
                    weight: np.ndarray | None, weight_name: str | None) -> list[Block]:
    """The codebook as render blocks.

    Parameters
    ----------
    st
        The run's :class:`~skipwise.pipeline.steps.RunState` (questionnaire, classification, results).
    frame, meta
        The final data file and its metadata: every column is described.
    files
        ``(file name, what it holds)`` of every file of the package.
    weight, weight_name
        Case weights for the weighted nonresponse rates (None: unweighted only).
    """
    q, cl = st.q, st.cl
    summary = cl.item_summary()
    weighted = cl.item_summary(weight) if weight is not None else None
    owner = q.column_owner
    status_of = {f"{name}_status": name for name in cl.items}
    weight_cols = set(st.weights.columns) if st.weights is not None else set()
    b: list[Block] = [
        ("h", 1, f"Codebook: {q.title or q.name}"),
        ("p", f"Survey `{q.name}`; data file `{st.plan.data.name}`, {len(frame):,} cases, "
              f"{frame.shape[1]:,} variables. Written by skipwise {__version__} from the run plan "
              f"`{st.plan.file.name}`; manifest.json lists every input and output with its SHA-256."),
        ("h", 2, "Cautions"), ("ul", list(CAUTIONS)),
        ("h", 2, "Files"), ("table", ["file", "what it holds"], [list(f) for f in files]),
        ("h", 2, "Statuses"),
        ("p", "Every (case, item) cell has one status. Item nonresponse rate = (nonresponse reasons + "
              "item_missing) / (cases in universe, excluding breakoff and left_blank); gate_unknown, "
              "breakoff and left_blank are counted apart." + (f" Weighted rates use `{weight_name}`." if weight_name else "")),
        ("table", ["number in `<item>_status`", "status"],
         [[str(k), v] for k, v in sorted(_status_labels(cl).items())]),
        ("h", 2, "Variables"),
    ]
    overview = []
    for col in frame.columns:
        col = str(col)
        role = ("item" if col in owner else "status" if col in status_of else "weight" if col in weight_cols
                else "context" if col in q.context or col == q.case_id else "other")
        kind = q.item(owner[col]).type.value if col in owner else _kind(frame[col])
        overview.append([f"`{col}`", meta.column_labels.get(col, q.item(owner[col]).label if col in owner else ""),
                         kind, role])
    b.append(("table", ["variable", "label", "type", "role"], overview))
    b.append(("h", 2, "Items and other variables"))
    seen: set[str] = set()
    for col in frame.columns:
        col = str(col)
        if col in status_of or col in weight_cols:
            continue
        rows = [["label", meta.column_labels.get(col, q.item(owner[col]).label if col in owner else "")]]
        if col in owner:
            item = q.item(owner[col])
            rows += _item_rows(st, col, item, summary, weighted, item.name not in seen)
            seen.add(item.name)
        else:
            rows.append(["type", _kind(frame[col])])
            if col == q.case_id:
                rows.append(["role", "case identifier"])
            elif col in q.context:
                rows.append(["role", "context (frame or paradata) column: read by rules, never classified"])
            if meta.value_labels.get(col):
                rows.append(["value labels", _pairs(meta.value_labels[col])])
        if meta.missing_values.get(col) or meta.missing_ranges.get(col):
            rows.append(["declared missing", ", ".join(map(str, meta.missing_values.get(col, [])))
                         + "".join(f" {lo} to {hi}" for lo, hi in meta.missing_ranges.get(col, []))])
        b += [("anchor", col), ("h", 3, f"`{col}`"), ("table", ["property", "value"], rows)]
    b.append(("h", 2, "Status columns"))
    b.append(("table", ["variable", "status of item", "label"],
              [[f"`{c}`", status_of[c], meta.column_labels.get(c, "")] for c in frame.columns if c in status_of]))
    b += _weight_blocks(st, frame)
    b += _impute_blocks(st)
    return b


def _status_labels(cl) -> dict[int, str]:
    from skipwise.classify.export import status_numbers

    return {v: k for k, v in status_numbers(cl).items()}


def _weight_blocks(st, frame: pd.DataFrame) -> list[Block]:
    res = st.weigh
    if res is None:
        return [("h", 2, "Weights"), ("p", "No weighting plan was given: the file has no weight columns.")]
    from skipwise.pipeline.steps import weight_labels

    p = res.plan
    lines = [f"Dispositions from `{p.dispositions.column}` mapped to the outcome categories I, P, R, NC, O, UH, UO, NE."]
    if p.base_probability or p.base_weight:
        lines.append(f"Base weight: 1 / `{p.base_probability}`" if p.base_probability
                     else f"Base weight: `{p.base_weight}`")
    if p.eligibility_classes is not None:
        lines.append("Unknown eligibility: weight moved to cases of known eligibility within classes of "
                     + (", ".join(p.eligibility_classes) or "the whole sample"))
    if p.nonresponse is not None:
        nr = p.nonresponse
        how = (f"weighting classes {', '.join(nr.classes)}" if nr.method == "classes"
               else f"response propensity ({nr.propensity_use}) on {', '.join(nr.covariates)}")
        lines.append(f"Nonresponse adjustment by {how}; at least {nr.min_respondents} respondents per class, "
                     f"factors at most {nr.max_factor:g}")
    if p.calibration is not None:
        c = p.calibration
        lines.append(f"Calibration ({c.method}) to totals of " + ", ".join([*c.margins, *c.totals]))
    if p.trimming is not None:
        t = p.trimming
        lines.append("Trimming at " + (f"{t.median_multiple:g} x the median weight" if t.median_multiple
                                       else f"the {t.percentile:g}th percentile") + ", then recalibrated")
    if p.replicates is not None and res.design is not None:
        lines.append(f"Replicate weights: {res.design.count} ({res.design.method})"
                     + (f", seed {p.replicates.seed}" if p.replicates.method != "jackknife" else ""))
    lines.append(f"Response rate RR3 {_fmt(res.rates.get('RR3'))}; Kish design effect of the final weights "
                 f"{_fmt(float(res.stage_summary.iloc[-1]['kish_deff']))}")
    labels = weight_labels(res)
    rows = []
    for col in res.weight_columns:
        x = pd.to_numeric(frame[col], errors="coerce") if col in frame.columns else pd.Series(dtype=float)
        stats = ("", "", "", "") if col.endswith("outcome") or x.empty else (
            _fmt(x.min()), _fmt(x.mean()), _fmt(x.max()), _fmt(x.sum()))
        rows.append([f"`{col}`", labels[col], *stats])
    return [("h", 2, "Weights"), ("p", f"Made by the weighting plan `{p.file and _name(p.file)}`:"), ("ul", lines),
            ("p", "Weights are joined to the data file by case id; cases not in the weighting file have blank "
                  "weights. Figures below are over the rows of the data file."),
            ("table", ["variable", "label", "min", "mean", "max", "sum"], rows)]


def _impute_blocks(st) -> list[Block]:
    res = st.impute
    if res is None:
        return [("h", 2, "Imputation"), ("p", "No imputation plan was given.")]
    plan = st.imputation_plan
    spec, out = plan.spec, plan.output
    lines = [f"{res.m} imputation(s), seed {res.seed}; statuses filled: {', '.join(res.statuses)}",
             f"Default method: {spec.default.method}" + (f", classes {', '.join(spec.default.classes)}"
                                                         if spec.default.classes else "")
             + (f", covariates {', '.join(spec.default.covariates)}" if spec.default.covariates else ""),
             "Gates are filled first; each later item's universe is re-derived, so items routed out stay skips. "
             "Routing faults are left as they are.",
             f"Output form: {out.form}" + (f", imputation number in `{out.imputation_column}`"
                                           if out.form == "stacked" else " (one file per imputation)"),
             "Analyse the completed files with Rubin's rules."]
    t = res.table
    rows = [[f"`{i}`", r.method, _fmt(r.to_fill), _fmt(r.imputed), _fmt(r.routed_out), f"`{i}{out.flag_suffix}`"]
            for i, r in zip(t.index, t.itertuples())]
    return [("h", 2, "Imputation"), ("p", f"Made by the imputation plan `{_name(plan.file)}`:"), ("ul", lines),
            ("table", ["item", "method", "cells to fill", "imputed (mean over M)", "routed out", "flag column"], rows),
            ("p", "Flag columns: 0 not imputed, 1 imputed, 2 routed out by an imputed gate.")]


def _name(path: Any) -> str:
    from pathlib import Path

    return Path(str(path)).name


def codebook_markdown(blocks: list[Block]) -> str:
    return to_markdown(blocks)


def codebook_html(blocks: list[Block], title: str) -> str:
    return to_html(blocks, title)
