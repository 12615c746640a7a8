"""The codebook of a hand-over package, in Markdown and HTML.

The data file's codebook (:mod:`skipwise.ddi.human`: contents, study, every
variable with its universe in words, rates, frequencies and statistics) with
the package's own sections: its files, the rate definitions, how the weights
were made (with the calibration margins and their totals) and how the
imputations were made.  The DDI export describes the same file from the same
:class:`~skipwise.ddi.write.CodebookInput`.
"""

from __future__ import annotations

from typing import Any, Sequence

import numpy as np
import pandas as pd

from skipwise.ddi.build import codebook_input, file_date
from skipwise.ddi.human import CAUTIONS, codebook_blocks as human_blocks, fmt_number, fmt_sum
from skipwise.ddi.write import CodebookInput
from skipwise.io import SurveyMeta
from skipwise.pipeline.render import Block, to_html, to_markdown
from skipwise.pipeline.steps import weight_labels
from skipwise.rates import format_rate

__all__ = ["codebook_blocks", "codebook_markdown", "codebook_html", "package_input", "CAUTIONS"]



def _fmt(v: object) -> str:
    return fmt_number(v) if isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, bool) else str(v)


def package_input(st, frame: pd.DataFrame, meta: SurveyMeta, data_name: str | None,
                  weight_name: str | None, *, rows: int | None = None, summaries=None, rates=None) -> CodebookInput:
    """What the package's codebooks (md, html, DDI) describe: the final data file, rates weighted by the final weight."""
    res = st.weigh
    min_base = st.plan.min_base
    return codebook_input(frame, st.q, meta=meta, file_name=data_name or st.plan.data.name, classification=st.cl,
                          weight_prefix=res.plan.prefix if res is not None else None, weight=weight_name,
                          weight_labels=weight_labels(res) if res is not None else None,
                          design=res.design if res is not None else None, study=st.plan.study,
                          produced=file_date(st.plan.data), min_base=min_base, rows=rows, summaries=summaries,
                          rates=rates)


def codebook_blocks(st, frame: pd.DataFrame, meta: SurveyMeta, files: Sequence[tuple[str, str]],
                    weight: np.ndarray | None, weight_name: str | None, *, inp: CodebookInput | None = None,
                    data_name: str | None = None) -> list[Block]:
    """The package codebook as render blocks: the data file's codebook plus the package's files and methods.

    Parameters
    ----------
    st
        The run's :class:`~skipwise.pipeline.steps.RunState` (questionnaire, classification, results).
    frame, meta
        The final data file and its metadata: every column is described.
    files
        ``(file name, what it holds)`` of every file of the package.
    weight, weight_name
        The weight of the weighted rates (its column must be in ``frame``; None: unweighted only).
    inp
        The codebook input if already built (the DDI export shares it).
    """
    if inp is None:
        inp = package_input(st, frame, meta, data_name, weight_name)
    rates = ("Every (case, item) cell has one status (docs/statuses.md). For each item, D = cells in the item's "
             "universe, excluding break-offs and optional blanks; answered rate = answered / D, item nonresponse "
             "rate = (nonresponse reasons + item_missing) / D and fault rate = (wrong_code + in-universe invalid) / D "
             "add up to 1. gate_unknown, breakoff, off_route and left_blank are counted apart. "
             + (f"Weighted rates use `{weight_name}` (cases without a weight count 0). " if weight_name else "")
             + "These are the same rates as in the item report and the other workbooks.")
    extra = [("h", 2, "Package"), ("p", f"Survey `{st.q.name}`, run plan `{st.plan.file.name}`; manifest.json lists "
                                        "every input and output with its SHA-256."),
             ("table", ["file", "what it holds"], [list(f) for f in files]),
             ("h", 2, "Item rates"), ("p", rates)]
    extra += _weight_blocks(st, frame, inp.summaries) + _impute_blocks(st)
    return human_blocks(inp, extra)


