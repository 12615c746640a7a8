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


def imputed_mean_comparison(stacked: pd.DataFrame, scenario, cl, questionnaire) -> pd.DataFrame:
    """Per item: the true mean over cases the item applies to, the respondents' mean, the imputed mean.

    Respondents' and imputed means use answered cells only (the classification of the
    interviews, and of each completed file), so invalid values and off-route answers never
    count; the imputed mean averages the M completed files. The true mean is the generator's,
    over the same interviews.
    """
    from skipwise.classify import classify

    truth = scenario.truth_values
    observed = cl.analysis_values()
    completed = [classify(group.drop(columns="imputation"), questionnaire).analysis_values()
                 for _, group in stacked.groupby("imputation")]
    rows = []
    for item in IMPUTED_ITEMS:
        if item not in truth.columns:
            continue
        imputed = float(np.mean([_mean(values[item]) for values in completed]))
        true_mean, respondents = _mean(truth[item]), _mean(observed[item])
        rows.append({"item": item, "true": true_mean, "respondents": respondents, "imputed": imputed,
                     "imputed_closer": abs(imputed - true_mean) <= abs(respondents - true_mean)})
    return pd.DataFrame(rows)
