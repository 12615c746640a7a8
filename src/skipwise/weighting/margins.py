"""Population margins: validation and encoding of the data's categories.

Every calibration method works on the same encoded form: for each margin
variable, an integer code per case (index into the target categories) and the
target totals.  Categories are matched by a normalised text label, so a plan
key ``1`` matches a stored value ``1``, ``1.0`` or ``"1"``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable, Mapping

import numpy as np
import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError

__all__ = ["MarginCensus", "margin_census", "margin_codes", "margin_targets", "margin_data_problems",
           "margin_total_problems", "EncodedMargin", "category_label", "encode_margins", "margin_table", "max_margin_error",
           "Locator", "worst_margins_text", "margin_table_of_sums", "max_margin_error_of_sums",
           "worst_margins_text_of_sums"]

#: Gives the plan-file location (``file``, ``line``) of a margin or one of its categories.
Locator = Callable[[str, object | None], dict]

#: Relative tolerance for "all margins add to the same total".
TOTAL_RTOL = 1e-6


def category_label(value: object) -> str:
    """Normalised text of a category value (integral floats lose their ``.0``)."""
    if isinstance(value, (bool, np.bool_)):
        return str(bool(value))
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, (float, np.floating)):
        f = float(value)
        return str(int(f)) if f.is_integer() else repr(f)
    return str(value)


@dataclass(frozen=True, kw_only=True)
class EncodedMargin:
    """One margin: per-case category codes and the target total of every category."""

    variable: str
    labels: tuple[str, ...]
    targets: np.ndarray
    codes: np.ndarray

    @property
    def total(self) -> float:
        return float(self.targets.sum())

    def sums(self, w: np.ndarray) -> np.ndarray:
        return np.bincount(self.codes, weights=w, minlength=len(self.labels))


def _no_location(variable: str, category: object | None) -> dict:
    return {}


@dataclass(frozen=True, kw_only=True)
class MarginCensus:
    """The cases of each category label of one margin variable; row-local and mergeable (``+``)."""

    counts: Mapping[str, int]
    missing: int = 0
    first_missing: tuple = ()

    def __add__(self, other: "MarginCensus") -> "MarginCensus":
        counts = dict(self.counts)
        for k, v in other.counts.items():
            counts[k] = counts.get(k, 0) + v
        return MarginCensus(counts=counts, missing=self.missing + other.missing,
                            first_missing=(self.first_missing + other.first_missing)[:5])


def margin_census(col: pd.Series) -> MarginCensus:
    """Cases per category label (in order of first appearance) and the missing values of a column."""
    missing = col.isna().to_numpy()
    raw_codes, uniques = pd.factorize(col, sort=False)
    per_unique = np.bincount(raw_codes[raw_codes >= 0], minlength=len(uniques))
    counts: dict[str, int] = {}
    for u, n_u in zip(uniques, per_unique):
        lab = category_label(u)
        counts[lab] = counts.get(lab, 0) + int(n_u)
    return MarginCensus(counts=counts, missing=int(missing.sum()), first_missing=tuple(col.index[missing][:5]))


def margin_codes(col: pd.Series, labels: tuple[str, ...]) -> np.ndarray:
    """Row-local: each case's index into the margin's target labels (-1: no target, or missing)."""
    raw_codes, uniques = pd.factorize(col, sort=False)
    lookup = {lab: i for i, lab in enumerate(labels)}
    mapped = np.array([lookup.get(category_label(u), -1) for u in uniques] + [-1], dtype=np.intp)
    return mapped[raw_codes] if len(raw_codes) else np.zeros(0, dtype=np.intp)


def margin_targets(margins: Mapping[str, Mapping[object, float]], *, locate: Locator | None = None
                   ) -> tuple[dict[str, tuple[tuple[str, ...], np.ndarray]], list[Problem]]:
    """The plan's side of :func:`encode_margins`: each margin's category labels and targets, checked."""
    where = locate or _no_location
    problems: list[Problem] = []
    out: dict[str, tuple[tuple[str, ...], np.ndarray]] = {}
    if not margins:
        raise SkipwiseError(Problem(code=ProblemCode.MISSING_KEY, message="no margins given",
                                    hint="give at least one {variable: {category: total}}"))
    for variable, targets in margins.items():
        loc = where(str(variable), None)
        if not isinstance(targets, Mapping) or not targets:
            problems.append(Problem(code=ProblemCode.BAD_VALUE, item=str(variable),
                                    message="margin must map each category to a population total", **loc))
            continue
        labels: list[str] = []
        values: list[float] = []
        for cat, total in targets.items():
            cloc = where(str(variable), cat)
            if isinstance(cat, bool):
                problems.append(Problem(code=ProblemCode.BAD_VALUE, item=str(variable),
                                        message=f"category key read as {cat} (YAML reads yes/no/on/off as true/false)",
                                        hint="quote the key, e.g. \"yes\": 120", **cloc))
            ok = isinstance(total, (int, float, np.integer, np.floating)) and not isinstance(total, bool)
            if not ok or not math.isfinite(float(total)) or float(total) < 0:
                problems.append(Problem(code=ProblemCode.BAD_VALUE, item=str(variable),
                                        message=f"target of category {cat!r} must be a non-negative number, got {total!r}",
                                        **cloc))
                continue
            label = category_label(cat)
            if label in labels:
                problems.append(Problem(code=ProblemCode.DUPLICATE_NAME, item=str(variable),
                                        message=f"category {cat!r} is given twice", **cloc))
                continue
            labels.append(label)
            values.append(float(total))
        if values and len(values) == len(targets) and sum(values) <= 0:
            problems.append(Problem(code=ProblemCode.BAD_VALUE, item=str(variable),
                                    message=f"the targets of margin '{variable}' add to {sum(values):g}: calibrated "
                                            "weights would all be 0",
                                    hint="give the population total of each category (they must add to more than 0)",
                                    **loc))
            continue
        out[str(variable)] = (tuple(labels), np.asarray(values, dtype=float))
    return out, problems


def margin_data_problems(variable: str, labels: tuple[str, ...], targets: np.ndarray, census: MarginCensus, *,
                         locate: Locator | None = None) -> list[Problem]:
    """The data's side of :func:`encode_margins`, from the merged census of the variable."""
    where = locate or _no_location
    loc = where(variable, None)
    if census.missing:
        return [Problem(code=ProblemCode.BAD_DATA, category=Category.DATA, item=variable,
                        message=f"{census.missing} case(s) have no value of margin variable "
                                f"'{variable}' (first: {list(census.first_missing)})",
                        hint="impute or recode the variable before calibration", **loc)]
    known = set(labels)
    problems = [Problem(code=ProblemCode.UNDECLARED_VALUE, category=Category.DATA, item=variable,
                        message=f"category {lab!r} of '{variable}' occurs in {n_u} case(s) but has no population target",
                        hint="add its total to the margin or recode it into a targeted category", **loc)
                for lab, n_u in census.counts.items() if lab not in known]
    if problems:
        return problems
    for lab, tot in zip(labels, targets):
        if census.counts.get(lab, 0) == 0 and tot > 0:
            problems.append(Problem(code=ProblemCode.INFEASIBLE, category=Category.DATA, item=variable,
                                    message=f"category {lab!r} of '{variable}' has a target of {tot:g} "
                                            f"but no respondent",
                                    hint="collapse it with a neighbouring category in the margins",
                                    **where(variable, lab)))
    return problems


