"""The run plan of the invented demo scenario, with its weighting and imputation plans.

``skipwise demo`` writes the scenario's files into ``OUT/data``, these plans into
``OUT``, and then runs the plan exactly as ``skipwise run OUT/plan.yaml`` would.
"""

from __future__ import annotations

from pathlib import Path

from skipwise.demo.compare import weighting_input, weighting_plan_text
from skipwise.demo.impute import imputation_plan_text
from skipwise.demo.population import AGE_BANDS
from skipwise.io import SurveyMeta, write_survey
from skipwise.io.atomic import atomic_output

__all__ = ["run_plan_text", "write_demo_plans", "PLAN_NAME", "WEIGHTING_INPUT"]

PLAN_NAME = "plan.yaml"
#: The weighting file: every sampled address, with the respondents' answers merged.
WEIGHTING_INPUT = "sample_with_answers.parquet"


def run_plan_text(*, interviews: str = "data/marrowby-2026.sav", questionnaire: str = "marrowby-2026.yaml",
                  weighting_data: str = f"data/{WEIGHTING_INPUT}") -> str:
    """The demo's run plan; paths are relative to the plan's folder."""
    return "\n".join([
        "# Run plan of the invented demo scenario (written by `skipwise demo`); see docs/run-plan.md.",
        "# Run it again with: skipwise run plan.yaml --overwrite",
        "format: 1",
        f"data: {interviews}",
        f"questionnaire: {questionnaire}",
        "check:",
        "  stop_on_error: false        # the scenario holds injected out-of-range values on purpose",
        "report:",
        "  by: [district]",
        "  case_ids: true",
        "diagnose:",
        "  # frame variables and well-answered core items; not the disposition, which itself",
        "  # records how complete each interview was",
        "  aux: [district, stratum, interview_mode, age, sex]",
        "weighting:",
        "  plan: weighting_plan.yaml",
        f"  data: {weighting_data}   # all sampled addresses: nonrespondents are not in the interviews",
        "imputation:",
        "  plan: imputation_plan.yaml",
        "output:",
        "  folder: package",
        "  name: marrowby-2026",
        "  status_columns: [input, parquet]",
        "  recoded: [dta]",
        "  imputed_format: parquet",
        "study:                         # overrides the questionnaire's study block key by key",
        "  fieldwork_start: 2026-03-02",
        "  fieldwork_end: 2026-05-29",
        "  citation: Marrowby Valley Statistics Unit (2026). Household Life Survey 2026 (invented demo data).",
        "",
    ])


def _write_text(path: Path, text: str, overwrite: bool) -> Path:
    with atomic_output(path, overwrite=overwrite) as tmp:
        tmp.write_text(text, encoding="utf-8")
    return path


def write_demo_plans(scenario, out: str | Path, *, overwrite: bool = False) -> Path:
    """Write the questionnaire copy, the weighting file and the three plans; return the run plan's path.

    Expects the scenario's own files already in ``OUT/data`` (:meth:`Scenario.write`).
    """
    from skipwise.demo import questionnaire_path

    out = Path(out)
    _write_text(out / "marrowby-2026.yaml", questionnaire_path().read_text(encoding="utf-8"), overwrite)
    # the age band is made for a calibration margin: the weighting file labels it, and the run
    # delivers it beside the weights in the final data file
    bands = {code: label for code, (label, _, _) in AGE_BANDS.items()}
    meta = SurveyMeta(column_labels={"age_band": "Age band (calibration margin)"}, value_labels={"age_band": bands},
                      measure={"age_band": "ordinal"})
    write_survey(weighting_input(scenario.sample, scenario.interviews).reset_index(drop=True),
                 out / "data" / WEIGHTING_INPUT, meta, overwrite=overwrite)
    _write_text(out / "weighting_plan.yaml", weighting_plan_text(scenario.population_totals), overwrite)
    _write_text(out / "imputation_plan.yaml", imputation_plan_text(seed=scenario.seed), overwrite)
    return _write_text(out / PLAN_NAME, run_plan_text(), overwrite)
