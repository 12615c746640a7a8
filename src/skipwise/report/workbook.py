"""Write the item-nonresponse workbook (.xlsx): the one public entry point of this package."""

from __future__ import annotations

import datetime as dt
import hashlib
from pathlib import Path
from typing import Sequence

import numpy as np
import pandas as pd

import skipwise
from skipwise.classify import classify as run_classify
from skipwise.classify.result import Classification
from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError, did_you_mean
from skipwise.io.atomic import atomic_output, check_writable
from skipwise.questionnaire.model import Questionnaire
from skipwise.rates import DEFAULT_MIN_BASE, status_label
from skipwise.report import tables as T
from skipwise.report.counts import GroupSpec, ReportCounts, SecondCounts, count_first, count_second, group_spec
from skipwise.report.patterns import pick_items
from skipwise.report.sheets_completeness import worst_items, write_charts_sheet, write_completeness_sheet
from skipwise.report.sheets_faults import FAULTS_HEADER_ROW, write_faults_sheet
from skipwise.report.sheets_items import write_items_sheet, write_subgroups_sheet
from skipwise.report.sheets_overview import OverviewInfo, write_overview_sheet
from skipwise.report.sheets_patterns import write_patterns_sheet
from skipwise.sheetstyle import EXCEL_MAX_ROWS, house_workbook

__all__ = ["write_item_report", "SHEETS", "DEFAULT_FAULT_ROWS", "MAX_GROUPS"]

#: Sheet names, in workbook order.
SHEETS: tuple[str, ...] = ("Overview", "Items", "Routing faults", "Patterns", "Subgroups", "Completeness", "Charts")
#: Fault rows listed by default; the per-item counts always cover every fault.
DEFAULT_FAULT_ROWS = 100_000
#: Most distinct values a ``by`` column may have (one sheet column each).
from skipwise.report.counts import MAX_GROUPS  # noqa: E402


def _check_options(data: pd.DataFrame, weight: str | None, by: tuple[str, ...], top_items: int,
                   top_patterns: int, fault_rows: int, file: str | None, min_base: int = DEFAULT_MIN_BASE,
                   ) -> np.ndarray | None:
    """Collect every problem with the options, then raise them together; return the weights."""
    problems: list[Problem] = []
    cols = [str(c) for c in data.columns]
    for name, what in [(weight, "weight")] + [(b, "grouping") for b in by]:
        if name is not None and name not in data.columns:
            problems.append(Problem(code=ProblemCode.MISSING_COLUMN, category=Category.USAGE, file=file, item=name,
                                    message=f"{what} column '{name}' is not in the data",
                                    hint=did_you_mean(name, cols) or "name a column of the data file"))
    for name, value in (("top_items", top_items), ("top_patterns", top_patterns)):
        if value < 1:
            problems.append(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE, item=name,
                                    message=f"{name} must be at least 1, got {value}", hint="pass a positive number"))
    if min_base < 0:
        problems.append(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE, item="min_base",
                                message=f"min_base must be 0 or more, got {min_base}", hint="pass 0 or more"))
    if fault_rows < 0:
        problems.append(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE, item="fault_rows",
                                message=f"fault_rows must be 0 or more, got {fault_rows}", hint="pass 0 or more"))
    for b in by:
        if b in data.columns and data[b].nunique(dropna=False) > MAX_GROUPS:
            problems.append(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE, file=file, item=b,
                                    message=f"grouping column '{b}' has {data[b].nunique(dropna=False):,} distinct "
                                            f"values (at most {MAX_GROUPS} fit the Subgroups sheet)",
                                    hint="group the values into fewer classes first"))
    w = None
    if weight is not None and weight in data.columns:
        w, problem = _weights(data[weight], weight, file)
        if problem is not None:
            problems.append(problem)
    if problems:
        raise SkipwiseError(problems, headline=f"{len(problems)} problem(s) with the report options")
    return w


def _weights(series: pd.Series, name: str, file: str | None) -> tuple[np.ndarray | None, Problem | None]:
    w = pd.to_numeric(series, errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan)
    bad = ~np.isfinite(w) | (w < 0)
    if bad.any():
        return None, Problem(code=ProblemCode.BAD_WEIGHTS, category=Category.DATA, file=file, item=name,
                             message=f"weight column '{name}' has {int(bad.sum()):,} missing, non-numeric, "
                                     "infinite or negative value(s)",
                             hint="give every case a finite weight of 0 or more")
    return w, None


