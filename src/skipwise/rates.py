"""One set of item rates for the whole package (the contract's "one set of item rates").

Every output that shows an item's answered, nonresponse or fault rate (item
report, diagnostics, weighting workbook, codebook, console) takes it from
:func:`item_rates`, so the same item, weight and subgroup show the same number
everywhere.

Definitions
-----------
For an item, D is the number of cells (or, weighted, the sum of the case
weights) *in the item's universe*, excluding ``breakoff`` and ``left_blank``::

    D = answered + nonresponse reasons + item_missing + wrong_code + invalid (universe decided in)

    answered rate         = answered / D
    item nonresponse rate = (nonresponse reasons + item_missing) / D
    fault rate            = (wrong_code + invalid in universe) / D

The three shares add up to 1.  ``gate_unknown``, ``breakoff``, ``off_route``,
``left_blank``, ``skipped`` and an ``invalid`` cell whose universe is out or
undecided are counted apart (never in D).  Whether an ``invalid`` cell is in
universe is read from the classification's universe matrix (the rule's
three-valued result), not from status strings.  A status the classification
does not produce (e.g. ``left_blank`` for a questionnaire without optional
items) simply counts 0.

The minimum base is an *unweighted* count of D: items and subgroup cells with
fewer cells in D than ``min_base`` are marked (``below_min_base``) and must be
left out of rankings, worst-item charts and pattern-column choices.  The
default of 30 is common practice, no source.

Counting is row-local and mergeable: the counts of chunks of rows added with
``+`` equal the counts of the whole file (subgroups are aligned by key).

API
---
``item_rates(classification, weight=None, by=None, min_base=30) -> ItemRates``
    ``weight``: one weight per case (NaN counts as 0) or None; ``by``: one
    group key per case (NaN/None is the group ``None``) or None.
``ItemRates.table(weighted=False) -> DataFrame``
    One row per item (index ``item``), or per (group, item) when ``by`` was
    given (MultiIndex ``group``, ``item``), with columns

    - ``cases``: cells of the item (all statuses), ``D``, ``base`` (unweighted D,
      also in the weighted table) and ``below_min_base``;
    - counts: ``answered``, each reason, ``item_missing``, ``wrong_code``,
      ``invalid_in_universe``, then apart ``gate_unknown``, ``breakoff``,
      ``off_route``, ``left_blank``, ``invalid_apart``, ``skipped``;
      sums ``nonresponse`` and ``faults``;
    - rates (NaN where D = 0): ``answered_rate``, ``nonresponse_rate``,
      ``fault_rate``, ``<reason>_rate`` for every reason, ``item_missing_rate``,
      ``wrong_code_rate``, ``invalid_rate``;
    - weighted table only: ``zero_weight`` (unweighted count of cells in D
      whose case weight is 0: they count in the unweighted rates only).

    Counts are integers unweighted and sums of weights weighted.
``ItemRates.wide() -> DataFrame``
    The unweighted table, and when weighted, the weighted rates and D beside
    it with the suffix ``_w`` (the report's side-by-side view).
``ItemRates.below_min_base`` -> boolean Series (item, or (group, item)).
``ItemRates.ranked(rate="nonresponse_rate", weighted=False)``
    Items at or above the minimum base, worst first (for rankings and charts).
``format_rate(x)`` -> the package's one printed form of a rate ("7.9%").

References
----------
Groves, R. M., Fowler, F. J., Couper, M. P., Lepkowski, J. M., Singer, E. and
Tourangeau, R. (2009). *Survey Methodology*, 2nd ed., Wiley, ch. 6 (item
nonresponse: rates over the cases eligible for the item).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np
import pandas as pd

from skipwise.classify import statuses as S
from skipwise.classify.result import Classification, _weights
from skipwise.rules.evaluate import TRUE

__all__ = ["DEFAULT_MIN_BASE", "LEFT_BLANK", "ItemRates", "item_rates", "format_rate", "RATE_DECIMALS",
           "STATUS_LABELS", "status_label", "COUNT_LABELS", "worst_lines"]

#: Minimum unweighted D for a rate to be ranked or charted (common practice, no source).
DEFAULT_MIN_BASE = 30
#: Decimals of a printed percentage everywhere in the package.
RATE_DECIMALS = 1
#: Status of an in-universe blank of an optional item (may not exist in the classifier yet).
LEFT_BLANK = getattr(S, "LEFT_BLANK", "left_blank")

_IN_D_FIXED = (S.ITEM_MISSING, S.WRONG_CODE, "invalid_in_universe")
_APART = (S.GATE_UNKNOWN, S.BREAKOFF, S.OFF_ROUTE, LEFT_BLANK, "invalid_apart", S.SKIPPED)


#: Human labels of the fixed statuses (the token stays beside them for machines).
STATUS_LABELS: dict[str, str] = {
    S.ANSWERED: "Answered",
    S.SKIPPED: "Skipped: not asked (legitimate skip)",
    S.ITEM_MISSING: "Blank where asked, no code",
    S.GATE_UNKNOWN: "Blank; whether it was asked is unknown",
    S.BREAKOFF: "Blank after the interview ended",
    S.OFF_ROUTE: "Answer or code where not asked (routing fault)",
    S.WRONG_CODE: "Not-asked code where asked (routing fault)",
    S.INVALID: "Value outside the item's values or range",
    LEFT_BLANK: "Optional item left blank",
}
#: Labels of the count columns of :meth:`ItemRates.table` that are not statuses.
COUNT_LABELS: dict[str, str] = {
    "invalid_in_universe": "Invalid value where asked (fault, in D)",
    "invalid_apart": "Invalid value where not asked or undecided (apart)",
}


def status_label(status: str, questionnaire=None) -> str:
    """Human label of a status or count column; a nonresponse reason's label comes from its code."""
    if status in STATUS_LABELS:
        return STATUS_LABELS[status]
    if status in COUNT_LABELS:
        return COUNT_LABELS[status]
    if questionnaire is not None:
        for code in (*questionnaire.codes, *(c for it in questionnaire.items for c in it.codes)):
            if code.reason == status and getattr(code, "label", None):
                return f"{code.label} (nonresponse)"
    from skipwise.classify.delivery import REASON_WORDS  # the words the delivered files use too

    return (REASON_WORDS.get(status) or status.replace("_", " ").capitalize()) + " (nonresponse)"


