"""Adapter from cell statuses to the cells a missingness diagnostic may use.

A legitimately skipped cell is not missing: the question was never meant to be
asked.  Every diagnostic in this package therefore works on the cells *in
scope* for an item: in the item's universe and either answered or carrying
item nonresponse.  Cells in universe with any other status (break-off, invalid
value, wrong structural code, or an answer with no numeric value) are set
aside and counted, so that the nonresponse indicator means exactly
"asked, and no usable answer was given".
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np
import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError

__all__ = ["MissingnessFrame", "JointFrame", "missingness_frame"]


@dataclass(frozen=True, kw_only=True, eq=False)
class JointFrame:
    """Values of several items over the cases in scope for all of them.

    Attributes
    ----------
    frame
        Item values (NaN = item nonresponse), one column per item, only the
        cases in scope for every chosen item.
    n_cases_total
        Number of cases in the data.
    n_dropped
        Cases left out because at least one chosen item was out of scope.
    description
        One sentence saying which cases were used (for reports).
    """

    frame: pd.DataFrame
    n_cases_total: int
    n_dropped: int
    description: str


@dataclass(frozen=True, kw_only=True, eq=False)
class MissingnessFrame:
    """Item values, scope and nonresponse indicators, aligned with the data.

    Attributes
    ----------
    values
        Numeric values where the item was answered, NaN elsewhere.
    in_scope
        True where the cell is in universe and is either answered or item nonresponse.
    missing
        True where the cell is in scope and is item nonresponse.
    counts
        One row per item: ``n_cases``, ``out_of_universe``, ``set_aside`` (in
        universe but neither answered nor nonresponse), ``in_scope``,
        ``answered``, ``numeric_answers``, ``nonresponse`` and ``nonresponse_rate``
        (nonresponse / in scope).
    """

    values: pd.DataFrame
    in_scope: pd.DataFrame
    missing: pd.DataFrame
    counts: pd.DataFrame

    @property
    def items(self) -> tuple[str, ...]:
        return tuple(str(c) for c in self.values.columns)

    def item_values(self, item: str) -> pd.Series:
        """Values of one item over its in-scope cases (NaN = nonresponse)."""
        self._check(item)
        return self.values.loc[self.in_scope[item], item]

    def indicator(self, item: str) -> pd.Series:
        """Nonresponse indicator (True = nonresponse) over the item's in-scope cases."""
        self._check(item)
        return self.missing.loc[self.in_scope[item], item]

    def joint(self, items: Sequence[str]) -> JointFrame:
        """Values of ``items`` over the cases in scope for all of them.

        Restricting to the common scope keeps routing out of the pattern of
        missingness: a case routed past an item has no value to be missing.
        """
        items = list(items)
        for item in items:
            self._check(item)
        keep = self.in_scope[items].all(axis=1)
        n_total = len(keep)
        n_keep = int(keep.sum())
        desc = (f"{n_keep:,} of {n_total:,} cases: those in scope (in universe, and answered or "
                f"item nonresponse) for every chosen item ({', '.join(items)})")
        return JointFrame(frame=self.values.loc[keep, items], n_cases_total=n_total,
                          n_dropped=n_total - n_keep, description=desc)

    def _check(self, item: str) -> None:
        if item not in self.values.columns:
            from skipwise.errors import did_you_mean

            raise SkipwiseError(Problem(
                code=ProblemCode.UNKNOWN_NAME, category=Category.USAGE, item=str(item),
                message="no such item in the diagnostics frame",
                hint=did_you_mean(item, self.items) or "choose one of the questionnaire's items",
            ))


def _as_bool_frame(mask: pd.DataFrame, name: str, like: pd.DataFrame) -> pd.DataFrame:
    if not isinstance(mask, pd.DataFrame):
        raise SkipwiseError(Problem(code=ProblemCode.BAD_DATA, category=Category.DATA,
                                    message=f"{name} must be a DataFrame of True/False"))
    if not mask.index.equals(like.index) or list(mask.columns) != list(like.columns):
        raise SkipwiseError(Problem(
            code=ProblemCode.BAD_DATA, category=Category.DATA,
            message=f"{name} does not have the same rows and columns as the values",
            hint="build all frames from the same classification",
        ))
    return mask.fillna(False).astype(bool)


def missingness_frame(values: pd.DataFrame, universe_mask: pd.DataFrame,
                      nonresponse_mask: pd.DataFrame, *,
                      answered_mask: pd.DataFrame | None = None) -> MissingnessFrame:
    """Keep, per item, only the cells in universe that are answered or item nonresponse.

    Parameters
    ----------
    values
        Numeric item values where answered, NaN elsewhere (one column per item).
    universe_mask
        True where the cell is in the item's universe.
    nonresponse_mask
        True where the cell is in-universe item nonresponse (nonresponse codes
        and unexplained blanks).  Must imply ``universe_mask``.
    answered_mask
        True where the cell holds a substantive answer.  If omitted, a cell in
        universe, not nonresponse, with a non-NaN value counts as answered.

    Returns
    -------
    MissingnessFrame

    Raises
    ------
    SkipwiseError
        If the frames are not aligned, or nonresponse is flagged outside the universe.
    """
    if not isinstance(values, pd.DataFrame):
        raise SkipwiseError(Problem(code=ProblemCode.BAD_DATA, category=Category.DATA,
                                    message="values must be a DataFrame"))
    universe = _as_bool_frame(universe_mask, "universe_mask", values)
    nonresp = _as_bool_frame(nonresponse_mask, "nonresponse_mask", values)
    bad = nonresp & ~universe
    if bad.to_numpy().any():
        cols = [str(c) for c in bad.columns[bad.any(axis=0).to_numpy()]]
        raise SkipwiseError(Problem(
            code=ProblemCode.BAD_DATA, category=Category.DATA, item=", ".join(cols[:10]),
            message="item nonresponse is flagged for cells outside the universe",
            hint="nonresponse must be in-universe nonresponse (check the masks' alignment)",
        ))
    numeric = values.apply(pd.to_numeric, errors="coerce").astype(float)
    if answered_mask is None:
        answered = universe & ~nonresp & numeric.notna()
    else:
        # an answer with no numeric value (text, dates) still answers the question: its
        # indicator is right, but its value is NaN, so such items suit only indicator-based checks
        answered = _as_bool_frame(answered_mask, "answered_mask", values) & universe & ~nonresp
    in_scope = answered | nonresp
    clean = numeric.where(answered & numeric.notna())
    n = len(values)
    counts = pd.DataFrame({
        "n_cases": n,
        "out_of_universe": (~universe).sum(axis=0),
        "set_aside": (universe & ~in_scope).sum(axis=0),
        "in_scope": in_scope.sum(axis=0),
        "answered": answered.sum(axis=0),
        "numeric_answers": clean.notna().sum(axis=0),
        "nonresponse": nonresp.sum(axis=0),
    })
    with np.errstate(invalid="ignore", divide="ignore"):
        counts["nonresponse_rate"] = counts["nonresponse"] / counts["in_scope"].where(counts["in_scope"] > 0)
    counts.index.name = "item"
    return MissingnessFrame(values=clean, in_scope=in_scope, missing=nonresp & in_scope, counts=counts)