def _weight_blocks(st, frame: pd.DataFrame, summaries=None) -> list[Block]:
    res = st.weigh
    if res is None:
        return [("h", 2, "Weights"), ("p", "No weighting plan was given: the file has no weight columns.")]
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
    margins: list[Block] = []
    if p.calibration is not None:
        c = p.calibration
        lines.append(f"Calibration ({c.method}) to totals of " + ", ".join([*c.margins, *c.totals]))
        rows = [[f"`{var}`", _fmt(cat), fmt_sum(total),
                 "yes" if var in frame.columns else "no: a column of the weighting file"]
                for var, cats in c.margins.items() for cat, total in cats.items()]
        rows += [[f"`{var}`", "(total)", fmt_sum(total), "yes" if var in frame.columns else "no"]
                 for var, total in c.totals.items()]
        margins = [("p", "Calibration margins: population totals as given in the weighting plan (the plan names "
                         "their source; a margin variable may be derived for weighting, e.g. an age band):"),
                   ("table", ["variable", "category", "population total", "in the data file"], rows)]
    if p.trimming is not None:
        t = p.trimming
        lines.append("Trimming at " + (f"{t.median_multiple:g} x the median weight" if t.median_multiple
                                       else f"the {t.percentile:g}th percentile") + ", then recalibrated")
    if p.replicates is not None and res.design is not None:
        lines.append(f"Replicate weights: {res.design.count} ({res.design.method})"
                     + (f", seed {p.replicates.seed}" if p.replicates.method != "jackknife" else "")
                     + ". " + " ".join(res.design.describe()))
    rr3 = res.rates.get("RR3")
    lines.append(f"Response rate RR3 {format_rate(rr3) if rr3 is not None else 'n/a'} (the professional "
                 f"association's Standard Definitions); Kish design effect of the final weights "
                 f"{_fmt(float(res.stage_summary.iloc[-1]['kish_deff']))}")
    labels = weight_labels(res)
    rows = []
    replicates = [c for c in res.weight_columns if c.startswith(f"{p.prefix}rep")]
    for col in res.weight_columns:
        if col in replicates:
            continue
        if summaries is not None and col in summaries and summaries[col].values is not None:
            m = summaries[col].values  # merged partial sums (dask engine): min, mean, max, sum of the valid weights
            stats = ("", "", "", "") if col.endswith("outcome") else (
                _fmt(m.min), _fmt(m.mean), _fmt(m.max), fmt_sum(m.total))
        else:
            x = pd.to_numeric(frame[col], errors="coerce") if col in frame.columns else pd.Series(dtype=float)
            stats = ("", "", "", "") if col.endswith("outcome") or x.empty else (
                _fmt(x.min()), _fmt(x.mean()), _fmt(x.max()), fmt_sum(x.sum()))
        rows.append([f"`{col}`", labels[col], *stats])
    if replicates:
        rows.append([f"`{replicates[0]}` to `{replicates[-1]}`", f"{len(replicates):,} replicate weights "
                     "(see Replicate weights)", "", "", "", ""])
    return [("h", 2, "Weights"), ("p", f"Made by the weighting plan `{p.file and _name(p.file)}`:"), ("ul", lines),
            ("p", "Weights are joined to the data file by case id; cases not in the weighting file have blank "
                  "weights. Figures below are over the rows of the data file."),
            ("table", ["variable", "label", "min", "mean", "max", "sum"], rows), *margins]


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
    rows = [[f"`{i}`", r.method + (" (plan default)" if getattr(r, "rule", "") == "plan default" else ""), _fmt(r.to_fill), _fmt(r.imputed), _fmt(r.routed_out), f"`{i}{out.flag_suffix}`"]
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


def publish_codebooks(st, blocks, inp) -> None:
    """Write the package's three codebooks (Markdown, HTML, DDI XML) into their targets; both engines."""
    from skipwise.ddi import ddi_bytes
    from skipwise.publish import publish_file

    with publish_file(st.targets["codebook_md"], overwrite=True) as tmp:
        tmp.write_text(codebook_markdown(blocks), encoding="utf-8")
    with publish_file(st.targets["codebook_html"], overwrite=True) as tmp:
        tmp.write_text(codebook_html(blocks, f"Codebook: {st.q.title or st.q.name}"), encoding="utf-8")
    with publish_file(st.targets["codebook_xml"], overwrite=True) as tmp:
        tmp.write_bytes(ddi_bytes(inp))
