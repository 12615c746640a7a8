"""skipwise: decode every gap of a survey file against its questionnaire's routing.

Public entry points (see README and DEVELOPERS.md):

- :func:`load_questionnaire` — read and validate a questionnaire file
- :func:`read_survey` / :func:`write_survey` — survey files with labels and missing-value metadata
- :func:`classify` — one status per (case, item)
- :func:`outcome_rates`, :func:`rake`, :func:`kish_deff` — unit outcome rates and weighting
- :func:`little_mcar_test` — Little's (1988) test of MCAR
"""

from __future__ import annotations

__version__ = "0.1.0"

from skipwise.errors import Problem, ProblemCode, SkipwiseError

__all__ = ["__version__", "Problem", "ProblemCode", "SkipwiseError"]
