"""The invented Marrowby Valley: a finite population of addresses and households.

Every place and value here is invented.  The valley has four districts
(strata); each district is cut into blocks (the primary sampling units) and
each block holds addresses, some vacant or not a dwelling.  Each occupied
address is one household with one adult respondent (16–99) whose *true*
answers to every questionnaire item are simulated here, with plausible
relations: employment depends on age and education, income on education,
employment and household size, travel modes on district and car ownership,
health on age, life satisfaction on health, work and income.

True values exist for every household and every item (the item's routing
decides later whether it applies); the interview simulation
(:mod:`skipwise.demo.interview`) decides what gets recorded.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
import pandas as pd

__all__ = ["DISTRICTS", "AGE_BANDS", "Population", "simulate_population", "age_band_of"]

#: District codes and names (all invented).
DISTRICTS: dict[int, str] = {1: "Fennick", 2: "Oldmere", 3: "Brackwater", 4: "Tollin Heath"}
#: Age bands of the weighting margins: code -> (label, lowest age, highest age).
AGE_BANDS: dict[int, tuple[str, int, int]] = {1: ("16-34", 16, 34), 2: ("35-54", 35, 54),
                                             3: ("55-74", 55, 74), 4: ("75+", 75, 99)}

_SHARE = np.array([0.40, 0.28, 0.19, 0.13])     # share of households by district
_VACANT = np.array([0.06, 0.05, 0.08, 0.10])    # share of addresses vacant / not a dwelling
_BLOCKS = np.array([120, 95, 75, 60])           # blocks (PSUs) per district
_AGE_BETA = np.array([[1.5, 2.4], [1.7, 2.1], [1.9, 1.9], [2.1, 1.8]])


@dataclass(frozen=True, kw_only=True)
class Population:
    """Addresses of the frame and the true values of their households.

    Attributes
    ----------
    addresses
        One row per frame address: ``address_id``, ``district``, ``psu``
        (block id), ``occupied`` (False: vacant or not a dwelling).
    truth
        True values of every questionnaire column (and helper covariates), one
        row per address in the same order; rows of unoccupied addresses are NaN.
    """

    addresses: pd.DataFrame
    truth: pd.DataFrame

    @property
    def households(self) -> pd.DataFrame:
        """True values of the occupied addresses only."""
        return self.truth.loc[self.addresses["occupied"].to_numpy()]


def age_band_of(age: np.ndarray | pd.Series) -> np.ndarray:
    """Age-band code (1..4, NaN where age is NaN) of ages in years."""
    a = np.asarray(age, dtype=float)
    band = np.full(a.shape, np.nan)
    for code, (_, lo, hi) in AGE_BANDS.items():
        band[(a >= lo) & (a <= hi)] = code
    return band


def _expit(x: np.ndarray) -> np.ndarray:
    return 1.0 / (1.0 + np.exp(-x))


def _pick(rng: np.random.Generator, probs: np.ndarray) -> np.ndarray:
    """One category (1..K) per row of a row-stochastic matrix, vectorized."""
    probs = probs / probs.sum(axis=1, keepdims=True)
    u = rng.random(len(probs))
    return (u[:, None] > np.cumsum(probs, axis=1)[:, :-1]).sum(axis=1) + 1


def _frame(rng: np.random.Generator, n_households: int) -> pd.DataFrame:
    hh = np.floor(_SHARE * n_households).astype(int)
    hh[0] += n_households - hh.sum()
    parts = []
    for d in range(4):
        n_addr = int(round(hh[d] / (1 - _VACANT[d])))
        # block sizes around the mean, never so large that a block is taken with certainty
        w = rng.uniform(0.6, 1.4, _BLOCKS[d])
        sizes = np.floor(w / w.sum() * n_addr).astype(int)
        sizes[: n_addr - sizes.sum()] += 1
        block = np.repeat(np.arange(1, _BLOCKS[d] + 1), sizes)
        occupied = np.zeros(n_addr, bool)
        occupied[rng.choice(n_addr, hh[d], replace=False)] = True
        parts.append(pd.DataFrame({"district": d + 1, "psu": (d + 1) * 1000 + block, "occupied": occupied}))
    frame = pd.concat(parts, ignore_index=True)
    frame.insert(0, "address_id", np.arange(1, len(frame) + 1))
    return frame


def _members(rng: np.random.Generator, age: np.ndarray, sex: np.ndarray,
             works_p: Callable[[np.ndarray, int], np.ndarray]) -> dict[str, np.ndarray]:
    """True roster values of members 1..8 (member 1 is the respondent)."""
    n = len(age)
    out: dict[str, np.ndarray] = {"m_sex_1": sex, "m_age_1": age}
    out["m_works_1"] = np.where(rng.random(n) < works_p(age, 3), 1, 2)
    partner = (rng.random(n) < 0.7) & (age >= 20)
    child_ok = (age >= 22) & (age < 65)
    for k in range(2, 9):
        u = rng.random(n)
        if k == 2:
            is_child = ~partner & child_ok & (u < 0.6)
            m_age = np.where(partner, np.clip(np.round(age + rng.normal(0, 4, n)), 16, 99), np.nan)
        else:
            is_child = child_ok & (u < 0.8)
            m_age = np.full(n, np.nan)
        child_age = np.floor(rng.random(n) * np.clip(age - 17, 1, 26))
        adult_age = rng.integers(16, 96, n).astype(float)
        m_age = np.where(np.isnan(m_age), np.where(is_child, child_age, adult_age), m_age)
        m_sex = np.where(rng.random(n) < 0.5, 1, 2)
        if k == 2:
            m_sex = np.where(partner, np.where(rng.random(n) < 0.95, 3 - sex, sex), m_sex)
        out[f"m_sex_{k}"] = m_sex
        out[f"m_age_{k}"] = m_age
        out[f"m_works_{k}"] = np.where(rng.random(n) < works_p(m_age, 3), 1, 2)
    return out


def simulate_population(rng: np.random.Generator, n_households: int = 60_000) -> Population:
    """Simulate the frame and every household's true values.

    Parameters
    ----------
    rng
        The generator all randomness comes from (deterministic for a seed).
    n_households
        Number of occupied addresses (households) in the valley.
    """
    frame = _frame(rng, n_households)
    n = len(frame)
    d = frame["district"].to_numpy() - 1
    n_blocks = int(_BLOCKS.max())
    block_eff = rng.normal(0, 0.15, (4, n_blocks + 1))[d, frame["psu"].to_numpy() % 1000]
    t: dict[str, np.ndarray] = {}

    age = np.round(16 + 83 * rng.beta(_AGE_BETA[d, 0], _AGE_BETA[d, 1])).astype(float)
    sex = np.where(rng.random(n) < 0.49 + 0.0015 * (age - 40), 1, 2)
    t["hh_size"] = np.clip(1 + rng.poisson(np.select([age < 35, age < 55, age < 75], [1.0, 1.6, 0.5], 0.25)), 1, 8)
    young, mid, old = age < 35, (age >= 35) & (age < 55), (age >= 55) & (age < 75)
    ten_p = np.select([young[:, None], mid[:, None], old[:, None]],
                      [np.array([[.05, .25, .65, .05]]), np.array([[.15, .55, .27, .03]]),
                       np.array([[.55, .20, .22, .03]])], np.array([[.70, .03, .22, .05]]))
    ten_p = ten_p * np.where(np.arange(4) == 2, np.array([1.4, 1.0, 0.8, 0.7])[d][:, None], 1.0)
    t["tenure"] = _pick(rng, ten_p)
    t["years_here"] = np.minimum(np.round(rng.exponential(4 + 0.3 * (age - 16))), np.minimum(age, 90))
    rent = np.array([850, 750, 600, 550])[d] * (1 + 0.1 * (t["hh_size"] - 1))
    t["rent_month"] = np.clip(np.round(rent * np.exp(rng.normal(0, 0.3, n)), -1), 50, 5000)

    educ_logit = np.column_stack([0.3 + 0.03 * (age - 50), np.ones(n), 0.9 * np.ones(n),
                                  0.8 - 0.03 * (age - 40) + np.array([0.5, 0.2, -0.4, -0.3])[d]])
    t["education"] = educ = _pick(rng, np.exp(educ_logit))

    def works_p(a: np.ndarray, e: np.ndarray | int) -> np.ndarray:
        base = 0.88 * _expit((62 - a) / 3) * _expit((a - 18) / 2)
        return np.clip(base * (0.85 + 0.06 * np.asarray(e)) + 0.01 * (a >= 16), 0, 0.97) * (a >= 16)

    works = rng.random(n) < works_p(age, educ)
    t.update(_members(rng, age, sex, works_p))
    t["m_works_1"] = np.where(works, 1, 2)
    log_inc = (7.10 + 0.22 * educ + 0.55 * works + 0.15 * np.log(t["hh_size"]) + 0.12 * mid
               + np.array([0.05, 0.10, -0.10, -0.05])[d] + block_eff + rng.normal(0, 0.45, n))
    income = np.clip(np.round(np.exp(log_inc), -1), 0, 50_000)
    lgi = np.log(np.maximum(income, 100)) - 8.0
    t["has_car"] = np.where(rng.random(n) < _expit(0.2 + np.array([-0.6, 0.6, 1.6, 1.3])[d] + 0.9 * lgi), 1, 2)
    t["n_cars"] = np.clip(1 + rng.poisson(0.3 + 0.25 * (t["hh_size"] > 2)), 1, 6)
    t["internet"] = np.where(rng.random(n) < _expit(2.8 - 0.07 * (age - 55)), 1, 2)

    t["m_age_1"], t["m_sex_1"], t["age"], t["sex"] = age, sex, age, sex
    t["born_valley"] = np.where(rng.random(n) < 0.5 + np.array([0, .05, .15, .10])[d], 1, 2)
    # newcomers have lived in the valley at least as long as at their address
    t["years_valley"] = np.minimum(np.maximum(np.round(np.minimum(age, 90) * rng.random(n) ** 0.8),
                                              t["years_here"]), 90)
    t["employed"] = np.where(works, 1, 2)
    t["hours_week"] = np.clip(np.round(np.where(rng.random(n) < 0.2, rng.normal(20, 5, n),
                                                rng.normal(40 - 3 * (sex == 1), 6, n))), 1, 80)
    cm_p = np.array([[.35, .25, .15, .13, .12], [.55, .15, .12, .06, .12],
                     [.72, .05, .05, .05, .13], [.65, .06, .10, .06, .13]])[d]
    t["commute_mode"] = mode = _pick(rng, cm_p)
    minutes = np.clip(np.round(np.exp(np.array([3.1, 3.5, 3.6, 2.7, 0.0])[mode - 1] + rng.normal(0, 0.5, n))), 1, 180)
    t["commute_minutes"] = np.where(rng.random(n) < 0.03, 997, minutes)
    t["job_search"] = np.where(rng.random(n) < np.where(age < 60, 0.35, 0.06), 1, 2)
    t["search_weeks"] = np.clip(rng.geometric(0.08, n), 1, 104).astype(float)

    car = rng.random(n) < np.where(t["has_car"] == 1, 0.9, 0.15)
    bus = rng.random(n) < np.array([.45, .28, .10, .12])[d] + 0.002 * (age - 45) + 0.15 * (t["has_car"] == 2)
    rail = rng.random(n) < np.array([.25, .20, .05, .15])[d] + 0.1 * (mode == 3)
    bike = rng.random(n) < np.array([.20, .12, .10, .08])[d] * _expit((60 - age) / 10) * 2
    walk = rng.random(n) < np.clip(0.85 - 0.004 * (age - 50), 0.4, 0.95)
    for name, used in zip(("car", "bus", "rail", "bike", "walk"), (car, bus, rail, bike, walk)):
        t[f"modes_{name}"] = used.astype(float)
    n_modes = car.astype(int) + bus + rail + bike + walk
    t["trips_week"] = np.clip(rng.poisson(np.clip(6 + 5 * works - 0.04 * (age - 50) + 2 * n_modes, 0.5, None)), 0, 70)
    t["bus_rating"] = np.clip(np.round(rng.normal(np.array([3.6, 3.2, 2.4, 2.7])[d], 0.9)), 1, 5)
    t["rail_rating"] = np.clip(np.round(rng.normal(np.array([3.4, 3.5, 2.8, 3.0])[d], 0.9)), 1, 5)
    t["bike_safe"] = np.where(rng.random(n) < np.array([.45, .60, .55, .40])[d], 1, 2)

    health = np.clip(np.round(1.6 + 0.028 * (age - 40) - 0.12 * (educ - 2) + rng.normal(0, 0.8, n)), 1, 5)
    t["health"] = health
    t["smoker"] = np.where(rng.random(n) < _expit(-1.3 - 0.3 * (educ - 2) - 0.012 * (age - 45)), 1, 2)
    t["cigs_day"] = np.clip(np.round(np.exp(rng.normal(np.log(10), 0.5, n))), 1, 60)
    t["exercise_days"] = rng.binomial(7, _expit(0.1 - 0.45 * (health - 2))).astype(float)
    t["life_sat"] = np.clip(np.round(rng.normal(7.1 - 0.5 * (health - 2) + 0.3 * works + 0.4 * lgi, 1.5)), 0, 10)
    t["income"] = income
    t["income_band"] = np.digitize(income, [1500, 3000, 5000]) + 1
    t["savings"] = np.where(rng.random(n) < _expit(0.3 + 1.2 * lgi + 0.2 * (educ - 2)), 1, 2)
    t["recontact"] = np.where(rng.random(n) < 0.7, 1, 2)
    t["district"] = d + 1

    truth = pd.DataFrame({k: np.asarray(v, dtype=float) for k, v in t.items()})
    truth.loc[~frame["occupied"].to_numpy(), :] = np.nan
    return Population(addresses=frame, truth=truth)
