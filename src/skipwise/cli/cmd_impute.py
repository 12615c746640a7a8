"""`skipwise impute`: skip-consistent imputation of in-universe item nonresponse from a plan file."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from skipwise.cli.app import app, fail
from skipwise.errors import SkipwiseError

HELP = (
    "Fill in-universe item nonresponse (nonresponse codes and unexplained blanks, or the statuses "
    "the plan names) so that every completed file still obeys the questionnaire's routing: gates "
    "are filled first, then each later item's universe is re-derived, so items that come into "
    "universe are filled and items routed out stay skips. Skipped cells are never filled; routing "
    "faults (off_route, wrong_code, invalid) are left as they are and counted. Methods, classes, "
    "covariates, the number of imputations M, the seed and the output form come from the plan "
    "file (YAML; see docs/imputation.md). Writes M files (OUT_1, OUT_2, ...) or one stacked file "
    "with an imputation-number column, keeping labels and missing-value definitions, with one "
    "flag column <item>_imp per item (0 not imputed, 1 imputed, 2 routed out by an imputed gate, 3 a routing fault left as it is). "
    "The same seed gives the same files.\n\n"
    "Caution: imputation does not repair data missing not at random (MNAR). Analyse the M files "
    "with Rubin's rules. The files hold respondents' answers — follow your organization's data "
    "protection rules and methodology standards."
)


def output_paths(out: Path, m: int, form: str) -> list[Path]:
    """Where the completed data go: OUT itself (stacked, or M = 1), else OUT_1 ... OUT_M."""
    from skipwise.pipeline.steps import imputation_paths

    return imputation_paths(out, m, form)


@app.command("impute", help=HELP)
def impute_command(
    data: Annotated[Path, typer.Argument(help="Survey data file (.sav, .zsav, .dta, .csv, .xlsx, .parquet, .sas7bdat, .xpt).")],
    questionnaire: Annotated[Path, typer.Option("--questionnaire", "-q", help="Questionnaire file (YAML).")],
    plan: Annotated[Path, typer.Option("--plan", "-p", help="Imputation plan file (YAML); see docs/imputation.md.")],
    out: Annotated[Path, typer.Option("--out", "-o", help="Completed data file; its extension sets the format.")],
    overwrite: Annotated[bool, typer.Option("--overwrite", help="Replace existing output files.")] = False,
) -> None:
    try:
        from skipwise.impute.plan import check_plan, load_plan
        from skipwise.impute.skipaware import impute_skipaware
        from skipwise.io import read_survey, write_survey
        from skipwise.io.atomic import check_writable
        from skipwise.pipeline.steps import imputation_meta, imputed_frames
        from skipwise.questionnaire import load_questionnaire

        from skipwise.io.readers import output_format_of

        output_format_of(out)  # an unsupported (or SAS) output type fails before any work is done
        q = load_questionnaire(questionnaire)
        spec = load_plan(plan)
        paths = output_paths(out, spec.spec.m, spec.output.form)
        for path in paths:
            check_writable(path, overwrite=overwrite)
            if path.resolve() == data.resolve():
                raise SkipwiseError("the output file would replace the input file; choose another name")
        frame = read_survey(data)
        check_plan(spec, q, frame.columns)
        with typer.progressbar(length=spec.spec.m, label="imputations") as bar:
            res = impute_skipaware(frame, q, spec.spec, progress=bar.update)
        meta = imputation_meta(frame, res, spec.output)
        from skipwise.cli.common import echo_warnings
        from skipwise.io.atomic import publish_files

        # the M completed files appear together or not at all (never a mix of two runs' imputations)
        with publish_files(paths, overwrite=overwrite) as temps:
            with echo_warnings({str(t): str(p) for t, p in zip(temps, paths)}):
                for done, tmp in zip(imputed_frames(res, spec.output), temps):
                    write_survey(done, tmp, meta, overwrite=True)
    except SkipwiseError as err:
        fail(err)
        return
    typer.echo(f"{res.m} imputation(s), seed {res.seed}; statuses filled: {', '.join(res.statuses)}")
    typer.echo(res.table.to_string())
    for note in res.notes:
        typer.echo(f"note: {note}")
    typer.echo("wrote " + ", ".join(str(p) for p in paths))
    for text in res.cautions:
        typer.echo(f"caution: {text}")

