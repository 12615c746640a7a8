"""The built-in invented demo scenario: the Marrowby Valley Household Life Survey 2026.

Every place, person and value is generated. See examples/README.md.
"""

from skipwise.demo.scenario import Scenario, generate, questionnaire_path

__all__ = ["Scenario", "generate", "questionnaire_path"]
