"""Classify every (case, item) cell against the questionnaire's routing.

Items are classified in interview order, so a rule's inputs already have
their status when the rule is evaluated.  For each item:

1. the stored cells are decoded (:mod:`skipwise.classify.cells`);
2. the item's universe is evaluated with three-valued logic
   (:mod:`skipwise.rules.evaluate`) over the earlier items' *rule values*:
   an answered item has its value; a skipped or off-route item is absent
   (its questionnaire routing says it was not asked), and so is an optional
   item left blank (no answer was required); every other status is unknown;
3. kind and universe give the status through a fixed table (docs/contract.md §1):

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

import os
from concurrent.futures import ThreadPoolExecutor
from typing import Callable

import numpy as np
import pandas as pd

from skipwise.caseids import id_values
from skipwise.classify import cells as K
from skipwise.classify import statuses as S
from skipwise.classify.breakoff import apply_breakoff
from skipwise.classify.result import Classification, status_categories
from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError, did_you_mean
from skipwise.questionnaire.model import Item, ItemType, Questionnaire
from skipwise.rules import ast
from skipwise.rules.evaluate import ABSENT, KNOWN, TRUE, UNK, UNKNOWN, Operand, evaluate, isin_small

__all__ = ["classify", "check_columns", "default_jobs", "BLOCK_ROWS"]

ProgressFn = Callable[[int, int], None]


def check_columns(data: pd.DataFrame, q: Questionnaire) -> None:
    """Raise one error listing every questionnaire column missing from the data."""
    paradata = [c for c in (q.breakoff.last_item, q.breakoff.disposition) if c]
    missing = [c for c in dict.fromkeys((q.case_id, *q.context, *paradata, *q.columns)) if c not in data.columns]
    if missing:
        def what(c: str) -> str:
            return "the case id column" if c == q.case_id else \
                "context column" if c in q.context else \
                "breakoff paradata column" if c in paradata else "column"

        problems = [Problem(code=ProblemCode.MISSING_COLUMN, category=Category.DATA, file=q.path,
                            item=None if c == q.case_id or c in q.context or c in paradata else c,
                            message=f"{what(c)} '{c}' is not in the data",
                            hint=did_you_mean(c, [str(x) for x in data.columns]) or
                            "add the column or remove it from the questionnaire") for c in missing]
        raise SkipwiseError(problems, headline=f"{len(missing)} questionnaire column(s) missing from the data")


class _Env:
    """Rule inputs for every case of one block, filled in as items are classified."""

    def __init__(self, data: pd.DataFrame, q: Questionnaire):
        self.data = data
        self.q = q
        self.n = len(data)
        self._operands: dict[str, Operand] = {}
        self._answered: dict[str, np.ndarray] = {}
        self._codes: dict[str, tuple[Item, np.ndarray]] = {}
        self._numbers: dict[str, tuple[Item, np.ndarray, np.ndarray]] = {}  # fast-path items: values, kinds

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
            if name in self._numbers:
                self._answered[name] = self._numbers[name][2] == K.SUBST
            else:
                self.operand(name)
        return self._answered[name]

    def has_code(self, name: str, reason: str) -> np.ndarray:
        if name not in self._codes:  # a fast-path item: its codes matched on first use
            item, x, _ = self._numbers[name]
            self._codes[name] = (item, K.match_codes(item.codes, x))
        item, code = self._codes[name]
        return isin_small(code, [i for i, c in enumerate(item.codes) if c.reason == reason])

    def add(self, item: Item, dec: K.Decoded, state: np.ndarray) -> None:
        """Record an item's rule values (``state``: the rule state its statuses give)."""
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

    def add_number(self, item: Item, x: np.ndarray, kind: np.ndarray, state: np.ndarray) -> None:
        """Record a fast-path item: its values and states now, its codes and answers when a rule asks."""
        self._operands[item.name] = Operand(x, state)
        self._numbers[item.name] = (item, x, kind)


#: Rows per block.  Fixed, so the blocks (and so the results) never depend on ``jobs``.
BLOCK_ROWS = 1 << 16


