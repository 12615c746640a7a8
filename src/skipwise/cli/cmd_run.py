"""``skipwise run``: the whole pipeline from one run plan into one hand-over package."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from skipwise.cli.app import app, fail
from skipwise.cli.common import EchoReporter
from skipwise.errors import SkipwiseError

HELP = (
    "Run the whole pipeline from one run plan (YAML; see docs/run-plan.md): read the data, check it "
    "against the questionnaire, classify every cell, write the item report and the diagnostics, "
    "weight and impute (each as the plan says), then export the hand-over package: the final data "
    "file in the input's format and as Parquet (every original column, label and missing-value "
    "definition, plus status and weight columns), the workbooks, the imputed file(s), a codebook "
    "(Markdown and HTML) and manifest.json (versions, the resolved plan, seeds, timings and the "
    "SHA-256 of every input and output).\n\n"
    "Every output path is checked before any step runs; nothing is replaced without --overwrite, and "
    "files move into the package only when every step succeeded. A failing step stops the run "
    "(exit status 1) with a message naming the step. Check errors stop the run only when the plan "
    "says check: {stop_on_error: true}.\n\n"
    "With engine: dask in the plan (docs/scale.md) the steps run on partitions on a Dask cluster (the "
    "plan's scheduler, else a local one): the final data file is one Parquet or CSV file, diagnose and "
    "impute gather the columns they need to this machine when they fit SKIPWISE_GATHER_BUDGET.\n\n"
    "Caution: weights and imputation do not repair data missing not at random (MNAR). The package "
    "holds respondents' answers and the fault list names case ids — follow your organization's data "
    "protection rules and methodology standards."
)


def run_and_echo(plan: Path, *, overwrite: bool):
    """Run a plan with terminal progress and print where the package went (shared with ``demo``)."""
    from skipwise.pipeline.run import run_plan

    result = run_plan(plan, overwrite=overwrite, reporter=EchoReporter())
    total = sum(s.seconds for s in result.steps)
    typer.echo(f"hand-over package ({len(result.files)} files, {total:.1f} s) in {result.folder}/")
    for role, path in result.files.items():
        typer.echo(f"  {path.name}")
    typer.echo("caution: weights and imputation do not repair data missing not at random (MNAR); the "
               "package holds respondents' answers — share it only under your data protection rules.")
    return result


@app.command("run", help=HELP)
def run_command(
    plan: Annotated[Path, typer.Argument(help="Run plan file (YAML); see docs/run-plan.md.")],
    overwrite: Annotated[bool, typer.Option("--overwrite", help="Replace the files of an earlier package.")] = False,
) -> None:
    try:
        run_and_echo(plan, overwrite=overwrite)
    except SkipwiseError as err:
        fail(err)