def margin_total_problems(encoded: list[EncodedMargin], *, locate: Locator | None = None) -> list[Problem]:
    """Margins that add to different totals."""
    where = locate or _no_location
    if len(encoded) > 1:
        totals = [m.total for m in encoded]
        if max(totals) - min(totals) > TOTAL_RTOL * max(max(totals), 1.0):
            listing = ", ".join(f"{m.variable}={m.total:,.6g}" for m in encoded)
            return [Problem(code=ProblemCode.BAD_VALUE, item=encoded[0].variable,
                            message=f"margins add to different totals ({listing})",
                            hint="every margin must describe the same population total",
                            **where(encoded[0].variable, None))]
    return []


def encode_margins(data: pd.DataFrame, margins: Mapping[str, Mapping[object, float]], *,
                   locate: Locator | None = None) -> list[EncodedMargin]:
    """Check margins against the data and encode each case's category.

    Parameters
    ----------
    data
        The cases to calibrate (respondents).
    margins
        ``{variable: {category: population_total}}``.
    locate
        Optional function giving the plan-file location of a margin/category,
        so problems carry a file and line.

    Raises
    ------
    SkipwiseError
        Collecting every problem: ``missing-column`` (variable not in the data),
        ``bad-value`` (a non-numeric or negative total, a yes/no key YAML read as
        true/false, margins adding to different totals), ``bad-data`` (missing
        values in a margin variable), ``undeclared-value`` (a data category with
        no target), ``infeasible`` (a target category with no case).
    """
    where = locate or _no_location
    targets, problems = margin_targets(margins, locate=locate)
    out: list[EncodedMargin] = []
    for variable in margins:
        variable = str(variable)
        if variable not in data.columns:
            from skipwise.errors import did_you_mean
            problems.append(Problem(code=ProblemCode.MISSING_COLUMN, item=variable,
                                    message=f"margin variable '{variable}' is not a column of the data",
                                    hint=did_you_mean(variable, map(str, data.columns)), **where(variable, None)))
            continue
        if variable not in targets:
            continue
        labels, values = targets[variable]
        found = margin_data_problems(variable, labels, values, margin_census(data[variable]), locate=locate)
        problems.extend(found)
        if not found:
            out.append(EncodedMargin(variable=variable, labels=labels, targets=values,
                                     codes=margin_codes(data[variable], labels)))
    problems.extend(margin_total_problems(out, locate=locate))
    if problems:
        raise SkipwiseError(problems)
    return out


