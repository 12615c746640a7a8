"""Sample design and fieldwork outcomes of the invented scenario.

A stratified two-stage design: strata are the districts; in each district
``n_psu`` blocks are drawn with probability proportional to their number of
addresses (systematic PPS), then a simple random sample of addresses inside
each selected block.  With equal take per block the design is self-weighting
within a district: ``sel_prob = n_psu * m / M_h``.

Fieldwork then gives every address one final disposition, coded with our own
integers that map onto the published standard's outcome categories (see
:data:`DISPOSITION_CATEGORY`).  Response depends on district and on the
respondent's age and sex, so unweighted respondents over-represent older
people and the easier districts.

References
----------
Madow, W. G. (1949). On the theory of systematic sampling, II. *Annals of
Mathematical Statistics* 20, 333–354.
American Association for Public Opinion Research (2016). *Standard
Definitions: Final Dispositions of Case Codes and Outcome Rates for
Surveys*, 9th ed.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from skipwise.demo.population import Population
from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError

__all__ = ["DISPOSITIONS", "DISPOSITION_CATEGORY", "INTERVIEW_MODES", "draw_sample", "fieldwork",
           "max_addresses"]

#: Disposition codes of the scenario and their labels.
DISPOSITIONS: dict[int, str] = {
    110: "Complete interview", 120: "Partial interview", 211: "Refusal", 212: "Break-off",
    220: "Non-contact", 230: "Other non-interview", 310: "Unknown if household occupied",
    390: "Unknown eligibility, other", 410: "Not eligible (vacant or not a dwelling)",
}
#: Outcome category of the published standard for each disposition code.
DISPOSITION_CATEGORY: dict[int, str] = {110: "I", 120: "P", 211: "R", 212: "R", 220: "NC", 230: "O",
                                        310: "UH", 390: "UO", 410: "NE"}
#: Interview mode codes.
INTERVIEW_MODES: dict[int, str] = {1: "In person", 2: "Web"}

_INTERVIEWED = (110, 120, 212)


def _expit(x: np.ndarray) -> np.ndarray:
    return 1.0 / (1.0 + np.exp(-x))


def _split(total: int, parts: int) -> np.ndarray:
    out = np.full(parts, total // parts)
    out[: total % parts] += 1
    return out


def max_addresses(pop: Population, n_psu: int = 25) -> int:
    """Largest sample the design supports (the take per block may not exceed the smallest block)."""
    sizes = pop.addresses.groupby("psu").size()
    return int(sizes.min()) * n_psu * pop.addresses["district"].nunique()


def draw_sample(rng: np.random.Generator, pop: Population, n_addresses: int, n_psu: int = 25) -> pd.DataFrame:
    """Draw the two-stage sample; return the selected addresses with ``sel_prob``.

    Raises
    ------
    SkipwiseError
        When ``n_addresses`` is too small for one address per block or larger
        than the smallest selectable block allows.
    """
    frame = pop.addresses
    districts = np.sort(frame["district"].unique())
    limit = max_addresses(pop, n_psu)
    if not n_psu * len(districts) <= n_addresses <= limit:
        raise SkipwiseError(Problem(
            code=ProblemCode.BAD_VALUE, category=Category.USAGE, item="n_addresses",
            message=f"n_addresses={n_addresses} is outside what the demo design supports",
            hint=f"choose between {n_psu * len(districts)} and {limit}"))
    rows = []
    for h, n_h in zip(districts, _split(n_addresses, len(districts))):
        sub = frame.loc[frame["district"] == h]
        sizes = sub.groupby("psu").size()
        cum = np.cumsum(sizes.to_numpy())
        step = cum[-1] / n_psu
        points = rng.uniform(0, step) + step * np.arange(n_psu)
        chosen = sizes.index.to_numpy()[np.searchsorted(cum, points, side="right")]
        pi_psu = n_psu * sizes.loc[chosen].to_numpy() / cum[-1]
        for psu, pi, m in zip(chosen, pi_psu, _split(int(n_h), n_psu)):
            idx = sub.index.to_numpy()[sub["psu"].to_numpy() == psu]
            take = rng.choice(idx, int(m), replace=False)
            rows.append(pd.DataFrame({"address_row": np.sort(take), "sel_prob": pi * m / len(idx)}))
    sample = pd.concat(rows, ignore_index=True)
    addr = frame.loc[sample["address_row"].to_numpy()].reset_index(drop=True)
    return pd.DataFrame({
        "case_id": np.arange(1, len(sample) + 1) + 100_000,
        "address_row": sample["address_row"].to_numpy(),
        "district": addr["district"].to_numpy(),
        "stratum": addr["district"].to_numpy(),
        "psu": addr["psu"].to_numpy(),
        "sel_prob": sample["sel_prob"].to_numpy(),
        "occupied": addr["occupied"].to_numpy(),
    })


def fieldwork(rng: np.random.Generator, sample: pd.DataFrame, truth: pd.DataFrame,
              breakoff_share: float = 0.05) -> pd.DataFrame:
    """Final disposition, interview mode and break-off flag of every sampled address.

    ``truth`` holds the true values of the sampled addresses (row-aligned with
    ``sample``).  Returns columns ``disposition``, ``interview_mode`` (NaN if
    not interviewed) and ``breaks_off`` (bool).
    """
    n = len(sample)
    occ = sample["occupied"].to_numpy()
    d = sample["district"].to_numpy() - 1
    age = truth["age"].to_numpy()
    female = truth["sex"].to_numpy() == 1
    u = rng.random((n, 5))
    disp = np.full(n, 0)
    unknown = u[:, 0] < np.where(occ, 0.05, 0.15)
    disp[unknown] = np.where(u[unknown, 1] < 0.8, 310, 390)
    disp[~occ & ~unknown] = 410
    live = occ & ~unknown
    a = np.nan_to_num(age - 50)
    contact = u[:, 2] < _expit(1.7 + np.array([-0.5, 0.1, 0.4, 0.2])[d] + 0.02 * a)
    other = u[:, 3] < 0.03
    coop = u[:, 4] < _expit(0.3 + np.array([-0.3, 0.1, 0.3, -0.1])[d] + 0.025 * a + 0.2 * female)
    disp[live & ~contact] = 220
    disp[live & contact & other] = 230
    disp[live & contact & ~other & ~coop] = 211
    interviewed = live & contact & ~other & coop
    disp[interviewed] = 110
    v = rng.random((n, 2))
    breaks = interviewed & (v[:, 0] < breakoff_share)
    has_web = truth["internet"].to_numpy() == 1
    web = has_web & (v[:, 1] < _expit(0.6 - 0.06 * a))
    mode = np.where(interviewed, np.where(web, 2, 1), np.nan)
    return pd.DataFrame({"disposition": disp, "interview_mode": mode, "breaks_off": breaks})
