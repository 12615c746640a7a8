"""The demo questionnaire's items and routing, written out by hand for the simulation.

The interview simulation must not lean on the project's own rule parser or
evaluator (its output is the ground truth the classifier is checked
against), so each routing rule of ``marrowby-2026.yaml`` is restated here as
an explicit numpy condition in three-valued (Kleene) logic:
``F=0 < U=1 < T=2``; *and* is the minimum, *not* is ``2 - x``.

A comparison reads an earlier item's recorded state: an answered item has
its value; a skipped (or off-route) item, and an optional item left blank,
is *absent* and every comparison with it is false; any other item is
*unknown* and comparisons with it are unknown.  ``answered(x)`` is a plain
fact about the stored cell.

References
----------
Kleene, S. C. (1952). *Introduction to Metamathematics*. North-Holland. §64.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

import numpy as np

__all__ = ["F", "U", "T", "KNOWN", "UNKNOWN", "ABSENT", "Record", "DemoItem", "ITEMS", "ITEM_NAMES",
           "COLUMNS", "LEAVES"]

F, U, T = 0, 1, 2
KNOWN, UNKNOWN, ABSENT = 0, 1, 2


@dataclass
class Record:
    """Recorded values and rule states of the items walked so far (one array per name)."""

    n: int
    value: dict[str, np.ndarray] = field(default_factory=dict)
    state: dict[str, np.ndarray] = field(default_factory=dict)
    has_answer: dict[str, np.ndarray] = field(default_factory=dict)

    def compare(self, name: str, op: Callable[[np.ndarray], np.ndarray]) -> np.ndarray:
        with np.errstate(invalid="ignore"):
            hit = op(self.value[name])
        out = np.where(hit, T, F).astype(np.int8)
        out[self.state[name] == UNKNOWN] = U
        out[self.state[name] == ABSENT] = F
        return out

    def eq(self, name: str, x: float) -> np.ndarray:
        return self.compare(name, lambda v: v == x)

    def ne(self, name: str, x: float) -> np.ndarray:
        return self.compare(name, lambda v: v != x)

    def lt(self, name: str, x: float) -> np.ndarray:
        return self.compare(name, lambda v: v < x)

    def ge(self, name: str, x: float) -> np.ndarray:
        return self.compare(name, lambda v: v >= x)

    def answered(self, name: str) -> np.ndarray:
        return np.where(self.has_answer[name], T, F).astype(np.int8)


def _and(*parts: np.ndarray) -> np.ndarray:
    out = parts[0]
    for p in parts[1:]:
        out = np.minimum(out, p)
    return out


def _not(x: np.ndarray) -> np.ndarray:
    return (T - x).astype(np.int8)


Rule = Callable[[Record], np.ndarray]


@dataclass(frozen=True, kw_only=True)
class DemoItem:
    """One questionnaire item as the simulation sees it.

    ``valid`` is the set of allowed values for categorical items, ``range``
    the inclusive range for numeric ones; ``leaf`` marks items no later rule
    reads (the only ones that get routing faults).
    """

    name: str
    columns: tuple[str, ...]
    rule: Rule | None = None
    valid: tuple[float, ...] | None = None
    range: tuple[float, float] | None = None
    substantive: tuple[float, ...] = ()
    leaf: bool = True
    optional: bool = False   # an open text box: no answer required (a blank is left_blank)


def _work(extra: Rule | None = None) -> Rule:
    """Section ``work`` is asked if ``age < 75``; item rules are AND-ed with it."""
    if extra is None:
        return lambda r: r.lt("age", 75)
    return lambda r: _and(r.lt("age", 75), extra(r))


YES_NO = (1.0, 2.0)


def _build() -> tuple[DemoItem, ...]:
    it: list[DemoItem] = [
        DemoItem(name="hh_size", columns=("hh_size",), range=(1, 8), leaf=False),
        DemoItem(name="tenure", columns=("tenure",), valid=(1, 2, 3, 4), leaf=False),
        DemoItem(name="years_here", columns=("years_here",), range=(0, 90)),
        DemoItem(name="rent_month", columns=("rent_month",), range=(50, 5000), rule=lambda r: r.eq("tenure", 3)),
        DemoItem(name="has_car", columns=("has_car",), valid=YES_NO, leaf=False),
        DemoItem(name="n_cars", columns=("n_cars",), range=(1, 6), rule=lambda r: r.eq("has_car", 1)),
        DemoItem(name="internet", columns=("internet",), valid=YES_NO),
    ]
    for k in range(1, 9):
        def member(r: Record, k: int = k) -> np.ndarray:
            return r.ge("hh_size", k)

        def works(r: Record, k: int = k) -> np.ndarray:
            return _and(r.ge("hh_size", k), r.ge(f"m_age_{k}", 16))

        it += [DemoItem(name=f"m_sex_{k}", columns=(f"m_sex_{k}",), valid=(1, 2), rule=member),
               DemoItem(name=f"m_age_{k}", columns=(f"m_age_{k}",), range=(0, 105), rule=member, leaf=False),
               DemoItem(name=f"m_works_{k}", columns=(f"m_works_{k}",), valid=YES_NO, rule=works)]
    it += [
        DemoItem(name="age", columns=("age",), range=(16, 99), leaf=False),
        DemoItem(name="sex", columns=("sex",), valid=(1, 2)),
        DemoItem(name="education", columns=("education",), valid=(1, 2, 3, 4)),
        DemoItem(name="born_valley", columns=("born_valley",), valid=YES_NO, leaf=False),
        DemoItem(name="years_valley", columns=("years_valley",), range=(0, 90), rule=lambda r: r.eq("born_valley", 2)),
        DemoItem(name="employed", columns=("employed",), valid=YES_NO, rule=_work(), leaf=False),
        DemoItem(name="hours_week", columns=("hours_week",), range=(1, 80), rule=_work(lambda r: r.eq("employed", 1))),
        DemoItem(name="commute_mode", columns=("commute_mode",), valid=(1, 2, 3, 4, 5),
                 rule=_work(lambda r: r.eq("employed", 1)), leaf=False),
        DemoItem(name="commute_minutes", columns=("commute_minutes",), range=(1, 180), substantive=(997,),
                 rule=_work(lambda r: _and(r.eq("employed", 1), r.ne("commute_mode", 5)))),
        DemoItem(name="job_search", columns=("job_search",), valid=YES_NO,
                 rule=_work(lambda r: r.eq("employed", 2)), leaf=False),
        DemoItem(name="search_weeks", columns=("search_weeks",), range=(1, 104),
                 rule=_work(lambda r: r.eq("job_search", 1))),
        DemoItem(name="modes", columns=tuple(f"modes_{o}" for o in ("car", "bus", "rail", "bike", "walk")),
                 valid=(0, 1), leaf=False),
        DemoItem(name="trips_week", columns=("trips_week",), range=(0, 70)),
        DemoItem(name="bus_rating", columns=("bus_rating",), range=(1, 5), rule=lambda r: r.eq("modes_bus", 1)),
        DemoItem(name="rail_rating", columns=("rail_rating",), range=(1, 5), rule=lambda r: r.eq("modes_rail", 1)),
        DemoItem(name="bike_safe", columns=("bike_safe",), valid=YES_NO, rule=lambda r: r.eq("modes_bike", 1)),
        DemoItem(name="health", columns=("health",), range=(1, 5)),
        DemoItem(name="smoker", columns=("smoker",), valid=YES_NO, leaf=False),
        DemoItem(name="cigs_day", columns=("cigs_day",), range=(1, 60), rule=lambda r: r.eq("smoker", 1)),
        DemoItem(name="exercise_days", columns=("exercise_days",), range=(0, 7)),
        DemoItem(name="life_sat", columns=("life_sat",), range=(0, 10)),
        DemoItem(name="income", columns=("income",), range=(0, 50000), leaf=False),
        DemoItem(name="income_band", columns=("income_band",), valid=(1, 2, 3, 4),
                 rule=lambda r: _not(r.answered("income"))),
        DemoItem(name="savings", columns=("savings",), valid=YES_NO),
        DemoItem(name="recontact", columns=("recontact",), valid=YES_NO),
        DemoItem(name="comment", columns=("comment",), optional=True),
    ]
    return tuple(it)


#: Items in interview order (57 with the roster's 24; the set ``modes`` is one item with five columns).
ITEMS: tuple[DemoItem, ...] = _build()
ITEM_NAMES: tuple[str, ...] = tuple(i.name for i in ITEMS)
COLUMNS: tuple[str, ...] = tuple(c for i in ITEMS for c in i.columns)
LEAVES: frozenset[str] = frozenset(i.name for i in ITEMS if i.leaf)