def margin_table(w: np.ndarray, encoded: list[EncodedMargin], start: np.ndarray | None = None) -> pd.DataFrame:
    """Achieved vs target totals of every category (and the starting totals if given)."""
    return margin_table_of_sums([m.sums(w) for m in encoded], encoded,
                                None if start is None else [m.sums(start) for m in encoded])


def margin_table_of_sums(got: list[np.ndarray], encoded: list[EncodedMargin],
                         before: list[np.ndarray] | None = None) -> pd.DataFrame:
    """:func:`margin_table` from each margin's achieved (and starting) totals."""
    rows = []
    for j, m in enumerate(encoded):
        b_j = before[j] if before is not None else np.full(len(m.labels), np.nan)
        for lab, tgt, b, a in zip(m.labels, m.targets, b_j, got[j]):
            rows.append({"variable": m.variable, "category": lab, "target": float(tgt),
                         "before": float(b), "achieved": float(a), "difference": float(a - tgt)})
    return pd.DataFrame(rows, columns=["variable", "category", "target", "before", "achieved", "difference"])


def max_margin_error(w: np.ndarray, encoded: list[EncodedMargin]) -> float:
    """Largest absolute gap between achieved and target totals, as a share of the total."""
    return max_margin_error_of_sums([m.sums(w) for m in encoded], encoded)


def max_margin_error_of_sums(sums: list[np.ndarray], encoded: list[EncodedMargin]) -> float:
    """:func:`max_margin_error` from each margin's achieved totals."""
    total = max(encoded[0].total, 1e-300)
    return max(float(np.max(np.abs(s - m.targets))) for s, m in zip(sums, encoded)) / total


def worst_margins_text(w: np.ndarray, encoded: list[EncodedMargin], k: int = 5) -> str:
    """The k categories furthest from their targets, for error messages."""
    return worst_margins_text_of_sums([m.sums(w) for m in encoded], encoded, k)


def worst_margins_text_of_sums(sums: list[np.ndarray], encoded: list[EncodedMargin], k: int = 5) -> str:
    """:func:`worst_margins_text` from each margin's achieved totals."""
    table = margin_table_of_sums(sums, encoded)
    table = table.reindex(table["difference"].abs().sort_values(ascending=False).index).head(k)
    return "; ".join(f"{r.variable}={r.category}: achieved {r.achieved:,.6g} vs target {r.target:,.6g}"
                     for r in table.itertuples())
