"""Classify every (case, item) cell against the questionnaire's routing.

Items are classified in interview order, so a rule's inputs already have
their status when the rule is evaluated.  For each item:

1. the stored cells are decoded (:mod:`skipwise.classify.cells`);
2. the item's universe is evaluated with three-valued logic
   (:mod:`skipwise.rules.evaluate`) over the earlier items' *rule values*:
   an answered item has its value; a skipped or off-route item is absent
   (its questionnaire routing says it was not asked), and so is an optional
   item left blank (no answer was required); every other status is unknown;
3. kind and universe give the status through a fixed table (DESIGN §3):

   ========== ============ ============ ============
   stored     out          unknown      in universe
   ========== ============ ============ ============
   blank      skipped      gate_unknown item_missing
   structural skipped      gate_unknown wrong_code
   nonresp.   off_route    *reason*     *reason*
   answer     off_route    answered     answered
   invalid    invalid      invalid      invalid
   ========== ============ ============ ============

   On an item marked ``optional: true`` a blank in universe is
   ``left_blank`` instead of ``item_missing``; the rest of the table holds.

4. finally break-offs are found (:mod:`skipwise.classify.breakoff`).

Everything is row-local: classifying a chunk of rows gives the same
statuses as classifying the whole file, so chunks can be processed apart and
their counts added.
"""

from __future__ import annotations

from typing import Callable

import numpy as np
import pandas as pd

from skipwise.classify import cells as K
from skipwise.classify import statuses as S
from skipwise.classify.breakoff import apply_breakoff
from skipwise.classify.result import Classification, status_categories
from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError, did_you_mean
from skipwise.questionnaire.model import Item, ItemType, Questionnaire
from skipwise.rules.evaluate import ABSENT, KNOWN, TRUE, UNK, UNKNOWN, Operand, evaluate, isin_small

__all__ = ["classify", "check_columns"]

ProgressFn = Callable[[int, int], None]


def check_columns(data: pd.DataFrame, q: Questionnaire) -> None:
    """Raise one error listing every questionnaire column missing from the data."""
    missing = [c for c in (q.case_id, *q.context, *q.columns) if c not in data.columns]
    if missing:
        def what(c: str) -> str:
            return "the case id column" if c == q.case_id else \
                "context column" if c in q.context else "column"

        problems = [Problem(code=ProblemCode.MISSING_COLUMN, category=Category.DATA, file=q.path,
                            item=None if c == q.case_id or c in q.context else c,
                            message=f"{what(c)} '{c}' is not in the data",
                            hint=did_you_mean(c, [str(x) for x in data.columns]) or
                            "add the column or remove it from the questionnaire") for c in missing]
        raise SkipwiseError(problems, headline=f"{len(missing)} questionnaire column(s) missing from the data")


class _Env:
    """Rule inputs for every case, filled in as items are classified."""

    def __init__(self, data: pd.DataFrame, q: Questionnaire):
        self.data = data
        self.q = q
        self.n = len(data)
        self._operands: dict[str, Operand] = {}
        self._answered: dict[str, np.ndarray] = {}
        self._codes: dict[str, tuple[Item, np.ndarray]] = {}

    def operand(self, name: str) -> Operand:
        if name not in self._operands:  # a context column, read on first use
            num, txt, blank = K.column_views(self.data[name])
            values = num
            if txt is not None and np.isnan(num[~blank]).any():
                values = txt  # a text column: some stored values are not numbers
            state = np.where(blank, UNKNOWN, KNOWN).astype(np.int8)
            self._operands[name] = Operand(values, state)
            self._answered[name] = ~blank
        return self._operands[name]

    def answered(self, name: str) -> np.ndarray:
        if name not in self._answered:
            self.operand(name)
        return self._answered[name]

    def has_code(self, name: str, reason: str) -> np.ndarray:
        item, code = self._codes[name]
        return isin_small(code, [i for i, c in enumerate(item.codes) if c.reason == reason])

    def add(self, item: Item, dec: K.Decoded, status: np.ndarray, state_of: np.ndarray) -> None:
        """Record an item's rule values: its state is looked up from its status codes."""
        state = np.take(state_of, status)
        answered = dec.kind == K.SUBST
        self._codes[item.name] = (item, dec.code)
        self._answered[item.name] = answered
        self._operands[item.name] = Operand(dec.values, state)
        if item.type is ItemType.MULTI:
            for col in item.columns:
                num, _, _ = K.column_views(self.data[col])
                self._operands[col] = Operand(num, state)
                self._answered[col] = answered
                self._codes[col] = (item, dec.code)


