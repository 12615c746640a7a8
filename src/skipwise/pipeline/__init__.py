"""The whole pipeline from one run plan: ``skipwise run PLAN.yaml`` and its hand-over package.

See ``docs/run-plan.md`` for the plan's keys and the package's files.
"""

from skipwise.pipeline.plan import RunPlan, load_run_plan, loads_run_plan
from skipwise.pipeline.reporting import Reporter, SilentReporter
from skipwise.pipeline.run import STEPS, RunResult, StepFailed, planned_outputs, run_plan

__all__ = ["RunPlan", "load_run_plan", "loads_run_plan", "run_plan", "RunResult", "StepFailed", "STEPS",
           "planned_outputs", "Reporter", "SilentReporter"]
