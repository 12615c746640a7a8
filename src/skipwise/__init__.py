"""skipwise: decode every gap of a survey file against its questionnaire's routing.

Public entry points (see README and DEVELOPERS.md):

- :func:`load_questionnaire` — read and validate a questionnaire file
- :func:`read_survey` / :func:`write_survey` — survey files with labels and missing-value metadata
- :func:`classify` — one status per (case, item), as a :class:`Classification`
- :func:`outcome_rates`, :func:`rake`, :func:`kish_deff` — unit outcome rates and weighting
- :func:`little_mcar_test` — Little's (1988) test of MCAR

Entry points other than :func:`classify` are imported on first use.
"""

from __future__ import annotations

from importlib import import_module
from typing import Any

__version__ = "0.1.0"

from skipwise.errors import Problem, ProblemCode, SkipwiseError  # noqa: E402

# `classify` is both a subpackage and its main function. Importing the function here, eagerly,
# makes `skipwise.classify` the function for good: a later import of the subpackage (or of one of
# its modules) does not rebind the package attribute once the subpackage is loaded.
from skipwise.classify import Classification, classify  # noqa: E402

_LAZY = {
    "load_questionnaire": "skipwise.questionnaire",
    "loads_questionnaire": "skipwise.questionnaire",
    "Questionnaire": "skipwise.questionnaire",
    "read_survey": "skipwise.io",
    "write_survey": "skipwise.io",
    "SurveyMeta": "skipwise.io",
    "get_meta": "skipwise.io",
    "set_meta": "skipwise.io",
    "outcome_rates": "skipwise.weighting",
    "rake": "skipwise.weighting",
    "poststratify": "skipwise.weighting",
    "calibrate_linear": "skipwise.weighting",
    "calibrate_logit": "skipwise.weighting",
    "kish_deff": "skipwise.weighting",
    "weigh": "skipwise.weighting",
    "little_mcar_test": "skipwise.diagnostics",
    "run_diagnostics": "skipwise.diagnostics",
    "write_item_report": "skipwise.report",
    "check_data": "skipwise.checkdata",
    "draft_questionnaire": "skipwise.draft",
    "impute_skipaware": "skipwise.impute",
    "chained_impute": "skipwise.impute",
    "hotdeck": "skipwise.impute",
    "rubin_pool": "skipwise.impute",
    "run_plan": "skipwise.pipeline",
    "load_run_plan": "skipwise.pipeline",
}

__all__ = ["__version__", "Problem", "ProblemCode", "SkipwiseError", "classify", "Classification", *_LAZY]


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        value = getattr(import_module(_LAZY[name]), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'skipwise' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(__all__)
