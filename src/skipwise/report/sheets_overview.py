"""The "Overview" sheet: what was read, when, by which version, the rates' definitions and the cautions."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pandas as pd

from skipwise import sheetstyle as st

__all__ = ["OverviewInfo", "write_overview_sheet", "DEFINITIONS", "CAUTIONS", "STATUS_WORDS", "status_words"]

DEFINITIONS: tuple[tuple[str, str], ...] = (
    ("D (the rates' base)",
     "cells in the item's universe, excluding breakoff and left_blank: answered + nonresponse reasons + "
     "item_missing + wrong_code + invalid where the item was asked. In universe: the routing rule held, "
     "or it was unknown but the cell shows the item was asked (an answer or a nonresponse code). With a "
     "weight: the sum of the weights of those cells."),
    ("Item nonresponse rate", "(cells with a nonresponse reason + item_missing cells) / D. With a weight: "
                              "Σw·[nonresponse] / Σw·[in D]."),
    ("Answered rate, fault rate", "answered / D and (wrong_code + invalid where asked) / D. The three "
                                  "rates add up to 100%."),
    ("Reason rate (e.g. dont_know rate, refused rate)", "cells carrying that nonresponse reason / D."),
    ("item_missing rate", "blank in-universe cells with no code / D."),
    ("Counted apart", "gate_unknown (whether the item was asked is unknown), breakoff (blank after the "
                      "interview ended), off_route, left_blank (an optional item left blank) and invalid "
                      "values where the item was not asked or the routing is undecided: in neither "
                      "numerator nor denominator of any rate."),
    ("left_blank", "blank in-universe cells of an item marked optional (e.g. an open comment box): no "
                   "answer was required. Counted apart: in neither numerator nor denominator of any rate, "
                   "and not in a case's share of applicable items answered."),
    ("Minimum base", "a rate on fewer cells in D (unweighted) than the minimum base is shown but marked, "
                     "and left out of rankings, charts and the choice of the Patterns columns."),
    ("Routing faults", "off_route (an answer or code where the routing says not asked), wrong_code (a "
                       "not-asked code where the item was asked) and invalid (a value outside the item's "
                       "values or range that is no declared code)."),
    ("Share of applicable items answered (per case)",
     "answered items / items in the case's universe (breakoff cells included in the denominator)."),
)

CAUTIONS: tuple[str, ...] = (
    "Nonresponse adjustments (weighting, imputation) do not repair data missing not at random (MNAR): "
    "when whether a value is missing depends on the value itself, no rate in this workbook shows it. "
    "Judge the mechanism with subject knowledge and follow your organization's methodology standards.",
    "The Routing faults sheet lists case ids (unless the workbook was written with --no-case-ids). Survey "
    "files hold respondents' answers: share this workbook only under your organization's data "
    "protection rules.",
)


@dataclass(frozen=True, kw_only=True)
class OverviewInfo:
    """Facts shown on the Overview sheet."""

    survey_name: str
    survey_title: str
    input_file: str | None
    input_sha256: str | None
    written_utc: str
    version: str
    cases: int
    items: int
    weight: str | None
    total_weight: float | None
    by: tuple[str, ...]
    case_ids: bool
    faults_total: int
    faults_shown: int
    notes: tuple[str, ...] = ()
    labels: dict[str, str] | None = None   # status token -> human label


def write_overview_sheet(wb: Any, info: OverviewInfo, shares: pd.DataFrame, *, title: str = "Overview") -> None:
    s = st.SheetWriter(wb, title, title=f"Item nonresponse report: {info.survey_title or info.survey_name}",
                       explanation=("What was read and when, the share of all (case, item) cells in each status, and "
                                    "the definitions of every rate in this workbook. Rates are over each item's "
                                    "cases in universe (see Definitions)."),
                       source="Item nonresponse over the cases eligible for the item: Groves et al. 2009, Survey "
                              "Methodology, 2nd ed., ch. 6.")
    facts: list[tuple[str, object, str | None]] = [
        ("Survey name", info.survey_name, None),
        ("Survey title", info.survey_title, None),
        ("Input file", Path(info.input_file).name if info.input_file else "(not given: data passed in memory)", None),
        ("Input file SHA-256", info.input_sha256 or "(not computed)", None),
        ("Written (UTC)", info.written_utc, None),
        ("skipwise version", info.version, None),
        ("Cases", info.cases, st.INT),
        ("Items", info.items, st.INT),
        ("Weight column", info.weight or "(none: unweighted)", None),
    ]
    if info.total_weight is not None:
        facts.append(("Sum of weights", info.total_weight, st.WEIGHTED))
    facts += [
        ("Subgroup columns", ", ".join(info.by) if info.by else "(none)", None),
        ("Case ids in workbook", "yes (Routing faults sheet)" if info.case_ids else "no (--no-case-ids)", None),
        ("Routing faults (listed / total)", f"{info.faults_shown:,} / {info.faults_total:,}", None),
    ]
    s.pairs(facts)
    s.blank()
    table = shares.rename(columns={"status": "Status", "cells": "Cells", "share": "Share of cells",
                                   "weighted share": "Weighted share"})
    labels = getattr(info, "labels", None) or {}
    if "Status" in table.columns:
        table.insert(1, "Meaning", [labels.get(v) or status_words(v) for v in table["Status"]])
    s.table(table, formats={"Cells": st.INT, "Share of cells": st.PCT, "Weighted share": st.PCT},
            heading="Share of all cells by status")
    for note in getattr(info, "notes", ()):
        s.labelled("Note", note)
    s.blank()
    s.table(pd.DataFrame(DEFINITIONS, columns=["Term", "Definition"]), wrap=["Term", "Definition"], main=False,
            heading="Definitions")
    s.width(1, 30)
    s.width(2, 70)
    s.blank()
    s.line("Cautions", "sub")
    for text in CAUTIONS:
        s.note(text)
    s.close()


#: Words beside each status token (the token stays for machines).
STATUS_WORDS = {"answered": "answered", "skipped": "legitimately skipped (routing)", "dont_know": "don't know",
                "refused": "refused", "item_missing": "blank in universe, no code", "gate_unknown":
                "universe undecided", "breakoff": "after the interview ended", "left_blank":
                "optional item left blank", "off_route": "answer where not asked", "wrong_code":
                "not-asked code where asked", "invalid": "value outside the item's values"}


def status_words(token: object) -> str:
    """A status token in words ("dont_know" -> "don't know"); unknown tokens as they are, spaced."""
    return STATUS_WORDS.get(str(token), str(token).replace("_", " "))
