"""The demo's imputation plan, and imputed means against the generator's true values."""

from __future__ import annotations

import numpy as np
import pandas as pd

from skipwise.demo.compare import SPECIAL_CODES

__all__ = ["IMPUTED_ITEMS", "imputation_plan_text", "imputed_mean_comparison"]

IMPUTED_ITEMS = ("employed", "hours_week", "trips_week", "exercise_days", "life_sat", "health")


def imputation_plan_text(m: int = 3, seed: int = 2026) -> str:
    """Hot-deck within district for categories, predictive mean matching on age and sex for numbers."""
    return "\n".join([
        "# Imputation plan of the invented demo scenario (written by `skipwise demo`).",
        "format: 1",
        f"imputations: {m}",
        f"seed: {seed}",
        "default: {method: pmm, covariates: [age, sex], donors: 5}",
        "items:",
        "  employed: {method: hotdeck, classes: [district, sex]}",
        "  health: {method: hotdeck, classes: [district]}",
        f"only: [{', '.join(IMPUTED_ITEMS)}]",
        "output: {form: stacked, imputation_column: imputation}",
        "",
    ])


def _mean(values: pd.Series) -> float:
    x = pd.to_numeric(values, errors="coerce").to_numpy(dtype=float)
    x = x[np.isfinite(x) & ~np.isin(x, SPECIAL_CODES)]
    return float(x.mean()) if x.size else float("nan")


def imputed_mean_comparison(stacked: pd.DataFrame, scenario) -> pd.DataFrame:
    """Per item: the true mean over cases the item applies to, the respondents' mean, the imputed mean.

    The imputed mean averages, over the M completed files, the mean of every valid value
    (answers and imputations); the true mean is the generator's, over the same interviews.
    """
    truth = scenario.truth_values
    observed = scenario.interviews
    rows = []
    for item in IMPUTED_ITEMS:
        if item not in truth.columns:
            continue
        per_m = [_mean(group[item]) for _, group in stacked.groupby("imputation")]
        true_mean = _mean(truth[item])
        rows.append({"item": item, "true": true_mean, "respondents": _mean(observed[item]),
                     "imputed": float(np.mean(per_m)),
                     "imputed_closer": abs(np.mean(per_m) - true_mean) <= abs(_mean(observed[item]) - true_mean)})
    return pd.DataFrame(rows)
