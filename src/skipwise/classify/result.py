"""The :class:`Classification` result: statuses, counts, per-case summaries, faults.

Statuses are held as a compact int8 code matrix (cases x items) with a fixed
list of categories; :attr:`Classification.status` presents them as a frame of
categorical status strings.  Every count is a plain sum over cases, so counts
of chunks of rows add up to the counts of the whole file.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
import pandas as pd

from skipwise.classify import cells as K
from skipwise.classify import statuses as S
from skipwise.classify.faultlist import fault_listing
from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError
from skipwise.questionnaire.model import Questionnaire
from skipwise.rules.evaluate import TRUE, UNK, isin_small

__all__ = ["Classification", "status_categories"]


def status_categories(q: Questionnaire) -> tuple[str, ...]:
    """All statuses a questionnaire can produce, in report order."""
    return (S.ANSWERED, S.SKIPPED, *q.nonresponse_reasons, S.ITEM_MISSING, S.GATE_UNKNOWN, S.BREAKOFF,
            S.LEFT_BLANK, S.OFF_ROUTE, S.WRONG_CODE, S.INVALID)


@dataclass(frozen=True, eq=False)
class Classification:
    """Statuses of every (case, item) and what follows from them.

    Attributes
    ----------
    questionnaire
        The questionnaire classified against.
    codes
        int8 matrix (cases x items) of indexes into ``categories``.
    kinds, universe
        What each cell stored (:mod:`skipwise.classify.cells`) and the
        three-valued universe of each cell (0 out, 1 unknown, 2 in).
    """

    questionnaire: Questionnaire
    codes: np.ndarray
    kinds: np.ndarray
    universe: np.ndarray
    categories: tuple[str, ...]
    index: pd.Index
    case_ids: np.ndarray
    data: pd.DataFrame

    # -- statuses -----------------------------------------------------------------------------
    @property
    def items(self) -> tuple[str, ...]:
        return self.questionnaire.item_names

    @cached_property
    def status(self) -> pd.DataFrame:
        """One column per item, the data's row order and index, categorical status strings."""
        cols = {name: pd.Categorical.from_codes(self.codes[:, j], categories=list(self.categories))
                for j, name in enumerate(self.items)}
        return pd.DataFrame(cols, index=self.index)

    def code(self, status: str) -> int:
        return self.categories.index(status)

    def _is(self, statuses: tuple[str, ...] | list[str]) -> np.ndarray:
        wanted = [self.categories.index(s) for s in statuses if s in self.categories]
        return isin_small(self.codes, wanted)

    def mask(self, *statuses: str) -> pd.DataFrame:
        """Boolean frame: cells holding any of the given statuses."""
        return pd.DataFrame(self._is(list(statuses)), index=self.index, columns=list(self.items))

    @property
    def nonresponse_statuses(self) -> tuple[str, ...]:
        return (*self.questionnaire.nonresponse_reasons, S.ITEM_MISSING)

    def nonresponse_mask(self) -> pd.DataFrame:
        """In-universe item nonresponse: a nonresponse reason or ``item_missing``."""
        return self.mask(*self.nonresponse_statuses)

    @cached_property
    def _applicable(self) -> np.ndarray:
        """In universe: the rule held, or it was unknown but the cell shows the item was asked."""
        asked = (self.kinds == K.SUBST) | (self.kinds == K.NONRESP)
        return (self.universe == TRUE) | ((self.universe == UNK) & asked) | (self.codes == self.code(S.BREAKOFF))

    def universe_mask(self) -> pd.DataFrame:
        """Cells in the item's universe (break-offs and left_blank included; gate unknown excluded)."""
        return pd.DataFrame(self._applicable, index=self.index, columns=list(self.items))

    # -- counts -------------------------------------------------------------------------------
    def counts(self, weight: pd.Series | np.ndarray | None = None) -> pd.DataFrame:
        """Count (or weighted total) of every status for every item: items x statuses."""
        w = _weights(weight, len(self.index))
        k = len(self.categories)
        rows = [np.bincount(self.codes[:, j], weights=w, minlength=k) for j in range(len(self.items))]
        out = pd.DataFrame(np.array(rows).reshape(len(self.items), k), index=list(self.items),
                           columns=list(self.categories))
        return out if w is not None else out.astype(np.int64)

    def item_summary(self, weight: pd.Series | np.ndarray | None = None) -> pd.DataFrame:
        """Per item: cases, cases in universe, every status count and the nonresponse rates.

        Every figure comes from :func:`skipwise.rates.item_rates`, the package's one
        definition of the item rates (docs/contract.md §2): the item nonresponse rate is
        (nonresponse reasons + ``item_missing``) / D, where D is the cells in universe
        excluding ``breakoff`` and ``left_blank``; ``gate_unknown``, ``breakoff`` and
        ``left_blank`` are shown apart and are in neither numerator nor denominator.
        """
        from skipwise.rates import item_rates  # the rates module builds on this one

        w = _weights(weight, len(self.index))
        rates = item_rates(self, w)
        table = rates.table(w is not None)
        cats = list(self.categories)
        counts = pd.DataFrame(rates.status_counts(cats, weighted=w is not None), index=list(self.items),
                              columns=cats)
        q = self.questionnaire
        out = pd.DataFrame({
            "section": [q.item(i).section for i in self.items],
            "item": list(self.items),
            "label": [q.item(i).label for i in self.items],
            "rule": [q.item(i).rule_text for i in self.items],
            "cases": float(w.sum()) if w is not None else len(self.index),
            "in_universe": table["D"].to_numpy(),
        }, index=list(self.items))
        out = pd.concat([out, counts], axis=1)
        out["nonresponse"] = table["nonresponse"].to_numpy()
        out["nonresponse_rate"] = table["nonresponse_rate"].to_numpy()
        for reason in q.nonresponse_reasons:
            out[f"{reason}_rate"] = table[f"{reason}_rate"].to_numpy()
        return out

    @cached_property
    def cases(self) -> pd.DataFrame:
        """Per case: items applicable, answered, nonresponse, break-off, faults and share answered.

        An optional item left blank (``left_blank``) required no answer: it is not applicable
        here, so it never lowers the share answered nor moves a case between complete and
        partial (docs/contract.md §1).
        """
        applicable = (self._applicable & ~self._is((S.LEFT_BLANK,))).sum(axis=1)
        answered = (self.codes == self.code(S.ANSWERED)).sum(axis=1)
        nonresp = self._is(self.nonresponse_statuses).sum(axis=1)
        broke = (self.codes == self.code(S.BREAKOFF)).sum(axis=1)
        faults = self._is(S.FAULT_STATUSES).sum(axis=1)
        with np.errstate(invalid="ignore", divide="ignore"):
            share = np.where(applicable > 0, answered / np.maximum(applicable, 1), np.nan)
        return pd.DataFrame({
            "case_id": self.case_ids, "applicable": applicable, "answered": answered,
            "nonresponse": nonresp, "breakoff_items": broke, "broke_off": broke > 0,
            "faults": faults, "share_answered": share,
        }, index=self.index)

    # -- routing faults -----------------------------------------------------------------------
    @cached_property
    def faults(self) -> pd.DataFrame:
        """One row per ``off_route``, ``wrong_code`` or ``invalid`` cell, with the rule and its inputs.

        Built on first use, column by column (:mod:`skipwise.classify.faultlist`).
        """
        return self.fault_listing_of()

    def fault_listing_of(self, which: np.ndarray | None = None) -> pd.DataFrame:
        """:attr:`faults` of the items at positions ``which`` only (ascending; all when None)."""
        return fault_listing(self.questionnaire, self.codes, self.categories,
                             [self.code(s) for s in S.FAULT_STATUSES], self.case_ids, self.data, which)

    # -- analysis views -----------------------------------------------------------------------
    def analysis_values(self, data: pd.DataFrame | None = None) -> pd.DataFrame:
        """Numeric stored values where the item is answered, NaN elsewhere (multi sets: option columns)."""
        data = self.data if data is None else data
        out = {}
        answered = self.codes == self.code(S.ANSWERED)
        for j, name in enumerate(self.items):
            item = self.questionnaire.item(name)
            for col in item.columns:
                num, _, _ = K.column_views(data[col])
                out[col] = np.where(answered[:, j], num, np.nan)
        return pd.DataFrame(out, index=self.index)


def _weights(weight: pd.Series | np.ndarray | None, n: int) -> np.ndarray | None:
    if weight is None:
        return None
    try:
        w = np.asarray(weight, dtype=np.float64)
    except (TypeError, ValueError):
        raise SkipwiseError(Problem(code=ProblemCode.BAD_WEIGHTS, category=Category.DATA,
                                    message="the weights are not numbers",
                                    hint="give a numeric weight column")) from None
    if w.shape != (n,):
        raise SkipwiseError(Problem(code=ProblemCode.BAD_WEIGHTS, category=Category.DATA,
                                    message=f"{w.shape[0] if w.ndim else 0} weights for {n} cases",
                                    hint="give one weight per case, in the data's row order"))
    return np.where(np.isnan(w), 0.0, w)