def format_rate(x: float | None) -> str:
    """A rate as the package prints it: percent with one decimal; blank for no base."""
    if x is None or not np.isfinite(x):
        return ""
    return f"{100 * x:.{RATE_DECIMALS}f}%"


def _columns(reasons: tuple[str, ...]) -> tuple[str, ...]:
    return (S.ANSWERED, *reasons, *_IN_D_FIXED, *_APART)


@dataclass(frozen=True, kw_only=True)
class ItemRates:
    """Partial counts behind the item rates; add two with ``+`` to merge chunks of rows.

    Attributes
    ----------
    items, reasons
        Items in interview order; nonresponse reasons of the questionnaire.
    groups
        Group keys (``(None,)`` when no ``by`` was given).
    counts
        int64 array (groups x items x columns) of cells.
    wcounts, zero
        Weighted totals of the same shape and unweighted counts of D cells
        with weight 0 (groups x items); None without a weight.
    min_base
        Minimum unweighted D for a rate to be ranked.
    grouped
        Whether ``by`` was given (the table then has a (group, item) index).
    """

    items: tuple[str, ...]
    reasons: tuple[str, ...]
    groups: tuple[object, ...]
    counts: np.ndarray
    wcounts: np.ndarray | None
    zero: np.ndarray | None
    min_base: int = DEFAULT_MIN_BASE
    grouped: bool = False

    @property
    def columns(self) -> tuple[str, ...]:
        return _columns(self.reasons)

    @property
    def weighted(self) -> bool:
        return self.wcounts is not None

    def __add__(self, other: ItemRates) -> ItemRates:
        if (other.items, other.reasons, other.weighted, other.grouped) != \
                (self.items, self.reasons, self.weighted, self.grouped):
            raise ValueError("only counts of the same items, reasons, weighting and grouping add up")
        keys = _sorted_keys(list(self.groups) + [g for g in other.groups if g not in self.groups])
        pos = {g: i for i, g in enumerate(keys)}

        def widen(part: ItemRates, arr: np.ndarray | None) -> np.ndarray | None:
            if arr is None:
                return None
            out = np.zeros((len(keys), *arr.shape[1:]), dtype=arr.dtype)
            out[[pos[g] for g in part.groups]] = arr
            return out

        def add(a: np.ndarray | None, b: np.ndarray | None) -> np.ndarray | None:
            return None if a is None else widen(self, a) + widen(other, b)

        return replace(self, groups=tuple(keys), counts=add(self.counts, other.counts),
                       wcounts=add(self.wcounts, other.wcounts), zero=add(self.zero, other.zero))

    def status_counts(self, categories: Sequence[str], weighted: bool = False) -> np.ndarray:
        """Cells of every item in every status of ``categories`` (all groups together).

        One column per status, in the order given; ``invalid`` adds its two parts
        (in and out of universe).  The same counts as ``Classification.counts``.
        """
        arr = (self.wcounts if weighted else self.counts).sum(axis=0)
        col_of = {name: i for i, name in enumerate(self.columns)}
        out = np.zeros((arr.shape[0], len(categories)), dtype=arr.dtype)
        for i, status in enumerate(categories):
            if status == S.INVALID:
                out[:, i] = arr[:, col_of["invalid_in_universe"]] + arr[:, col_of["invalid_apart"]]
            else:
                out[:, i] = arr[:, col_of[status]]
        return out

    def with_min_base(self, min_base: int) -> ItemRates:
        return replace(self, min_base=int(min_base))

    # -- tables -------------------------------------------------------------------------------
    def table(self, weighted: bool = False) -> pd.DataFrame:
        """Counts and rates, one row per item (or per group and item); see the module docstring."""
        if weighted and not self.weighted:
            raise ValueError("these rates were counted without a weight")
        arr = self.wcounts if weighted else self.counts
        flat = arr.reshape(-1, arr.shape[-1])
        if self.grouped:
            index = pd.MultiIndex.from_product([list(self.groups), list(self.items)], names=["group", "item"])
        else:
            index = pd.Index(list(self.items), name="item")
        counts = pd.DataFrame(flat, index=index, columns=list(self.columns))
        base = self.counts.reshape(-1, arr.shape[-1])[:, :self._n_in_d].sum(axis=1)
        d = counts.iloc[:, :self._n_in_d].sum(axis=1)
        nonresp = counts[[*self.reasons, S.ITEM_MISSING]].sum(axis=1)
        faults = counts[S.WRONG_CODE] + counts["invalid_in_universe"]
        out = pd.DataFrame({"cases": counts.sum(axis=1), "D": d, "base": base,
                            "below_min_base": base < self.min_base}, index=index)
        out = pd.concat([out, counts], axis=1)
        out["nonresponse"] = nonresp
        out["faults"] = faults
        den = d.to_numpy(dtype=np.float64)
        safe = np.where(den > 0, den, 1.0)

        def rate(num: pd.Series) -> np.ndarray:
            return np.where(den > 0, num.to_numpy(dtype=np.float64) / safe, np.nan)

        out["answered_rate"] = rate(counts[S.ANSWERED])
        out["nonresponse_rate"] = rate(nonresp)
        out["fault_rate"] = rate(faults)
        for reason in (*self.reasons, S.ITEM_MISSING, S.WRONG_CODE):
            out[f"{reason}_rate"] = rate(counts[reason])
        out["invalid_rate"] = rate(counts["invalid_in_universe"])
        if weighted:
            out["zero_weight"] = self.zero.reshape(-1)
        return out

    @property
    def _n_in_d(self) -> int:
        return 1 + len(self.reasons) + len(_IN_D_FIXED)

    def wide(self) -> pd.DataFrame:
        """Unweighted table, with the weighted D, counts' rates and zero-weight count (suffix ``_w``)."""
        out = self.table(False)
        if self.weighted:
            w = self.table(True)
            keep = ["D", *[c for c in w.columns if c.endswith("_rate")], "zero_weight"]
            out = out.join(w[keep].add_suffix("_w"))
        return out

    @property
    def below_min_base(self) -> pd.Series:
        """True for items (or group cells) whose unweighted D is under the minimum base."""
        return self.table(False)["below_min_base"]

    def ranked(self, rate: str = "nonresponse_rate", weighted: bool = False) -> pd.DataFrame:
        """Rows at or above the minimum base with a rate, worst (highest) first, ties in item order."""
        t = self.table(weighted)
        t = t[~t["below_min_base"] & t[rate].notna()]
        return t.sort_values(rate, ascending=False, kind="stable")


