"""Gather what a codebook describes from a data file, its questionnaire and (optionally) the run's plans."""

from __future__ import annotations

from datetime import date, datetime, timezone
from pathlib import Path
from typing import Mapping

import pandas as pd

from skipwise.ddi.write import CodebookInput, ReplicateGroup, replicate_formula, study_metadata
from skipwise.io.meta import get_meta

__all__ = ["codebook_input", "FORMAT_NAMES", "file_date"]

#: How each data format is named in the file description.
FORMAT_NAMES = {"sav": "SPSS system file", "zsav": "SPSS compressed system file", "dta": "Stata data file",
                "csv": "comma-separated text", "xlsx": "Excel workbook", "parquet": "Apache Parquet",
                "sas7bdat": "SAS data set", "xpt": "SAS transport file"}


def file_date(path: str | Path) -> date:
    """The date of a file's last change (UTC): a fixed production date, so reruns give the same bytes."""
    return datetime.fromtimestamp(Path(path).stat().st_mtime, tz=timezone.utc).date()


def codebook_input(frame: pd.DataFrame, questionnaire, *, file_name: str, meta=None, classification=None,
                   weight_prefix: str | None = None, weight: str | None = None, weight_labels: Mapping[str, str] | None = None,
                   design=None, study: Mapping[str, str] | None = None, produced: date | None = None,
                   min_base: int | None = None, rows: int | None = None, summaries=None, rates=None
                   ) -> CodebookInput:
    """A :class:`~skipwise.ddi.write.CodebookInput` for ``frame`` (the data file as delivered).

    ``weight_prefix`` marks the weight columns (``wt_``); replicate columns are
    those starting with ``<prefix>rep``; ``weight`` (default ``<prefix>final``
    when present) gives the weighted frequencies; ``design`` is the
    :class:`~skipwise.weighting.replicates.ReplicateDesign` the replicates were
    made with (its method and scale factors are documented).

    Without the data in memory (the dask engine), ``frame`` holds the columns and their types
    only, ``rows`` the number of cases, ``summaries`` every column's merged figures
    (:mod:`skipwise.scale.colstats`) and ``rates`` the merged item rates; ``classification`` is None.
    """
    from skipwise.classify.export import questionnaire_status_numbers, status_numbers

    meta = get_meta(frame) if meta is None else meta
    cols = [str(c) for c in frame.columns]
    weights: dict[str, str] = {}
    replicates: tuple[str, ...] = ()
    if weight_prefix:
        labels = dict(weight_labels or {})
        replicates = tuple(c for c in cols if c.startswith(f"{weight_prefix}rep"))
        for c in cols:
            if c.startswith(weight_prefix) and c not in replicates and not c.endswith("outcome"):
                weights[c] = labels.get(c) or meta.column_labels.get(c) or c
        if weight is None and f"{weight_prefix}final" in cols:
            weight = f"{weight_prefix}final"
    rep = None
    if replicates:
        method = design.method if design is not None else "replicate"
        coef = design.coef if design is not None else ()
        formula = (replicate_formula(method, len(replicates), coef) if design is not None
                   else f"{len(replicates)} replicate weights; see the weighting plan for the method.")
        rep = ReplicateGroup(columns=replicates, method=method, formula=formula)
    if classification is None and summaries is not None:
        numbers = questionnaire_status_numbers(questionnaire)
        from skipwise.classify.delivery import status_value_labels

        fmt = (meta.source_format or Path(file_name).suffix.lstrip(".")).lower()
        return CodebookInput(
            questionnaire=questionnaire, frame=frame, meta=meta, file_name=file_name,
            file_format=FORMAT_NAMES.get(fmt, fmt or "data file"),
            statuses=pd.DataFrame(columns=list(questionnaire.item_names)), status_numbers=numbers,
            status_labels=status_value_labels({s: s for s in numbers}, questionnaire),
            weight=weight, weight_columns=weights, replicates=rep,
            study=study_metadata(getattr(questionnaire, "study", None), study), produced=produced, rates=rates,
            rows=rows, summaries=summaries)
    rates = None
    if classification is not None:
        from skipwise.rates import DEFAULT_MIN_BASE, item_rates

        w = pd.to_numeric(frame[weight], errors="coerce").to_numpy(float) if weight in cols else None
        rates = item_rates(classification, w, min_base=DEFAULT_MIN_BASE if min_base is None else min_base)
    fmt = (meta.source_format or Path(file_name).suffix.lstrip(".")).lower()
    return CodebookInput(
        questionnaire=questionnaire, frame=frame, meta=meta, file_name=file_name,
        file_format=FORMAT_NAMES.get(fmt, fmt or "data file"),
        statuses=classification.status if classification is not None else None,
        status_numbers=status_numbers(classification) if classification is not None else {},
        status_labels=_status_words(classification, questionnaire),
        weight=weight, weight_columns=weights, replicates=rep,
        study=study_metadata(getattr(questionnaire, "study", None), study), produced=produced, rates=rates)


def _status_words(classification, questionnaire) -> dict[str, str]:
    """Each status's human label, the same words the delivered data files carry."""
    if classification is None:
        return {}
    from skipwise.classify.delivery import status_value_labels
    from skipwise.classify.export import status_numbers

    return status_value_labels({s: s for s in status_numbers(classification)}, questionnaire)
