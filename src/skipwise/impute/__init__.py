"""Imputation and the classic ways of handling missing data.

- :mod:`~skipwise.impute.classic` — listwise deletion, dropping variables, pairwise
  covariance / correlation, mean / median / mode fills
- :mod:`~skipwise.impute.hotdeck` — random and nearest-neighbour donors within classes
- :mod:`~skipwise.impute.model` — regression with residual draws, PMM, logistic, multinomial
- :mod:`~skipwise.impute.chained` — multiple imputation by chained equations
- :mod:`~skipwise.impute.combine` — Rubin's rules with Barnard–Rubin degrees of freedom
- :mod:`~skipwise.impute.skipaware` — imputation that keeps the questionnaire's routing
- :mod:`~skipwise.impute.plan` — the imputation plan file

Caution: imputation does not repair data missing not at random (MNAR).
"""

from skipwise.impute.classic import (DropResult, ListwiseResult, PairwiseResult, drop_variables,
                                     listwise_delete, pairwise_corr, pairwise_cov, simple_impute)
from skipwise.impute.combine import PooledEstimate, pool_means, pool_ols, pool_proportions, rubin_pool
from skipwise.impute.hotdeck import CollapseRecord, HotDeckResult, hotdeck
from skipwise.impute.chained import ChainedResult, chained_impute
from skipwise.impute.model import model_impute
from skipwise.impute.plan import ImputePlan, OutputSpec, check_plan, load_plan
from skipwise.impute.result import MNAR_CAUTION, ImputationResult
from skipwise.impute.skipaware import ItemRule, SkipAwareResult, SkipAwareSpec, impute_skipaware

__all__ = [
    "listwise_delete", "drop_variables", "pairwise_cov", "pairwise_corr", "simple_impute",
    "ListwiseResult", "DropResult", "PairwiseResult", "hotdeck", "HotDeckResult", "CollapseRecord",
    "model_impute", "chained_impute", "ChainedResult", "rubin_pool", "pool_means", "pool_proportions", "pool_ols",
    "PooledEstimate", "impute_skipaware", "SkipAwareSpec", "ItemRule", "SkipAwareResult",
    "load_plan", "check_plan", "ImputePlan", "OutputSpec", "ImputationResult", "MNAR_CAUTION",
]
