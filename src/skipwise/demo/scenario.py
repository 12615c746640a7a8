"""The invented Marrowby Valley Household Life Survey 2026: a complete demo scenario.

:func:`generate` simulates the valley's population, draws a stratified
two-stage sample, runs fieldwork and the interviews, and keeps the ground
truth the generator itself produced: the true status of every (case, item)
cell, the true values, the population control totals and true means, and
the missingness mechanism of every item.  Everything is invented; no real
place, person or answer is involved.

>>> sc = generate(seed=7, n_addresses=800)       # doctest: +SKIP
>>> sc.write("out/demo")                         # doctest: +SKIP

Cautions: weights and imputation do not repair data missing not at random
(the income items here are MNAR by construction); and even invented survey
files should be handled like respondents' answers.

References
----------
Horvitz, D. G. and Thompson, D. J. (1952). A generalization of sampling
without replacement from a finite universe. *JASA* 47, 663–685.
Rubin, D. B. (1976). Inference and missing data. *Biometrika* 63, 581–592.
"""

from __future__ import annotations

from dataclasses import dataclass
from importlib import resources
from pathlib import Path

import numpy as np
import pandas as pd
import yaml

from skipwise.demo.faults import MECHANISMS
from skipwise.demo.interview import simulate_interviews
from skipwise.demo.items import ITEM_NAMES
from skipwise.demo.population import AGE_BANDS, DISTRICTS, age_band_of, simulate_population
from skipwise.demo.sampling import draw_sample, fieldwork

__all__ = ["Scenario", "generate", "questionnaire_path", "CONTEXT", "N_HOUSEHOLDS"]

#: Frame and paradata columns of the interview file (the questionnaire's ``context`` list).
CONTEXT: tuple[str, ...] = ("district", "stratum", "psu", "sel_prob", "disposition", "interview_mode")
#: Households (occupied addresses) in the invented valley.
N_HOUSEHOLDS = 60_000
_MISSING_CODES = [-1, -7, -9]


def questionnaire_path() -> Path:
    """Path of the demo questionnaire shipped with the package."""
    return Path(str(resources.files("skipwise.demo").joinpath("marrowby-2026.yaml")))


@dataclass(frozen=True, kw_only=True)
class Scenario:
    """The generated scenario: data, design, and the generator's ground truth.

    Attributes
    ----------
    interviews
        One row per interviewed case (dispositions 110, 120, 212): ``case_id``,
        the context columns, then every questionnaire column in questionnaire
        order, special codes stored as numbers (-1, -7, -9, 997), NaN blank.
    sample
        Every sampled address: ``case_id``, ``district``, ``stratum``, ``psu``,
        ``sel_prob``, ``disposition``, ``interview_mode``, and ``age_band``
        (1..4, see :data:`~skipwise.demo.population.AGE_BANDS`) and ``sex``
        as recorded in the interview (NaN if not interviewed or not answered).
    truth_status
        True status (docs/contract.md §1) of every cell: interviews' row order, one
        column per questionnaire item (the set ``modes`` is one item).
    truth_values
        True value of every questionnaire column for the interviewed cases,
        NaN where the item does not apply (routing evaluated on the true
        answers; ``income_band`` applies where income was not answered).
    address_truth
        ``case_id`` and ``occupied`` (truth about eligibility, which the
        dispositions 310/390 leave unknown).
    population_totals
        ``{variable: {category: households}}`` for ``district``, ``sex`` and
        ``age_band`` of the respondent adults (one per household).
    true_means
        True population means: ``income``, ``life_sat``, ``trips_week``,
        ``exercise_days`` (all households), ``employed_share`` and
        ``hours_week`` (respondents 16–74; hours among the employed),
        ``smoker_share``.
    mechanisms
        Item -> ``"MCAR"``, ``"MAR"``, ``"MNAR"`` or ``"none"``.
    seed, n_households, n_frame_addresses
        How it was made, and the frame's size.
    """

    interviews: pd.DataFrame
    sample: pd.DataFrame
    truth_status: pd.DataFrame
    truth_values: pd.DataFrame
    address_truth: pd.DataFrame
    population_totals: dict[str, dict[int, int]]
    true_means: dict[str, float]
    mechanisms: dict[str, str]
    seed: int
    n_households: int
    n_frame_addresses: int

    def write(self, out_dir: str | Path, *, overwrite: bool = True) -> dict[str, Path]:
        """Write the scenario's files into ``out_dir``; return ``{name: path}``.

        The interviews go to ``marrowby-2026.sav`` (SPSS, with -1/-7/-9
        declared user-missing) and ``marrowby-2026.dta`` (Stata; codes stay
        plain values with labels); the rest to Parquet and YAML files.
        """
        from skipwise.demo.labels import survey_meta
        from skipwise.io import atomic_output, write_survey

        out = Path(out_dir)
        out.mkdir(parents=True, exist_ok=True)
        paths: dict[str, Path] = {}
        meta = survey_meta(questionnaire_path(), missing_codes=_MISSING_CODES)
        paths["interviews_sav"] = write_survey(self.interviews, out / "marrowby-2026.sav", meta, overwrite=overwrite)
        dta_meta = meta.copy()
        dta_meta.missing_values = {}
        paths["interviews_dta"] = write_survey(self.interviews, out / "marrowby-2026.dta", dta_meta, overwrite=overwrite)
        for name in ("sample", "truth_status", "truth_values", "address_truth"):
            target = out / f"{name}.parquet"
            with atomic_output(target, overwrite=overwrite) as tmp:
                getattr(self, name).to_parquet(tmp, index=False)
            paths[name] = target
        docs = {"population_totals": self.population_totals, "true_means": self.true_means,
                "mechanisms": self.mechanisms}
        for name, doc in docs.items():
            target = out / f"{name}.yaml"
            with atomic_output(target, overwrite=overwrite) as tmp:
                tmp.write_text(yaml.safe_dump(doc, sort_keys=False, allow_unicode=True), encoding="utf-8")
            paths[name] = target
        return paths


