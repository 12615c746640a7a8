"""Hot-deck imputation: each gap takes an observed value from a donor case.

Random donor within imputation classes (optionally with probability
proportional to a survey weight), or nearest donor on standardized covariates
within classes; an optional limit on how often one donor is used; and classes
without a donor collapse by a fixed rule: drop the *last* class variable, then
the next-to-last, ..., down to the whole file. Every collapse is logged.

References
----------
Andridge, R. R. and Little, R. J. A. (2010). A review of hot deck imputation
for survey non-response. *International Statistical Review* 78(1), 40–64.
Kalton, G. and Kasprzyk, D. (1986). The treatment of missing survey data.
*Survey Methodology* 12, 1–16.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np
import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError
from skipwise.impute.donors import assign_with_limit, draw_nearest, draw_random, group_codes
from skipwise.impute.result import MNAR_CAUTION, ImputationResult, as_float_frame, check_columns

__all__ = ["CollapseRecord", "HotDeckResult", "hotdeck", "make_rng"]


def make_rng(seed: int | np.random.Generator | None) -> np.random.Generator:
    """A numpy Generator from a seed (an existing Generator is used as is)."""
    return seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)


@dataclass(frozen=True, kw_only=True)
class CollapseRecord:
    """Recipients of ``item`` served only after their class was coarsened to ``classes``."""

    item: str
    classes: tuple[str, ...]
    n_recipients: int

    def text(self) -> str:
        level = ", ".join(self.classes) if self.classes else "the whole file"
        return f"{self.item}: {self.n_recipients:,} recipient(s) had no donor in their class; drew within {level}"


@dataclass(frozen=True, kw_only=True)
class HotDeckResult(ImputationResult):
    """An :class:`ImputationResult` plus the donors used.

    Attributes
    ----------
    donor
        Per item, the row position of the donor of each filled cell (-1 where not imputed).
    max_uses
        Per item, the largest number of times one donor was used.
    collapses
        The class collapses that were needed, in order.
    rounds
        Per item, the number of draw rounds the donor-use limit needed.
    """

    donor: pd.DataFrame
    max_uses: pd.Series
    collapses: tuple[CollapseRecord, ...] = ()
    rounds: pd.Series | None = None


def hotdeck(data: pd.DataFrame, items: Sequence[str], *, classes: Sequence[str] = (),
            covariates: Sequence[str] | None = None, weights: str | None = None, k: int = 1,
            max_donor_use: int | None = None,
            seed: int | np.random.Generator | None = None) -> HotDeckResult:
    """Fill each item's gaps with values of donors from the same imputation class.

    Each item is treated on its own: its donors are the cases that hold a value.

    Parameters
    ----------
    data
        Survey frame, missing = NaN / NA. Items may have any dtype (values are copied).
    items
        Items to fill.
    classes
        Class variables, most important first (collapsing drops the last first).
        Missing class values form a class of their own.
    covariates
        If given: nearest-neighbour hot-deck on these numeric covariates,
        standardized (mean 0, SD 1 over all cases); a missing covariate value is
        set to the mean (0) for the distance, and noted.
    weights
        Column of survey weights: a random donor is drawn with probability
        proportional to its weight (donors with weight <= 0 or missing never donate).
        Not combined with ``covariates``.
    k
        Nearest-neighbour hot-deck draws one of the ``k`` nearest donors at random.
    max_donor_use
        Largest number of recipients one donor may serve per item (see
        :mod:`skipwise.impute.donors` for the rule).
    seed
        Seed or numpy Generator; the same seed gives the same result.

    Returns
    -------
    HotDeckResult

    References
    ----------
    Andridge, R. R. and Little, R. J. A. (2010). A review of hot deck imputation for survey
    non-response. *International Statistical Review* 78(1), 40–64.
    """
    rng = make_rng(seed)
    items, classes = list(items), list(classes)
    check_columns(data, items)
    check_columns(data, classes, role="class")
    problems: list[Problem] = []
    if covariates is not None and weights is not None:
        problems.append(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE,
                                message="weighted donor draws and nearest-neighbour donors cannot be combined",
                                hint="give either covariates or weights"))
    if max_donor_use is not None and max_donor_use < 1:
        problems.append(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE,
                                message=f"max_donor_use must be at least 1, got {max_donor_use}"))
    if k < 1:
        problems.append(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE,
                                message=f"k must be at least 1, got {k}"))
    if problems:
        raise SkipwiseError(problems)
    n = len(data)
    notes: list[str] = []
    z = None
    if covariates is not None:
        covariates = list(covariates)
        check_columns(data, covariates, numeric=True, role="covariate")
        x = as_float_frame(data, covariates)
        sd = np.nanstd(x, axis=0)
        z = (x - np.nanmean(x, axis=0)) / np.where(sd > 0, sd, 1.0)
        n_nan = int(np.isnan(z).any(axis=1).sum())
        if n_nan:
            notes.append(f"{n_nan:,} case(s) with a missing covariate were placed at its mean for the distance")
        z = np.nan_to_num(z, nan=0.0)
    w = None
    if weights is not None:
        check_columns(data, [weights], numeric=True, role="weight")
        w = data[weights].astype("float64").to_numpy()
        w = np.where(np.isfinite(w) & (w > 0), w, 0.0)
    class_arrays = [data[c].to_numpy() for c in classes]
    level_codes = [group_codes(class_arrays[: len(classes) - lvl], n) for lvl in range(len(classes) + 1)]

    imputed = data.loc[:, items].isna()
    out = data.copy()
    donor_frame = pd.DataFrame(-1, index=data.index, columns=items, dtype="int64")
    collapses: list[CollapseRecord] = []
    max_uses, rounds_used, unfilled = {}, {}, {}
    for item in items:
        miss = imputed[item].to_numpy()
        rec = np.flatnonzero(miss)
        donors = np.flatnonzero(~miss & (w > 0)) if w is not None else np.flatnonzero(~miss)
        uses = np.zeros(n, dtype=np.int64)
        chosen = np.full(rec.size, -1, dtype=np.int64)
        todo = np.arange(rec.size)
        total_rounds = 0
        for lvl, codes in enumerate(level_codes):
            if not todo.size:
                break
            rows = rec[todo]
            rc = codes[rows]
            if z is None:
                def draw(sub: np.ndarray, pool: np.ndarray, rc=rc) -> np.ndarray:
                    return draw_random(rc[sub], pool, codes, w, rng)
            else:
                def draw(sub: np.ndarray, pool: np.ndarray, rc=rc, rows=rows) -> np.ndarray:
                    return draw_nearest(rows[sub], rc[sub], pool, codes, z, k, rng)
            got, r = assign_with_limit(todo.size, donors, draw, max_donor_use, uses, rng)
            total_rounds += r
            chosen[todo] = got
            served = got >= 0
            if lvl > 0 and served.any():
                collapses.append(CollapseRecord(item=item, classes=tuple(classes[: len(classes) - lvl]),
                                                n_recipients=int(served.sum())))
            todo = todo[~served]
        ok = chosen >= 0
        take = np.arange(n)
        take[rec[ok]] = chosen[ok]
        out[item] = pd.Series(data[item].take(take).array, index=data.index)
        donor_frame.iloc[rec[ok], donor_frame.columns.get_loc(item)] = chosen[ok]
        left = rec[~ok]
        if left.size:
            imputed.iloc[left, imputed.columns.get_loc(item)] = False
        unfilled[item] = int(left.size)
        max_uses[item] = int(uses.max(initial=0))
        rounds_used[item] = total_rounds
    notes.append(("nearest-neighbour" if z is not None else "random") + " donor hot-deck"
                 + (f" within classes of {', '.join(classes)}" if classes else "")
                 + (f", donor probability proportional to '{weights}'" if weights else "")
                 + (f", each donor used at most {max_donor_use} time(s) per item" if max_donor_use else ""))
    notes += [c.text() for c in collapses]
    notes += [f"{it}: {m:,} gap(s) left: no donor anywhere" for it, m in unfilled.items() if m]
    return HotDeckResult(
        data=out, imputed=imputed, method="nearest" if z is not None else "hotdeck",
        unfilled=pd.Series(unfilled, dtype="int64"), notes=tuple(notes), cautions=(MNAR_CAUTION,),
        donor=donor_frame, max_uses=pd.Series(max_uses, dtype="int64"), collapses=tuple(collapses),
        rounds=pd.Series(rounds_used, dtype="int64"),
    )