def default_jobs() -> int:
    """Threads used when none are asked for: the machine's cores (those this process may use)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):  # not every platform has affinity masks
        return max(1, os.cpu_count() or 1)


def classify(data: pd.DataFrame, questionnaire: Questionnaire, *, progress: ProgressFn | None = None,
             jobs: int | None = None) -> Classification:
    """Give every (case, item) of ``data`` exactly one status (docs/contract.md §1).

    Parameters
    ----------
    data
        The survey file, one row per case, holding every column the
        questionnaire names (special codes as stored values).
    questionnaire
        A loaded :class:`~skipwise.questionnaire.Questionnaire`.
    progress
        Optional callback ``progress(items_done, items_total)``.
    jobs
        Threads classifying blocks of rows at once (default: the machine's
        cores).  Classification is row-local and the blocks are fixed, so
        the result is the same for every ``jobs``.

    Returns
    -------
    Classification
        Status frame, counts, per-case summaries and the routing-fault list.

    Raises
    ------
    SkipwiseError
        When questionnaire columns are missing from the data, or ``jobs`` is not a positive number.
    """
    q = questionnaire
    check_columns(data, q)
    jobs = default_jobs() if jobs is None else jobs
    if isinstance(jobs, bool) or not isinstance(jobs, (int, np.integer)) or jobs < 1:
        raise SkipwiseError(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE,
                                    message=f"jobs must be a whole number of at least 1, not {jobs!r}",
                                    hint="give the number of threads, e.g. 2, or leave it out to use every core"))
    cats = status_categories(q)
    n, p = len(data), len(q.items)
    status = np.empty((n, p), dtype=np.int8, order="F")
    kinds = np.empty((n, p), dtype=np.int8, order="F")
    universe = np.empty((n, p), dtype=np.int8, order="F")
    tables = _Tables(q, cats)
    numbers = _number_columns(data, q, tables)
    starts = list(range(0, n, BLOCK_ROWS)) or [0]
    blocks = [(lo, min(lo + BLOCK_ROWS, n)) for lo in starts]
    units = len(blocks) * p
    done = [0]

    def advance(k: int) -> None:
        done[0] += k
        if progress is not None:
            progress(done[0] * p // units if units else p, p)

    def run(block: tuple[int, int], per_item: Callable[[int], None] | None) -> None:
        lo, hi = block
        _classify_block(data.iloc[lo:hi], lo, q, tables, numbers, status[lo:hi], kinds[lo:hi], universe[lo:hi],
                        per_item)

    if jobs == 1 or len(blocks) == 1:
        for block in blocks:
            run(block, advance)
    else:
        with ThreadPoolExecutor(max_workers=min(jobs, len(blocks))) as pool:
            futures = [pool.submit(run, block, None) for block in blocks]
            for future in futures:  # in block order, so the first failing block is the one reported
                future.result()
                advance(p)
    return Classification(questionnaire=q, codes=status, kinds=kinds, universe=universe, categories=cats,
                          index=data.index, case_ids=id_values(data[q.case_id]).to_numpy(), data=data)


class _Tables:
    """Lookup tables of one questionnaire, shared by every block."""

    def __init__(self, q: Questionnaire, cats: tuple[str, ...]):
        self.code_of = code_of = {c: i for i, c in enumerate(cats)}
        # Rule value of each status: answered is known; skipped, off_route and left_blank absent; the rest unknown.
        self.state_of = np.array([KNOWN if c == S.ANSWERED else ABSENT if c in S.ABSENT_AS_INPUT else UNKNOWN
                                  for c in cats], dtype=np.int8)
        self.base = _status_table(code_of).ravel()
        self.base_optional = _status_table(code_of, optional=True).ravel()
        self.reason_code = {item.name: np.array([code_of.get(c.reason, -1) for c in item.codes] + [-1], dtype=np.int8)
                            for item in q.items}
        self.plans = {item.name: K.numeric_plan(item, (self.base_optional if item.optional else self.base).reshape(5, 3),
                                                 self.reason_code[item.name], self.state_of)
                      for item in q.items if item.type is not ItemType.MULTI}
        # Names some rule reads: only their rule states are kept.
        self.read = {name for item in q.items if item.rule is not None for name, _ in ast.names(item.rule)}


def _number_columns(data: pd.DataFrame, q: Questionnaire, t: _Tables
                    ) -> dict[str, tuple[K.NumericPlan, np.ndarray | None]]:
    """Fast-path items: plan and stored numbers.

    The numbers are the column's own numpy array (no copy; float64 per block later), or None for
    a pandas extension dtype (nullable integers, Arrow numbers), read per block through pandas.
    """
    out: dict[str, tuple[K.NumericPlan, np.ndarray | None]] = {}
    for item in q.items:
        plan = t.plans.get(item.name)
        if plan is None:
            continue
        series = data[item.name]
        if K.numeric_fast_path(item, series):
            out[item.name] = (plan, series.to_numpy() if isinstance(series.dtype, np.dtype) else None)
    return out


def _classify_block(data: pd.DataFrame, lo: int, q: Questionnaire, t: _Tables,
                    numbers: dict[str, tuple[K.NumericPlan, np.ndarray | None]], status: np.ndarray, kinds: np.ndarray,
                    universe: np.ndarray, per_item: Callable[[int], None] | None) -> None:
    """Classify the rows of ``data`` (from row ``lo`` of the file) into the matching matrix rows (in place)."""
    n = len(data)
    env = _Env(data, q)
    scratch = K.Scratch(n, max((plan.classes for plan, _ in numbers.values()), default=2))
    for j, item in enumerate(q.items):
        # The rule reads earlier items only, so the universe comes first.
        u = evaluate(item.rule, env) if item.rule is not None else None
        if u is None:
            universe[:, j] = TRUE
        else:
            universe[:, j] = u
        number = numbers.get(item.name)
        if number is not None:
            plan, column = number
            if column is None:
                x = K.column_views(data[item.name])[0]
            else:
                x = column[lo:lo + n]
                if x.dtype != np.float64:
                    x = x.astype(np.float64)
            state = np.empty(n, dtype=np.int8) if item.name in t.read else None
            K.decode_numeric(plan, x, u, status[:, j], kinds[:, j], state, scratch)
            if state is not None:
                env.add_number(item, x, kinds[:, j], state)
        else:
            dec = K.decode_item(item, data)
            uu = universe[:, j]
            st = np.take(t.base_optional if item.optional else t.base, dec.kind * np.int8(3) + uu)
            nonresp = st < 0
            if nonresp.any():
                st[nonresp] = t.reason_code[item.name][dec.code[nonresp]]
            status[:, j], kinds[:, j] = st, dec.kind
            env.add(item, dec, np.take(t.state_of, st))
        if per_item is not None:
            per_item(1)
    apply_breakoff(status, kinds, data, q, t.code_of)


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
