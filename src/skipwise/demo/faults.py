"""What goes wrong in the invented interviews: item nonresponse and routing faults.

Item nonresponse (don't know -7, refused -9, or a blank) follows one of three
mechanisms, recorded per item in :data:`MECHANISMS`:

- ``MCAR`` — a constant rate whatever the respondent (Rubin 1976);
- ``MAR`` — the rate depends on fully recorded characteristics (age, sex,
  district): ``life_sat`` and ``hours_week``;
- ``MNAR`` — the rate depends on the unrecorded value itself: the income
  amount and band are refused more often when the true income is high.

Routing faults are injected only on *leaf* items (no later rule reads them),
so they never change another item's universe: ``off_route`` (a value stored
although the routing skips the item), ``wrong_code`` (the not-asked code -1
stored although the item was asked) and ``invalid`` (a value outside the
item's range that is no code).

References
----------
Rubin, D. B. (1976). Inference and missing data. *Biometrika* 63, 581–592.
"""

from __future__ import annotations

from typing import Mapping

import numpy as np

from skipwise.demo.items import ITEM_NAMES

__all__ = ["MECHANISMS", "nonresponse_probs", "OFF_ROUTE_RATE", "WRONG_CODE_RATE", "INVALID_RATE",
           "INVALID_VALUES", "ASK_ANYWAY_RATE", "WEB_DECLINE_CODE", "COMMENT_RATE", "COMMENTS"]

#: Items whose web form offers "Prefer not to say": a web refusal is stored as this code
#: (reason ``prefer_not_to_say``, pinned to number 21 in the questionnaire), in person as -9.
WEB_DECLINE_CODE: Mapping[str, float] = {"savings": -8.0}
#: Share of interviewed cases who write something in the closing comment box (the rest leave it blank).
COMMENT_RATE = 0.06
#: What they write (invented).
COMMENTS = (
    "The bus to Fennick should run on Sundays.",
    "Please mend the footpath along the Oldmere road.",
    "More evening trains from Brackwater, please.",
    "Thank you, it was interesting to think about.",
    "The questions about income were too personal.",
    "Tollin Heath needs a doctor's surgery again.",
)

#: Item -> (total rate, share don't know, share refused); the rest of the rate is blanks.
_MCAR: dict[str, tuple[float, float, float]] = {
    "tenure": (0.01, 0.2, 0.5), "years_here": (0.02, 0.6, 0.1), "has_car": (0.006, 0.3, 0.4),
    "internet": (0.006, 0.3, 0.3), "rent_month": (0.04, 0.4, 0.4), "n_cars": (0.01, 0.5, 0.2),
    "education": (0.02, 0.3, 0.4), "born_valley": (0.01, 0.4, 0.3), "years_valley": (0.03, 0.7, 0.1),
    "age": (0.015, 0.1, 0.8), "employed": (0.015, 0.2, 0.6), "commute_mode": (0.01, 0.3, 0.3),
    "commute_minutes": (0.03, 0.6, 0.1), "job_search": (0.015, 0.3, 0.4), "search_weeks": (0.04, 0.7, 0.1),
    "modes": (0.02, 0.0, 0.6), "trips_week": (0.04, 0.375, 0.25), "bus_rating": (0.03, 0.6, 0.1),
    "rail_rating": (0.03, 0.6, 0.1), "bike_safe": (0.02, 0.5, 0.2), "health": (0.01, 0.3, 0.4),
    "smoker": (0.02, 0.1, 0.7), "cigs_day": (0.04, 0.5, 0.3), "exercise_days": (0.04, 0.375, 0.25),
    "savings": (0.03, 0.3, 0.5),
}
for _k in range(1, 9):
    _MCAR[f"m_sex_{_k}"] = (0.005, 0.2, 0.4)
    _MCAR[f"m_age_{_k}"] = (0.02, 0.7, 0.2)
    _MCAR[f"m_works_{_k}"] = (0.015, 0.6, 0.2)



def _mechanism(name: str) -> str:
    if name in ("life_sat", "hours_week"):
        return "MAR"
    if name in ("income", "income_band"):
        return "MNAR"
    return "MCAR" if name in _MCAR else "none"


