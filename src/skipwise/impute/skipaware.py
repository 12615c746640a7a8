"""Skip-consistent imputation: fill only in-universe nonresponse, in interview order,
re-deriving every later item's universe after a gate is imputed.

How it works, per completed dataset:

1. Classify the data. The cells to fill are those whose status is in the chosen
   set (default: every nonresponse reason and ``item_missing``). Skipped cells are
   never filled; ``off_route``, ``wrong_code`` and ``invalid`` cells are left as
   they are and counted in the result.
2. Visit the imputed items in interview order (so a gate comes before the items
   it routes). Before each item, re-classify the partly completed frame if
   anything was filled since the last classification: an item whose gate was
   unknown (``gate_unknown``) now comes into universe (blank → ``item_missing``,
   which is then filled) or falls out of it (→ ``skipped``).
3. Draw values from the item's answered cases (hot-deck within classes, nearest
   donor, PMM, regression, logistic or multinomial models, or a single value)
   and make them obey the item: only its declared values, integers rounded,
   numbers clipped to the range, never a special code's value.
4. After filling a gate, re-classify the filled cases (classification is
   row-local): a filled value must not create a routing fault (an answer or
   nonresponse code of a later item falling out of universe, a structural code
   coming into it). Such cases are redrawn, up to ``max_redraws`` rounds; then
   the donor values are tried one by one and a consistent one drawn at random
   (in proportion to donor frequency). Cases with no consistent value are
   counted in the notes.
   When no value fits — a later item was asked *because* this one was not
   answered, e.g. ``asked_if: not answered(income)`` — the cell keeps its stored
   value and is counted as left unfilled, with a note.
5. Cells that were to be filled or ``gate_unknown`` and end ``skipped`` are left blank, or get
   the item's structural code (``skip_fill``: ``blank``, ``code``, or ``auto`` =
   the code when most of the item's skipped cells in the input carry one).

References
----------
Raghunathan, T. E., Lepkowski, J. M., Van Hoewyk, J. and Solenberger, P. (2001). A
multivariate technique for multiply imputing missing values using a sequence of
regression models. *Survey Methodology* 27(1), 85–95 (bounds and restrictions on
who is imputed).
van Buuren, S. (2018). *Flexible Imputation of Missing Data*, 2nd ed. CRC, sec. 6.5
(skip patterns and conditional imputation).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable, Mapping

import numpy as np
import pandas as pd

from skipwise.classify import classify
from skipwise.classify import statuses as S
from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError
from skipwise.impute.chained import spawn_generators
from skipwise.impute.fit import method_misfit
from skipwise.impute.skipdraw import draw_item, skip_code
from skipwise.impute.result import MNAR_CAUTION
from skipwise.questionnaire.model import ItemType, Questionnaire
from skipwise.rules import ast

__all__ = ["ItemRule", "SkipAwareSpec", "SkipAwareResult", "impute_skipaware", "SKIP_METHODS",
           "NEVER_IMPUTED", "FLAG_LABELS"]

#: Methods of skip-aware imputation (``auto``: logistic / multinomial for categorical, pmm for numbers).
SKIP_METHODS = ("hotdeck", "nearest", "pmm", "regression", "logistic", "multinomial", "auto",
                "mode", "median", "mean")
#: Statuses that are never filled, whatever the plan says.
NEVER_IMPUTED = (S.ANSWERED, S.SKIPPED, S.OFF_ROUTE, S.WRONG_CODE, S.INVALID, S.GATE_UNKNOWN, S.LEFT_BLANK)
#: Meaning of the values of a ``<item>_imp`` flag column.
FLAG_LABELS = {0: "not imputed", 1: "imputed", 2: "routed out by an imputed gate",
               3: "routing fault left as it is (off_route, wrong_code or invalid)"}
IMPUTABLE_TYPES = (ItemType.INTEGER, ItemType.NUMBER, ItemType.CATEGORICAL)


@dataclass(frozen=True, kw_only=True)
class ItemRule:
    """How one item is filled."""

    method: str = "hotdeck"
    classes: tuple[str, ...] = ()
    covariates: tuple[str, ...] = ()
    donors: int = 5
    max_donor_use: int | None = None
    weights: str | None = None


@dataclass(frozen=True, kw_only=True)
class SkipAwareSpec:
    """What to impute and how (the plan file's method part).

    ``include`` None means every integer, number and categorical item.
    ``statuses`` None means every nonresponse reason plus ``item_missing``.
    """

    default: ItemRule = field(default_factory=ItemRule)
    items: Mapping[str, ItemRule] = field(default_factory=dict)
    include: tuple[str, ...] | None = None
    exclude: tuple[str, ...] = ()
    statuses: tuple[str, ...] | None = None
    m: int = 1
    seed: int | None = None
    skip_fill: str = "auto"
    max_redraws: int = 20

    def rule_for(self, name: str) -> ItemRule:
        return self.items.get(name, self.default)

    def targets(self, q: Questionnaire) -> tuple[str, ...]:
        chosen = set(self.include) if self.include is not None else {
            it.name for it in q.items if it.type in IMPUTABLE_TYPES}
        chosen |= set(self.items)
        return tuple(it.name for it in q.items if it.name in chosen and it.name not in self.exclude)

    def eligible(self, q: Questionnaire) -> tuple[str, ...]:
        if self.statuses is not None:
            return tuple(self.statuses)
        return (*q.nonresponse_reasons, S.ITEM_MISSING)


@dataclass(frozen=True, kw_only=True)
class SkipAwareResult:
    """M completed datasets that keep the questionnaire's routing.

    Attributes
    ----------
    datasets
        Completed copies of the input (same columns; special codes of cells not
        filled are kept).
    imputed
        Per dataset, a boolean frame (one column per imputed item): True where filled.
    routed_out
        Per dataset, True where a cell to fill or a ``gate_unknown`` cell ended
        ``skipped`` because a gate was filled.
    status
        The input's statuses, unchanged (the classification before imputation);
        read it together with ``imputed``.
    status_after
        Per dataset, the statuses of the completed data.
    table
        One row per imputed item: method, rule (``items`` or ``plan default``), cells to fill at the start, filled
        (mean over datasets), routed out, left unfilled, faults left as they are.
    """

    datasets: tuple[pd.DataFrame, ...]
    imputed: tuple[pd.DataFrame, ...]
    routed_out: tuple[pd.DataFrame, ...]
    status: pd.DataFrame
    status_after: tuple[pd.DataFrame, ...]
    table: pd.DataFrame
    statuses: tuple[str, ...]
    seed: int | None
    notes: tuple[str, ...] = ()
    cautions: tuple[str, ...] = (MNAR_CAUTION,)

    @property
    def m(self) -> int:
        return len(self.datasets)

    def flags(self, i: int = 0, suffix: str = "_imp") -> pd.DataFrame:
        """``<item><suffix>`` int8 columns of dataset ``i``: 0 not imputed, 1 imputed, 2 routed out,
        3 a routing fault left as it is (see ``FLAG_LABELS``)."""
        imp, out = self.imputed[i], self.routed_out[i]
        fault = self.status[list(imp.columns)].isin(S.FAULT_STATUSES).set_axis(imp.index)
        flag = imp.astype("int8") + 2 * out.astype("int8") + 3 * fault.astype("int8")
        flag.columns = [f"{c}{suffix}" for c in imp.columns]
        return flag

    def with_flags(self, i: int = 0, suffix: str = "_imp") -> pd.DataFrame:
        """Dataset ``i`` with its flag columns appended."""
        return pd.concat([self.datasets[i], self.flags(i, suffix)], axis=1)

    def stacked(self, column: str = "imputation", suffix: str = "_imp") -> pd.DataFrame:
        """All datasets with flags in one frame, numbered 1..M in ``column``."""
        return pd.concat([self.with_flags(i, suffix).assign(**{column: i + 1}) for i in range(self.m)],
                         ignore_index=True)


def impute_skipaware(data: pd.DataFrame, q: Questionnaire, spec: SkipAwareSpec | None = None, *,
                     progress: Callable[[int], None] | None = None) -> SkipAwareResult:
    """Fill in-universe nonresponse so that every completed dataset obeys the routing.

    Parameters
    ----------
    data
        The survey file as read (special codes as stored values).
    q
        Its questionnaire.
    spec
        Methods, statuses to fill, M, seed (default: random hot-deck, M = 1).
    progress
        Called with 1 after each completed dataset.

    Returns
    -------
    SkipAwareResult

    References
    ----------
    Raghunathan, T. E. et al. (2001). *Survey Methodology* 27(1), 85–95.
    """
    spec = spec or SkipAwareSpec()
    targets = spec.targets(q)
    misfits = [Problem(code=ProblemCode.TYPE_CLASH, category=Category.USAGE, item=t, message=bad,
                       hint="give the item its own method" if t not in spec.items else "choose a method that fits")
               for t in targets if (bad := method_misfit(q.item(t), spec.rule_for(t).method))]
    if misfits:
        raise SkipwiseError(misfits)
    eligible = tuple(s for s in spec.eligible(q) if s not in NEVER_IMPUTED)
    cls0 = classify(data, q)
    status0 = cls0.status
    gates = _gates(q)
    fill_codes = {name: skip_code(data, status0, q, name, spec.skip_fill) for name in targets}
    # items not imputed themselves (sets, text, items outside `only`) that an imputed gate may open
    carried = tuple(it.name for it in q.items if it.name not in targets and it.name not in spec.exclude
                    and bool((status0[it.name] == S.GATE_UNKNOWN).any()))
    results, notes = [], []
    for rng in spawn_generators(spec.seed, spec.m):
        results.append(_complete(data, q, spec, targets, eligible, status0, gates, fill_codes, rng, notes,
                                 carried))
        if progress is not None:
            progress(1)
    datasets = tuple(r[0] for r in results)
    # flag columns: every target, and each carried item some completed dataset filled
    keep = [*targets, *(c for c in carried if any(bool(r[1][c].any()) for r in results))]
    imputed = tuple(r[1][keep] for r in results)
    routed = tuple(r[2][keep] for r in results)
    after = tuple(r[3] for r in results)
    start = status0[list(targets)].isin(eligible)
    faults = status0[list(targets)].isin(S.FAULT_STATUSES)
    tl = list(targets)
    table = pd.DataFrame({
        "method": [_method_name(spec, q, t) for t in targets],
        "to_fill": start.sum().to_numpy(),
        "imputed": np.mean([i[tl].sum().to_numpy() for i in imputed], axis=0) if imputed else 0,
        "routed_out": np.mean([r[tl].sum().to_numpy() for r in routed], axis=0) if routed else 0,
        "left_unfilled": np.mean([a[list(targets)].isin(eligible).sum().to_numpy() for a in after], axis=0),
        "faults_left": faults.sum().to_numpy(),
    }, index=list(targets))
    table.insert(1, "rule", ["items" if t in spec.items else "plan default" for t in targets])
    # a categorical item on the plan default is easy to overlook: say which method filled it
    notes = [f"{t}: categorical item filled by the plan default ({table.loc[t, 'method']})" for t in targets
             if t not in spec.items and q.item(t).type is ItemType.CATEGORICAL and int(start[t].sum())] + notes
    notes = list(dict.fromkeys(notes))
    return SkipAwareResult(datasets=datasets, imputed=imputed, routed_out=routed, status=status0,
                           status_after=after, table=table, statuses=eligible, seed=spec.seed,
                           notes=tuple(notes))


def _method_name(spec: SkipAwareSpec, q: Questionnaire, name: str) -> str:
    from skipwise.impute.skipdraw import resolve_method

    return resolve_method(spec.rule_for(name).method, q.item(name), None)


def _gates(q: Questionnaire) -> set[str]:
    """Items some later rule reads."""
    out: set[str] = set()
    for it in q.items:
        if it.rule is not None:
            out.update(n for n, _ in ast.names(it.rule))
    return out


def _faults(status: pd.DataFrame) -> np.ndarray:
    return status.isin(S.FAULT_STATUSES).to_numpy()


def _complete(data, q, spec, targets, eligible, status0, gates, fill_codes, rng, notes, carried=()):
    work = data.copy()
    n = len(data)
    imputed = np.zeros((n, len(targets)), dtype=bool)
    opened = np.zeros((n, len(carried)), dtype=bool)
    status, dirty = status0, False
    order = [it.name for it in q.items if it.name in targets or it.name in carried]
    for name in order:
        if dirty:
            status, dirty = classify(work, q).status, False
        if name in carried:
            j = carried.index(name)
            rows = np.flatnonzero((status[name].isin(eligible) & (status0[name] == S.GATE_UNKNOWN)).to_numpy())
            if rows.size and _carry(work, q, status, name, rows, rng, notes, spec.max_redraws):
                opened[rows, j] = work[list(q.item(name).columns)].iloc[rows].notna().any(axis=1).to_numpy()
                dirty = True
            continue
        t = targets.index(name)
        rows = np.flatnonzero(status[name].isin(eligible).to_numpy())
        if rows.size == 0:
            continue
        rule = spec.rule_for(name)
        vals, note = draw_item(work, status, q, name, rule, rows, rng)
        if note:
            notes.append(f"{name}: {note}")
        if vals is None:
            continue
        _put(work, name, rows, vals)
        imputed[rows, t] = True
        dirty = True
        if name in gates:
            kept = _make_consistent(work, data[name], q, status, name, rule, rows, rng, spec.max_redraws, notes)
            imputed[kept, t] = False
    end = classify(work, q).status
    tgt = list(targets)
    open_at_start = status0[tgt].isin([*eligible, S.GATE_UNKNOWN]).to_numpy()
    routed = open_at_start & (end[tgt] == S.SKIPPED).to_numpy()
    for j, name in enumerate(targets):
        code = fill_codes[name]
        if code is not None:
            rows = np.flatnonzero(routed[:, j] & work[name].isna().to_numpy())
            if rows.size:
                _put(work, name, rows, np.full(rows.size, code, dtype=object if isinstance(code, str) else float))
    if not routed.any() or all(c is None for c in fill_codes.values()):
        final = end
    else:
        final = classify(work, q).status
    idx = data.index
    flags = pd.DataFrame(np.hstack([imputed, opened]), index=idx, columns=[*tgt, *carried])
    out = pd.DataFrame(np.hstack([routed, np.zeros_like(opened)]), index=idx, columns=[*tgt, *carried])
    return work, flags, out, final


def _carry(work, q, status, name, rows, rng, notes, max_redraws: int) -> bool:
    """Fill the cells of a non-imputed item that an imputed gate opened, from one random donor each.

    A gate filled with a value that opens an item the plan does not impute (a check-all-that-apply
    set, a text item) would leave the completed file with item nonresponse that the input did not
    have.  Each such case takes the whole item (every option column of a set) from one case that
    answered it: a random hot-deck of the block, which keeps a set's options together (Andridge &
    Little, 2010, *International Statistical Review* 78(1), 40-64, on hot-deck donors).
    """
    donors = np.flatnonzero((status[name] == S.ANSWERED).to_numpy())
    if donors.size == 0:
        notes.append(f"{name}: {rows.size:,} cell(s) opened by imputed gates stay blank: no case answered it")
        return False
    cols = list(q.item(name).columns)
    stored = {c: work[c].to_numpy()[rows] for c in cols}
    before = _faults(status.iloc[rows])
    pending = np.arange(rows.size)
    for _ in range(max(max_redraws, 1)):
        pick = donors[rng.integers(0, donors.size, pending.size)]
        for col in cols:
            _put(work, col, rows[pending], work[col].to_numpy()[pick])
        # a donor's answer must not contradict the case's later answers (as for imputed gates)
        bad = (_faults(classify(work.iloc[rows[pending]], q).status) & ~before[pending]).any(axis=1)
        pending = pending[bad]
        if not pending.size:
            break
    if pending.size:
        for col in cols:
            _put(work, col, rows[pending], stored[col][pending])
        notes.append(f"{name}: {pending.size:,} cell(s) opened by imputed gates left as they are: no donor's "
                     "answer fits the case's later answers")
    notes.append(f"{name}: opened by an imputed gate in some cases; filled from a random donor that answered it")
    return pending.size < rows.size


def _put(work: pd.DataFrame, name: str, rows: np.ndarray, values: np.ndarray) -> None:
    from skipwise.impute.model import put_values

    col = work[name]
    if not (pd.api.types.is_numeric_dtype(col) or pd.api.types.is_object_dtype(col)):
        work[name] = col.astype(object)
    elif pd.api.types.is_numeric_dtype(col) and np.asarray(values).dtype == object:
        work[name] = col.astype(object)
    put_values(work, name, rows, values)


def _make_consistent(work, original, q, status, name, rule, rows, rng, max_redraws, notes) -> np.ndarray:
    """Redraw a filled gate wherever it creates a routing fault among the same cases.

    Returns the rows put back to their stored value because no value is consistent
    with the case's later answers (a follow-up asked *because* this item was not answered).
    """
    before = _faults(status.iloc[rows])
    pending = rows
    for _ in range(max_redraws):
        now = classify(work.iloc[pending], q).status
        bad = (_faults(now) & ~before[np.searchsorted(rows, pending)]).any(axis=1)
        pending = pending[bad]
        if not pending.size:
            return pending
        vals, _ = draw_item(work, status, q, name, rule, pending, rng)
        _put(work, name, pending, vals)
    # Last resort: try each donor value and draw among those consistent with the case's later answers.
    from skipwise.impute.encode import item_values

    donor_vals = pd.Series(item_values(work, status, q, name)).dropna()
    freq = donor_vals.value_counts().head(50)
    ok = np.zeros((pending.size, freq.size), dtype=bool)
    base = before[np.searchsorted(rows, pending)]
    for c, value in enumerate(freq.index):
        _put(work, name, pending, np.full(pending.size, value, dtype=object if isinstance(value, str) else float))
        now = classify(work.iloc[pending], q).status
        ok[:, c] = ~(_faults(now) & ~base).any(axis=1)
    weight = ok * freq.to_numpy()[None, :]
    total = weight.sum(axis=1)
    has = total > 0
    cum = np.cumsum(weight, axis=1)
    pick = (cum < (rng.random(pending.size) * total)[:, None]).sum(axis=1)
    pick = np.minimum(pick, freq.size - 1)
    chosen = freq.index.to_numpy()[pick]
    if has.any():
        _put(work, name, pending[has], chosen[has])
    kept = pending[~has]
    if kept.size:
        # No value fits: the later answers were asked because this item was not answered.
        _put(work, name, kept, original.iloc[kept].to_numpy())
        notes.append(f"{name}: {kept.size:,} cell(s) left as they are: any value would contradict the "
                     "routing of later answered items (a follow-up asked because this item was not answered)")
    return kept