def _value_labels(data: pd.DataFrame, q: Questionnaire, by: tuple[str, ...]) -> dict[str, dict]:
    """Value labels of the grouping columns: the file's own, else the questionnaire item's values."""
    from skipwise.io import get_meta

    meta = get_meta(data)
    out: dict[str, dict] = {}
    for var in by:
        labels = meta.value_labels.get(var)
        if not labels and var in q.column_owner and q.item(q.column_owner[var]).values:
            labels = dict(q.item(q.column_owner[var]).values)
        if labels:
            out[var] = dict(labels)
    return out


def _weight_notes(weight: str | None, zero: int | None) -> tuple[str, ...]:
    """Say where cases of weight 0 are counted (the weighting gives break-offs and nonrespondents 0)."""
    if not zero:
        return ()
    return (f"{zero:,} case(s) have weight 0 in '{weight}' (for example interviews the weighting treats as "
            "break-offs or nonrespondents, or cases not in the weighting file). They are counted in the "
            "unweighted counts and rates, and add nothing to the weighted ones; the Items sheet shows, per "
            "item, how many of its cells in D have weight 0.",)


def _sha256(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def write_item_report(
    data: pd.DataFrame,
    questionnaire: Questionnaire,
    path: str | Path,
    *,
    classification: Classification | None = None,
    weight: str | None = None,
    by: Sequence[str] = (),
    case_ids: bool = True,
    top_items: int = 12,
    top_patterns: int = 20,
    fault_rows: int = DEFAULT_FAULT_ROWS,
    min_base: int = DEFAULT_MIN_BASE,
    weights: np.ndarray | None = None,
    input_path: str | Path | None = None,
    overwrite: bool = True,
    written: dt.datetime | None = None,
) -> Path:
    """Write the item-level nonresponse workbook.

    Sheets: Overview, Items, Routing faults, Patterns, Subgroups,
    Completeness, Charts (see ``docs/report.md``).

    Parameters
    ----------
    data
        The survey data (special codes as stored values).
    questionnaire
        The loaded questionnaire.
    path
        The ``.xlsx`` file to write (atomically: a temporary name, then a rename).
    classification
        The result of ``classify(data, questionnaire)`` if already at hand.
    weight
        Column of case weights; weighted rates are added beside unweighted ones.
    by
        Columns whose groups the Subgroups sheet compares.
    case_ids
        False leaves every case id out of the workbook.
    top_items, top_patterns
        Items in the pattern grid (those with the highest rates) and patterns shown.
    fault_rows
        Most fault rows listed (never more than a worksheet holds); counts cover all faults.
    min_base
        Minimum unweighted D (cells in universe excl. breakoff and left_blank): items and
        subgroup cells under it are shown, marked, and left out of the pattern-column choice and the
        chart of the highest rates
        (common practice, no source).
    weights
        The weights of ``weight`` when they are not a column of ``data`` (a run passes the
        final weight it just computed; blanks count as 0).
    input_path
        The data file read (its name, never its folder, and its SHA-256 on the Overview sheet).
    overwrite
        Replace an existing file at ``path``.

    Returns
    -------
    pathlib.Path
        The file written.

    Raises
    ------
    SkipwiseError
        Unknown weight or grouping column, bad weights, bad counts, or an
        existing output without ``overwrite``.

    References
    ----------
    Groves, R. M. et al. (2009). *Survey Methodology*, 2nd ed., ch. 6.
    Little, R. J. A. and Rubin, D. B. (2019). *Statistical Analysis with Missing Data*, 3rd ed.
    """
    path = check_writable(path, overwrite=overwrite)
    by = tuple(by)
    w = _check_options(data if weights is None else data.drop(columns=[weight], errors="ignore"),
                       None if weights is not None else weight, by, top_items, top_patterns, fault_rows,
                       str(input_path) if input_path else None, min_base)
    if weights is not None:
        w = np.nan_to_num(np.asarray(weights, dtype=np.float64), nan=0.0)
    c = classification if classification is not None else run_classify(data, questionnaire)
    q = questionnaire
    # The whole file is one chunk: the same counts, choices and sheets as the dask engine's partitions.
    limit = min(fault_rows, EXCEL_MAX_ROWS - FAULTS_HEADER_ROW)
    first = count_first(c, data, w, by=by, fault_limit=limit)
    chosen, specs = second_pass_choices(first, q, top_items=top_items, min_base=min_base,
                                        value_labels=_value_labels(data, q, by))
    second = count_second(c, data, w, chosen=chosen, specs=specs)
    input_sha = _sha256(Path(input_path)) if input_path and Path(input_path).is_file() else None
    return write_report_from_counts(q, path, first, second, chosen, specs, weight=weight, by=by, case_ids=case_ids,
                                    top_patterns=top_patterns, min_base=min_base, input_path=input_path,
                                    input_sha256=input_sha, overwrite=overwrite, written=written)


def second_pass_choices(first: ReportCounts, q: Questionnaire, *, top_items: int, min_base: int,
                        value_labels: dict[str, dict]) -> tuple[tuple[str, ...], dict[str, GroupSpec]]:
    """What pass two needs from the whole file: the pattern grid's items and each ``by`` column's groups."""
    rates_all = first.rates.with_min_base(min_base)
    u = rates_all.table(False)
    rates = pd.Series(u["nonresponse_rate"].to_numpy(), index=list(first.items))
    # Items under the minimum base are never chosen for the grid: one case can make a rate of 100%.
    chosen = pick_items(rates.where(~u["below_min_base"].to_numpy()), top_items)
    specs = {var: group_spec(values, value_labels.get(var)) for var, values in first.groups.items()}
    return chosen, specs


def write_report_from_counts(q: Questionnaire, path: Path, first: ReportCounts, second: SecondCounts,
                             chosen: tuple[str, ...], specs: dict[str, GroupSpec], *, weight: str | None,
                             by: tuple[str, ...], case_ids: bool, top_patterns: int, min_base: int,
                             input_path: str | Path | None, input_sha256: str | None, overwrite: bool,
                             written: dt.datetime | None) -> Path:
    """Build and write the workbook from merged counts only (both engines end here)."""
    weighted = first.wcounts is not None
    rates_all = first.rates.with_min_base(min_base)
    counts = first.counts_frame()
    items = T.items_from(q, first.items, first.categories, counts, rates_all)
    faults, n_faults = first.fault_head, first.faults_total
    rates = pd.Series(items[T.ITEM_RATE].to_numpy(), index=items["Item"].to_numpy())
    base_col = next(col for col in items.columns if str(col).startswith(("D: in universe", "In universe (excl.")))
    patterns = second.patterns.table(chosen, top_patterns)
    subgroups = T.subgroups_from(first.items, second.subgroups, specs, weighted=weighted,
                                 min_base=min_base) if by else None
    info = OverviewInfo(
        survey_name=q.name, survey_title=q.title,
        # the file's name, not its absolute path: a rerun elsewhere gives the same workbook
        input_file=Path(input_path).name if input_path else None,
        input_sha256=input_sha256,
        written_utc=(written.replace(tzinfo=dt.timezone.utc) if written is not None else
                     dt.datetime.now(dt.timezone.utc)).replace(microsecond=0).isoformat(),
        version=skipwise.__version__, cases=first.n, items=len(first.items), weight=weight,
        total_weight=first.total_weight, by=by, case_ids=case_ids,
        faults_total=n_faults, faults_shown=len(faults),
        notes=_weight_notes(weight, first.zero_weight if weighted else None),
        labels={s: status_label(s, q) for s in first.categories},
    )
    w = weighted or None
    shares = T.shares_from(first.categories, counts, first.counts_frame(True) if weighted else None)

    wb = house_workbook(write_only=True)
    write_overview_sheet(wb, info, shares, title=SHEETS[0])
    write_items_sheet(wb, items, title=SHEETS[1])
    write_faults_sheet(wb, faults, n_faults, T.fault_counts(counts), case_ids=case_ids, title=SHEETS[2])
    write_patterns_sheet(wb, patterns, rates, title=SHEETS[3])
    write_subgroups_sheet(wb, subgroups, items, title=SHEETS[4])
    comp_layout = write_completeness_sheet(wb, T.completeness_table(first.cases), T.completeness_summary(first.cases),
                                           title=SHEETS[5])
    rate_col = T.ITEM_RATE_W if w is not None and T.ITEM_RATE_W in items.columns else T.ITEM_RATE
    write_charts_sheet(wb, worst_items(items, rate_col, base_col, min_base), comp_layout, wb[SHEETS[5]],
                       weighted=w is not None, min_base=min_base, title=SHEETS[6])
    wb.properties.title = f"Item nonresponse report: {q.title or q.name}"
    wb.properties.creator = f"skipwise {skipwise.__version__}"
    with atomic_output(path, overwrite=overwrite) as tmp:
        wb.save(tmp)
    return path