#: Missingness mechanism of each item's nonresponse ("none": no item nonresponse injected).
MECHANISMS: dict[str, str] = {name: _mechanism(name) for name in ITEM_NAMES}


def _expit(x: np.ndarray) -> np.ndarray:
    return 1.0 / (1.0 + np.exp(-x))


def nonresponse_probs(item: str, cov: Mapping[str, np.ndarray]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Probabilities of don't know, refused and blank for an asked item, per case.

    ``cov`` holds the respondents' *true* ``age``, ``sex``, ``district`` and
    ``income``.
    """
    n = len(cov["age"])
    if item == "life_sat":   # MAR: older people, men and Tollin Heath answer less often
        rate = _expit(-3.4 + 0.03 * (cov["age"] - 50) + 0.5 * (cov["sex"] == 2)
                      + np.array([0.0, -0.3, 0.2, 0.6])[cov["district"].astype(int) - 1])
        return 0.5 * rate, 0.2 * rate, 0.3 * rate
    if item == "hours_week":  # MAR: women and Fennick answer less often (strong enough to be seen)
        rate = _expit(-3.2 + 1.2 * (cov["sex"] == 1) + np.array([0.8, 0.0, -0.4, -0.3])[cov["district"].astype(int) - 1])
        return 0.6 * rate, 0.1 * rate, 0.3 * rate
    if item in ("income", "income_band"):  # MNAR: the higher the true income, the more refusals
        shift = 0.0 if item == "income" else -0.8
        ref = _expit(-2.3 + shift + 1.4 * np.log(np.maximum(cov["income"], 100) / 3000))
        return np.full(n, 0.02), ref, np.full(n, 0.01)
    total, dk, rf = _MCAR.get(item, (0.0, 0.0, 0.0))
    return np.full(n, total * dk), np.full(n, total * rf), np.full(n, total * (1 - dk - rf))


#: Share of out-of-universe cells of a faulty leaf that get a value stored anyway.
OFF_ROUTE_RATE: dict[str, float] = {
    "rent_month": 0.01, "n_cars": 0.02, "years_valley": 0.01, "hours_week": 0.01, "commute_minutes": 0.01,
    "search_weeks": 0.01, "bus_rating": 0.01, "rail_rating": 0.01, "bike_safe": 0.01, "cigs_day": 0.01,
    "income_band": 0.02, **{f"m_works_{k}": 0.005 for k in range(1, 9)},
}
#: Share of answered in-universe cells of a leaf where the not-asked code -1 was stored instead.
WRONG_CODE_RATE: dict[str, float] = {
    "rent_month": 0.01, "n_cars": 0.01, "years_valley": 0.01, "hours_week": 0.01, "commute_minutes": 0.02,
    "search_weeks": 0.02, "bus_rating": 0.01, "rail_rating": 0.01, "bike_safe": 0.01, "cigs_day": 0.02,
    "income_band": 0.02, "life_sat": 0.005,
}
#: Share of answered (or off-route) cells of a leaf holding a value outside its range instead.
INVALID_RATE: dict[str, float] = {
    "rent_month": 0.005, "n_cars": 0.005, "years_valley": 0.005, "hours_week": 0.01, "commute_minutes": 0.005,
    "search_weeks": 0.005, "bus_rating": 0.005, "rail_rating": 0.005, "bike_safe": 0.005, "cigs_day": 0.01,
    "income_band": 0.005, "life_sat": 0.01,
}
#: Out-of-range values (never a declared code) used for ``invalid`` cells.
INVALID_VALUES: dict[str, tuple[float, ...]] = {
    "rent_month": (5, 9000), "n_cars": (0, 9), "years_valley": (95, 120), "hours_week": (95, 99, 0),
    "commute_minutes": (0, 300), "search_weeks": (0, 150), "bus_rating": (0, 6, 8), "rail_rating": (0, 6),
    "bike_safe": (3, 8), "cigs_day": (0, 80, 99), "income_band": (5, 8), "life_sat": (11, 12, 77),
}
#: In person, when a gate is unknown, the interviewer sometimes asks the item anyway.
ASK_ANYWAY_RATE = 0.5