def classify(data: pd.DataFrame, questionnaire: Questionnaire, *, progress: ProgressFn | None = None) -> Classification:
    """Give every (case, item) of ``data`` exactly one status (DESIGN §3).

    Parameters
    ----------
    data
        The survey file, one row per case, holding every column the
        questionnaire names (special codes as stored values).
    questionnaire
        A loaded :class:`~skipwise.questionnaire.Questionnaire`.
    progress
        Optional callback ``progress(items_done, items_total)``.

    Returns
    -------
    Classification
        Status frame, counts, per-case summaries and the routing-fault list.

    Raises
    ------
    SkipwiseError
        When questionnaire columns are missing from the data.
    """
    q = questionnaire
    check_columns(data, q)
    cats = status_categories(q)
    code_of = {c: i for i, c in enumerate(cats)}
    n, p = len(data), len(q.items)
    status = np.empty((n, p), dtype=np.int8, order="F")
    kinds = np.empty((n, p), dtype=np.int8, order="F")
    universe = np.empty((n, p), dtype=np.int8, order="F")
    env = _Env(data, q)
    # Rule value of each status: answered is known; skipped, off_route and left_blank absent; the rest unknown.
    state_of = np.array([KNOWN if c == S.ANSWERED else ABSENT if c in S.ABSENT_AS_INPUT else UNKNOWN
                         for c in cats], dtype=np.int8)
    base = _status_table(code_of).ravel()
    base_optional = _status_table(code_of, optional=True).ravel()
    for j, item in enumerate(q.items):
        dec = K.decode_item(item, data)
        u = evaluate(item.rule, env) if item.rule is not None else np.full(n, TRUE, dtype=np.int8)
        st = np.take(base_optional if item.optional else base, dec.kind * np.int8(3) + u)
        nonresp = st < 0
        if nonresp.any():
            reason_code = np.array([code_of.get(c.reason, -1) for c in item.codes] + [-1], dtype=np.int8)
            st[nonresp] = reason_code[dec.code[nonresp]]
        status[:, j], kinds[:, j], universe[:, j] = st, dec.kind, u
        env.add(item, dec, st, state_of)
        if progress is not None:
            progress(j + 1, p)
    apply_breakoff(status, kinds, data, q, code_of)
    return Classification(questionnaire=q, codes=status, kinds=kinds, universe=universe, categories=cats,
                          index=data.index, case_ids=data[q.case_id].to_numpy(), data=data)


def _status_table(code_of: dict[str, int], *, optional: bool = False) -> np.ndarray:
    """Status code by [kind, universe]; -1 marks 'the code's nonresponse reason'.

    ``optional``: the table of an item marked ``optional: true``, where an in-universe blank is
    ``left_blank`` (no answer was required) instead of ``item_missing``.
    """
    sk, gu = code_of[S.SKIPPED], code_of[S.GATE_UNKNOWN]
    im = code_of[S.LEFT_BLANK] if optional else code_of[S.ITEM_MISSING]
    wc, orr, an, inv = code_of[S.WRONG_CODE], code_of[S.OFF_ROUTE], code_of[S.ANSWERED], code_of[S.INVALID]
    table = np.empty((5, 3), dtype=np.int8)
    #                     out  unknown  in   (universe FALSE=0, UNK=1, TRUE=2)
    table[K.BLANK] = (sk, gu, im)
    table[K.STRUCT] = (sk, gu, wc)
    table[K.NONRESP] = (orr, -1, -1)
    table[K.SUBST] = (orr, an, an)
    table[K.INVALID] = (inv, inv, inv)
    assert UNK == 1 and TRUE == 2
    return table