def _totals(hh: pd.DataFrame) -> dict[str, dict[int, int]]:
    band = pd.Series(age_band_of(hh["age"]), index=hh.index)
    return {
        "district": {int(k): int((hh["district"] == k).sum()) for k in DISTRICTS},
        "sex": {k: int((hh["sex"] == k).sum()) for k in (1, 2)},
        "age_band": {int(k): int((band == k).sum()) for k in AGE_BANDS},
    }


def _means(hh: pd.DataFrame) -> dict[str, float]:
    working_age = hh["age"] < 75
    employed = working_age & (hh["employed"] == 1)
    return {
        "income": float(hh["income"].mean()),
        "life_sat": float(hh["life_sat"].mean()),
        "trips_week": float(hh["trips_week"].mean()),
        "exercise_days": float(hh["exercise_days"].mean()),
        "employed_share": float(employed.sum() / working_age.sum()),
        "hours_week": float(hh.loc[employed, "hours_week"].mean()),
        "smoker_share": float((hh["smoker"] == 1).mean()),
    }


def generate(seed: int = 2026, n_addresses: int = 5000) -> Scenario:
    """Generate the whole invented scenario, deterministically for a seed.

    Parameters
    ----------
    seed
        Seed of the random generator (same seed, same scenario).
    n_addresses
        Sampled addresses (25 blocks per district; the take per block is
        ``n_addresses / 100``).  Must lie between 100 and the design's limit
        (about 8,000).

    Returns
    -------
    Scenario

    Raises
    ------
    SkipwiseError
        When ``n_addresses`` is outside what the design supports.
    """
    rng = np.random.default_rng(seed)
    pop = simulate_population(rng, N_HOUSEHOLDS)
    sample = draw_sample(rng, pop, n_addresses)
    truth = pop.truth.loc[sample["address_row"].to_numpy()].reset_index(drop=True)
    work = fieldwork(rng, sample, truth)
    interviewed = np.isin(work["disposition"].to_numpy(), (110,))
    idx = np.flatnonzero(interviewed)
    sim = simulate_interviews(rng, truth.iloc[idx].reset_index(drop=True),
                              work["interview_mode"].to_numpy()[idx], work["breaks_off"].to_numpy()[idx])
    disposition = work["disposition"].to_numpy().copy()
    partial_from = ITEM_NAMES.index("modes")
    broke = work["breaks_off"].to_numpy()[idx]
    disposition[idx[broke]] = np.where(sim.stop[broke] >= partial_from, 120, 212)

    frame = pd.DataFrame({
        "case_id": sample["case_id"].to_numpy(),
        "district": sample["district"].to_numpy(),
        "stratum": sample["stratum"].to_numpy(),
        "psu": sample["psu"].to_numpy(),
        "sel_prob": sample["sel_prob"].to_numpy(),
        "disposition": disposition,
        "interview_mode": work["interview_mode"].to_numpy(),
    })
    interviews = pd.concat([frame.iloc[idx].reset_index(drop=True), sim.values], axis=1)
    interviews["interview_mode"] = interviews["interview_mode"].astype("int64")
    age_ok = sim.status["age"].to_numpy() == "answered"
    sex_ok = sim.status["sex"].to_numpy() == "answered"
    band = np.full(len(frame), np.nan)
    sex = np.full(len(frame), np.nan)
    band[idx] = np.where(age_ok, age_band_of(sim.values["age"]), np.nan)
    sex[idx] = np.where(sex_ok, sim.values["sex"], np.nan)
    hh = pop.households
    return Scenario(
        interviews=interviews,
        sample=frame.assign(age_band=band, sex=sex),
        truth_status=sim.status,
        truth_values=sim.true_values,
        address_truth=pd.DataFrame({"case_id": frame["case_id"], "occupied": sample["occupied"].to_numpy()}),
        population_totals=_totals(hh),
        true_means=_means(hh),
        mechanisms=dict(MECHANISMS),
        seed=seed,
        n_households=len(hh),
        n_frame_addresses=len(pop.addresses),
    )

