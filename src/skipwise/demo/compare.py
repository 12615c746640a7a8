"""How close skipwise comes to the demo generator's own truth (statuses, means, mechanisms)."""

from __future__ import annotations

from typing import Mapping

import numpy as np
import pandas as pd

from skipwise.classify.result import Classification

__all__ = ["status_agreement", "weighting_input", "weighting_plan_text", "mean_comparison"]

#: Special codes of the scenario, left out of every estimate.
SPECIAL_CODES = (-1, -7, -9, 997)
ESTIMATE_ITEMS = ("income", "life_sat", "trips_week", "exercise_days", "hours_week")


def status_agreement(cl: Classification, truth: pd.DataFrame) -> tuple[float, pd.DataFrame]:
    """Share of cells whose status equals the generator's true status, and the disagreeing cells."""
    got = cl.status.astype(str).reset_index(drop=True)
    want = truth[list(got.columns)].astype(str).reset_index(drop=True)
    same = got.to_numpy() == want.to_numpy()
    rows, cols = np.nonzero(~same)
    diff = pd.DataFrame({"case_id": cl.case_ids[rows], "item": np.asarray(got.columns)[cols],
                         "classified": got.to_numpy()[rows, cols], "truth": want.to_numpy()[rows, cols]})
    return float(same.mean()), diff


def weighting_input(sample: pd.DataFrame, interviews: pd.DataFrame) -> pd.DataFrame:
    """All sampled addresses with the interview answers used for estimates.

    Respondents whose sex or age band is missing get their district's most common category:
    a simple single imputation of the calibration variables (common practice, no source), so
    that every respondent has a raking cell.
    """
    answers = interviews[["case_id", *ESTIMATE_ITEMS, "employed"]]
    frame = sample.merge(answers, on="case_id", how="left", validate="one_to_one")
    interviewed = frame["case_id"].isin(interviews["case_id"])
    for col in ("sex", "age_band"):
        mode = frame[interviewed].groupby("district")[col].agg(lambda s: s.mode().iloc[0])
        fill = frame["district"].map(mode)
        frame[col] = frame[col].where(frame[col].notna() | ~interviewed, fill)
    return frame


def weighting_plan_text(totals: Mapping[str, Mapping[object, float]]) -> str:
    """The demo's weighting plan: dispositions, classes by district, raking to the invented totals."""
    def margin(name: str) -> str:
        inner = ", ".join(f"{k}: {v}" for k, v in totals[name].items())
        return f"    {name}: {{{inner}}}"

    return "\n".join([
        "# Weighting plan of the invented demo scenario (written by `skipwise demo`).",
        "format: 1",
        "case_id: case_id",
        "dispositions:",
        "  column: disposition",
        "  categories: {I: [110], P: [120], R: [211, 212], NC: [220], O: [230], UH: [310], UO: [390], NE: [410]}",
        "e: estimate",
        "base: {probability: sel_prob}",
        "eligibility: {classes: [district]}",
        "nonresponse: {method: classes, classes: [district, stratum], min_respondents: 20, max_factor: 3.0}",
        "calibration:",
        "  method: rake",
        "  margins:",
        margin("district"), margin("sex"), margin("age_band"),
        "trimming: {median_multiple: 4.0}",
        "replicates: {method: jackknife, psu: psu, strata: stratum}",
        "estimates:",
        f"  means: [{', '.join(ESTIMATE_ITEMS)}]",
        "  proportions: [employed]",
        f"  exclude_values: [{', '.join(map(str, SPECIAL_CODES))}]",
        "",
    ])


def mean_comparison(values: pd.DataFrame, weights: np.ndarray, respondent: np.ndarray,
                    true_means: Mapping[str, float]) -> pd.DataFrame:
    """True population means beside unweighted and weighted respondent means.

    ``values`` holds answered cells only (NaN for every other status: codes, invalid values,
    off-route answers), aligned with ``weights``.
    """
    rows = []
    for item in ESTIMATE_ITEMS:
        if item not in true_means or item not in values.columns:
            continue
        x = values[item].to_numpy(dtype=float)
        ok = respondent & np.isfinite(x)
        unweighted = x[ok].mean()
        weighted = np.average(x[ok], weights=weights[ok])
        rows.append({"item": item, "true": true_means[item], "unweighted": unweighted, "weighted": weighted,
                     "closer": abs(weighted - true_means[item]) < abs(unweighted - true_means[item])})
    return pd.DataFrame(rows)
