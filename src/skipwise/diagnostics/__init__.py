"""Diagnostics of the missingness mechanism, over in-scope cells only.

Legitimate skips are never counted as missing: :func:`missingness_frame`
keeps, per item, the cases in universe that either answered or gave item
nonresponse.  Every method is a pure function over pandas objects.

Caution: no test on the observed data distinguishes missing at random from
missing not at random; weights and imputation do not repair MNAR.
"""

from __future__ import annotations

from skipwise.diagnostics.compare import ItemComparison, compare_item, infer_categorical
from skipwise.diagnostics.frame import JointFrame, MissingnessFrame, missingness_frame
from skipwise.diagnostics.little import LittleResult, little_mcar_test
from skipwise.diagnostics.model import LogitResult, auc_mann_whitney, nonresponse_logit
from skipwise.diagnostics.multiplicity import adjust_pvalues
from skipwise.diagnostics.propensity import RIndicatorResult, r_indicator
from skipwise.diagnostics.report import DiagnoseOptions, DiagnosticsReport, run_diagnostics
from skipwise.diagnostics.sensitivity import DeltaResult, delta_adjustment
from skipwise.diagnostics.suggest import (
    CAUTIONS, ItemEvidence, Option, Suggestion, SuggestionThresholds, flagged, suggest_handling,
)
from skipwise.diagnostics.survey import SurveyInputs, default_auxiliaries, survey_inputs
from skipwise.diagnostics.workbook import write_diagnostics_workbook

__all__ = [
    "CAUTIONS", "DeltaResult", "DiagnoseOptions", "DiagnosticsReport", "ItemComparison", "ItemEvidence", "JointFrame", "LittleResult",
    "LogitResult", "MissingnessFrame", "Option", "RIndicatorResult", "Suggestion",
    "SuggestionThresholds", "auc_mann_whitney", "compare_item", "delta_adjustment",
    "infer_categorical", "little_mcar_test", "missingness_frame", "nonresponse_logit",
    "r_indicator", "run_diagnostics", "suggest_handling", "write_diagnostics_workbook",
    "SurveyInputs", "adjust_pvalues", "default_auxiliaries", "flagged", "survey_inputs",
]
