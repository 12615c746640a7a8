"""Unit outcome rates and survey weighting: adjustment, calibration, trimming, replicates.

Caution: nonresponse weighting does not repair data missing not at random (MNAR).
"""

from skipwise.weighting.base import base_weights
from skipwise.weighting.calibrate import calibrate_linear, calibrate_logit, poststratify, rake
from skipwise.weighting.diagnostics import effective_n, kish_deff, weight_cv, weight_summary
from skipwise.weighting.outcomes import count_outcomes, interview_outcome, outcome_rates
from skipwise.weighting.pipeline import chain_weights, prepare, run_chain
from skipwise.weighting.plan import WeightingPlan, load_plan
from skipwise.weighting.replicates import bootstrap_design, jackknife_design, replicate_standard_errors
from skipwise.weighting.weigh import CAUTIONS, WeighResult, weigh

__all__ = [
    "outcome_rates", "interview_outcome", "count_outcomes",
    "rake", "poststratify", "calibrate_linear", "calibrate_logit", "base_weights",
    "kish_deff", "effective_n", "weight_cv", "weight_summary",
    "load_plan", "WeightingPlan", "prepare", "run_chain", "chain_weights",
    "jackknife_design", "bootstrap_design", "replicate_standard_errors",
    "weigh", "WeighResult", "CAUTIONS",
]