def item_rates(c: Classification, weight: pd.Series | np.ndarray | None = None,
               by: pd.Series | np.ndarray | None = None, *, min_base: int = DEFAULT_MIN_BASE) -> ItemRates:
    """Count every item's cells into D and the statuses counted apart (docs/contract.md §2).

    Parameters
    ----------
    c
        A classification (any chunk of rows of a file).
    weight
        One weight per case in ``c``'s row order, or None (NaN weights count as 0).
    by
        One subgroup key per case, or None for the whole file.  Missing keys
        form the group ``None``.
    min_base
        Minimum unweighted D for a rate to be ranked (common practice, no source).

    Returns
    -------
    ItemRates
        Mergeable partial counts; ``.table()`` gives the counts and rates.

    Examples
    --------
    >>> rates = item_rates(classification, weight=data["wt_final"])   # doctest: +SKIP
    >>> rates.table(weighted=True).loc["hours_week", "nonresponse_rate"]  # doctest: +SKIP
    """
    n, p = c.codes.shape
    reasons = tuple(c.questionnaire.nonresponse_reasons)
    cols = _columns(reasons)
    col_of = {name: i for i, name in enumerate(cols)}
    # Map each status code to its column; invalid is split by universe below.
    lookup = np.array([col_of.get(s, -1) for s in c.categories], dtype=np.int64)
    inv = c.categories.index(S.INVALID) if S.INVALID in c.categories else -1
    unknown = np.flatnonzero(lookup < 0)
    if unknown.size and not all(c.categories[i] == S.INVALID for i in unknown):
        raise ValueError(f"statuses without a place in the rates: {[c.categories[i] for i in unknown]}")
    w = _weights(weight, n)
    if by is None:
        gcode, groups, grouped = np.zeros(n, dtype=np.int64), (None,), False
    else:
        keys = pd.Series(np.asarray(by, dtype=object) if not isinstance(by, pd.Series) else by.to_numpy())
        if len(keys) != n:
            raise ValueError(f"{len(keys)} group keys for {n} cases")
        codes, uniques = pd.factorize(keys, sort=True, use_na_sentinel=True)
        groups = tuple(_plain(u) for u in uniques)
        if (codes < 0).any():
            codes = np.where(codes < 0, len(groups), codes)
            groups = (*groups, None)
        gcode, grouped = codes.astype(np.int64), True
    g, k = len(groups), len(cols)
    counts = np.zeros((g, p, k), dtype=np.int64)
    wcounts = None if w is None else np.zeros((g, p, k))
    zero = None if w is None else np.zeros((g, p), dtype=np.int64)
    n_in_d = 1 + len(reasons) + len(_IN_D_FIXED)
    # One lookup per cell: status code, plus len(categories) where the rule held, to its column
    # (only ``invalid`` goes to a different column in and out of universe).
    n_cat = len(c.categories)
    lookup2 = np.concatenate([lookup, lookup]).astype(np.intp)
    if inv >= 0:
        lookup2[inv], lookup2[n_cat + inv] = col_of["invalid_apart"], col_of["invalid_in_universe"]
    offset = None if not grouped else gcode.astype(np.intp) * k
    narrow = np.uint8 if 2 * n_cat <= 256 else np.uint16
    zero_w = None if w is None or not (w == 0).any() else (w == 0)
    for j in range(p):  # loop over items; every step is one vectorized pass over the column
        code = c.codes[:, j].view(np.uint8) if narrow == np.uint8 else c.codes[:, j].astype(narrow)
        if inv >= 0:
            idx = (c.universe[:, j] == TRUE).astype(narrow) * narrow(n_cat)
            idx += code
        else:
            idx = code
        cell = lookup2[idx]
        if offset is not None:
            cell += offset
        counts[:, j] = np.bincount(cell, minlength=g * k).reshape(g, k)
        if w is not None:
            wcounts[:, j] = np.bincount(cell, weights=w, minlength=g * k).reshape(g, k)
            if zero_w is not None:
                in_d = (cell % k < n_in_d) if offset is not None else (cell < n_in_d)
                zero[:, j] = np.bincount(gcode, weights=in_d & zero_w, minlength=g).astype(np.int64)
    return ItemRates(items=tuple(c.items), reasons=reasons, groups=groups, counts=counts, wcounts=wcounts,
                     zero=zero, min_base=int(min_base), grouped=grouped)


def worst_lines(rates: ItemRates, top: int = 5, weighted: bool = False) -> list[str]:
    """Console lines: the items with the highest item nonresponse rate at or above the minimum base."""
    t = rates.ranked(weighted=weighted).head(top)
    small = int(rates.below_min_base.sum())
    lines = [f"  {item:<20} {format_rate(r['nonresponse_rate']):>6} of D = {int(r['base']):,}"
             for item, r in t.iterrows()]
    if small:
        lines.append(f"  ({small} item(s) with D under the minimum base of {rates.min_base} are not ranked)")
    return lines


def _sorted_keys(keys: list[object]) -> list[object]:
    """Group keys in sorted order (as one file's factorize gives them), the missing group last."""
    present = [k for k in keys if k is not None]
    try:
        present = sorted(present)
    except TypeError:  # keys of mixed types: keep the order they came in
        pass
    return present + ([None] if None in keys else [])


def _plain(value: object) -> object:
    """Group keys as plain Python values; whole floats as ints (codes read as 1.0 are the code 1)."""
    if isinstance(value, (np.generic,)):
        value = value.item()
    if isinstance(value, float) and value.is_integer():
        return int(value)
    return value
