"""Weighting variables the data file lacks, delivered beside the weights.

A calibration margin or an adjustment class is often made for the weighting (an age band cut
from the age, a region grouped from districts) and lives only in the weighting file.  An analyst
who gets the final data with the weights needs those variables too, to check the margins or to
reproduce a weighting class, so the run joins them to the data file by case id like the weights,
with the weighting file's variable and value labels (a plain weighting file gets a variable label
naming its source).
"""

from __future__ import annotations

import pandas as pd

from skipwise.io.meta import SurveyMeta, get_meta
from skipwise.pipeline.join import weighting_columns

__all__ = ["DELIVERED_ROLES", "derived_columns", "derived_meta"]

#: Roles (as :func:`skipwise.pipeline.join.weighting_columns` names them) of the weighting variables
#: delivered when the data file does not hold them.
DELIVERED_ROLES = ("eligibility class", "nonresponse class", "propensity covariate", "calibration variable")


def derived_columns(spec, weighted: pd.DataFrame, data_columns) -> list[str]:
    """The plan's class, covariate and margin variables in ``weighted`` that the data file lacks."""
    have = set(map(str, data_columns))
    return [c for c, role in weighting_columns(spec).items()
            if role in DELIVERED_ROLES and c in weighted.columns and c not in have]


def derived_meta(spec, weighted: pd.DataFrame, columns: list[str], source: str) -> SurveyMeta:
    """Labels and levels of the delivered weighting variables, from the weighting file's metadata."""
    own = get_meta(weighted)
    roles = weighting_columns(spec)
    numeric_totals = set(spec.calibration.totals) if spec.calibration is not None else set()
    out = SurveyMeta()
    for col in columns:
        label = own.column_labels.get(col) or f"{col}: {roles[col]} of the weighting (from {source})"
        measure = own.measure.get(col) or ("scale" if col in numeric_totals else "nominal")
        out = out.with_column(col, label=label, value_labels=own.value_labels.get(col), measure=measure)
    return out
