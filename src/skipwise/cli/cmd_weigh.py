"""`skipwise weigh`: outcome rates and nonresponse-adjusted, calibrated weights from a plan file."""

from __future__ import annotations

import contextlib
from pathlib import Path
from typing import Annotated, Optional

import typer

from skipwise.cli.app import app, fail
from skipwise.cli.engine import PARTITION_HELP, SCHEDULER_HELP, Engine
from skipwise.errors import SkipwiseError

HELP = (
    "Weight a survey file by a weighting plan (YAML): map dispositions to outcome categories and "
    "compute outcome rates; then base weights, unknown-eligibility and nonresponse adjustment, "
    "calibration (post-stratification, raking, linear or bounded logit), trimming and replicate "
    "weights, each step optional. Writes the data with weight columns in OUT's format and as "
    "Parquet beside it, plus a diagnostics workbook (*_weights.xlsx).\n\n"
    "Caution: nonresponse weighting does not repair data missing not at random (MNAR). The output "
    "holds respondents' data — follow your organization's data protection rules and methodology "
    "standards.\n\n"
    "With --engine dask the weighting runs on a Dask cluster: DATA may be a Parquet file, folder or glob, "
    "or one .sav, .zsav, .dta, .sas7bdat or .csv file (converted to Parquet parts in one pass first), "
    "OUT names a folder that receives one Parquet part per input partition (the same columns as the "
    "in-memory output) or a .parquet or .csv file (the in-memory engine's files, joined from the parts), "
    "and every step is a pass of partial sums over the partitions (docs/scale.md)."
)
ENGINE_HELP = ("'memory' (default): read the whole file into memory. 'dask': weigh the partitions on a Dask "
               "cluster; DATA may be a Parquet file, folder or glob, or one .sav, .zsav, .dta, .sas7bdat or .csv file "
               "(converted to Parquet parts first), and OUT names a folder of Parquet parts or a .parquet or .csv "
               "file. 'auto': dask when the data is over the memory budget (or is a folder or glob) and OUT is a "
               ".parquet or .csv file, else in memory: auto never changes the form of the output, so a folder OUT "
               "needs an explicit --engine dask, and a folder or glob DATA with another OUT is refused.")


@app.command("weigh", help=HELP)
def weigh_command(
    data: Annotated[Path, typer.Argument(help="Survey data file (.sav, .zsav, .dta, .csv, .xlsx, .parquet, .sas7bdat, .xpt).")],
    plan: Annotated[Path, typer.Option("--plan", "-p", help="Weighting plan file (YAML); see docs/weighting.md.")],
    out: Annotated[Path, typer.Option("--out", "-o", help="Weighted data file to write; its extension sets the format.")],
    questionnaire: Annotated[Optional[Path], typer.Option(
        "--questionnaire", "-q",
        help="Questionnaire file: needed when the plan splits interviews by the share of items answered; "
             "with it, estimates use answered cells only (never invalid values or off-route answers).")] = None,
    workbook: Annotated[Optional[Path], typer.Option(
        "--workbook", help="Diagnostics workbook path (default: the plan's output.workbook, else OUT_weights.xlsx).")] = None,
    overwrite: Annotated[bool, typer.Option("--overwrite", help="Replace existing output files.")] = False,
    engine: Annotated[Engine, typer.Option("--engine", help=ENGINE_HELP)] = Engine.MEMORY,
    scheduler: Annotated[Optional[str], typer.Option("--scheduler", help=SCHEDULER_HELP)] = None,
    partition_rows: Annotated[int, typer.Option("--partition-rows", min=1, help=PARTITION_HELP)] = 250_000,
) -> None:
    if engine is Engine.AUTO:
        from skipwise.cli.engine import choose_engine

        # the dask engine writes a .parquet or .csv OUT in the form the in-memory engine does; a folder OUT
        # needs an explicit --engine dask and other forms stay in memory: auto never changes the form of the output
        try:
            engine = choose_engine(engine, data, output_allows=out.suffix.lower() in (".parquet", ".csv"),
                                   echo=typer.echo)
        except SkipwiseError as err:
            fail(err)
    if engine is Engine.DASK:
        try:
            _weigh_with_dask(data, plan, out, questionnaire=questionnaire, workbook=workbook, overwrite=overwrite,
                             scheduler=scheduler, partition_rows=partition_rows)
        except SkipwiseError as err:
            fail(err)
        return
    try:
        from skipwise.io import read_survey, write_survey
        from skipwise.io.atomic import check_writable
        from skipwise.weighting.plan import load_plan
        from skipwise.weighting.weigh import CAUTIONS
        from skipwise.weighting.workbook import write_workbook

        from skipwise.io.readers import output_format_of

        output_format_of(out)  # an unsupported (or SAS) output type fails before any work is done
        spec = load_plan(plan)
        parquet = out.with_suffix(".parquet")
        book = workbook or (Path(spec.workbook) if spec.workbook else out.with_name(out.stem + "_weights.xlsx"))
        if book.suffix.lower() != ".xlsx":
            raise SkipwiseError(f"the diagnostics workbook {book} must end in .xlsx")
        targets = [out] + ([parquet] if parquet != out else []) + [book]
        for path in targets:
            check_writable(path, overwrite=overwrite, inputs=[data, plan, *([questionnaire] if questionnaire else [])])
        frame = read_survey(data)
        from skipwise.cli.common import EchoReporter, classify_with_progress
        from skipwise.pipeline.steps import answered_values, weigh_with_progress, weight_meta

        share = values = None
        if questionnaire is not None:
            from skipwise.questionnaire import load_questionnaire

            cl = classify_with_progress(frame, load_questionnaire(questionnaire))
            share = cl.cases["share_answered"]
            values = answered_values(cl, frame, spec)  # estimates from answered cells only
        res = weigh_with_progress(frame, spec, share_answered=share, reporter=EchoReporter(),
                                  estimate_values=values)
        meta = weight_meta(res)
        from skipwise.cli.common import echo_warnings
        from skipwise.io.atomic import publish_files

        # the weighted file(s) and the workbook appear together or not at all
        with publish_files(targets, overwrite=overwrite) as temps:
            with echo_warnings({str(t): str(p) for t, p in zip(temps, targets)}):
                for tmp in temps[:-1]:
                    write_survey(res.data, tmp, meta, overwrite=True)
            write_workbook(res, temps[-1], overwrite=True)
    except SkipwiseError as err:
        fail(err)
        return
    _echo_result(res)
    typer.echo(f"wrote {out}" + (f", {parquet}" if parquet != out else "") + f" and {book}")
    for text in CAUTIONS[:2]:
        typer.echo(f"caution: {text}")


def _echo_result(res) -> None:
    from skipwise.weighting.workbook import summary_rows

    for name, value in summary_rows(res):
        shown = f"{value:,.4f}" if isinstance(value, float) else str(value)
        typer.echo(f"{name:>34}: {shown}")
    for note in res.chain.notes:
        typer.echo(f"note: {note}")
    for c in res.chain.collapses:
        typer.echo(f"collapsed ({c.step}): {c.merged} into {c.into} — {c.reason}")
    if not res.estimates.empty:
        typer.echo("estimates (replicate standard errors):")
        for r in res.estimates.itertuples():
            what = r.variable + (f"={r.category}" if r.category else "")
            typer.echo(f"  {what:<30} {r.estimate:12.4f}  se {r.se:.4f}  n {r.n}")


def _weigh_with_dask(data: Path, plan: Path, out: Path, *, questionnaire: Optional[Path], workbook: Optional[Path],
                     overwrite: bool, scheduler: Optional[str], partition_rows: int) -> None:
    """``skipwise weigh --engine dask``: partitions in; weighted Parquet parts (or one .parquet or .csv
    file joined from them) and the workbook out.

    DATA is Parquet (a file, folder or glob), or one SPSS, Stata, SAS or CSV file converted to
    Parquet parts first in one pass (:func:`skipwise.cli.engine.dask_parts`, as classify does).
    With ``-q`` every partition is classified on its worker (interview split, answered cells).
    """
    from skipwise.errors import Category, Problem, ProblemCode
    from skipwise.io.atomic import check_writable
    from skipwise.cli.engine import dask_parts
    from skipwise.scale import dask_client
    from skipwise.scale.weigh_replicates import (SINGLE_FILE_FORMS, refuse_unsupported, single_file_targets,
                                                 weigh_on_cluster)
    from skipwise.weighting.plan import load_plan
    from skipwise.weighting.weigh import CAUTIONS
    from skipwise.weighting.workbook import write_workbook

    def usage(message: str, hint: str) -> SkipwiseError:
        return SkipwiseError(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE, file=str(out),
                                     message=message, hint=hint))

    single = out.suffix.lower() in SINGLE_FILE_FORMS
    if out.suffix and not single:
        raise usage("the dask engine writes Parquet or CSV only: OUT names a folder (one Parquet part per "
                    "partition), a .parquet or a .csv file",
                    f"name a folder (e.g. -o weighted), a .parquet or a .csv OUT, or use --engine memory for a "
                    f"{out.suffix} file")
    spec = load_plan(plan)
    q = None
    if questionnaire is not None:
        from skipwise.questionnaire import load_questionnaire

        q = load_questionnaire(questionnaire)
    refuse_unsupported(spec, q)
    # the workbook's default name as in memory: OUT's stem (a folder OUT: its name) and _weights.xlsx
    book = workbook or (Path(spec.workbook) if spec.workbook else out.with_name(out.stem + "_weights.xlsx"))
    if book.suffix.lower() != ".xlsx":
        raise SkipwiseError(f"the diagnostics workbook {book} must end in .xlsx")
    inputs = [data, plan, *([questionnaire] if questionnaire else [])]
    for target in [*(single_file_targets(out) if single else []), book]:
        check_writable(target, overwrite=overwrite, inputs=inputs)
    with dask_parts(data, out, partition_rows) as (parts, meta, dtypes):
        with dask_client(scheduler) as client:
            bar: dict = {}
            with contextlib.ExitStack() as stack:
                def on_design(count: int) -> None:
                    bar["bar"] = stack.enter_context(typer.progressbar(length=count, label="    replicates"))

                res = weigh_on_cluster(data, spec, out, client=client, parts=parts, overwrite=overwrite, meta=meta,
                                       dtypes=dtypes, note=lambda text: typer.echo(f"note: {text}"),
                                       on_design=on_design, progress=lambda _done: bar["bar"].update(1),
                                       questionnaire=q,
                                       beside=[(book, lambda r, tmp: write_workbook(r, tmp, overwrite=True))])
    typer.echo(f"weighted {res.totals['cases']:,} cases in {len(parts):,} partitions")
    _echo_result(res)
    shown = ", ".join(map(str, single_file_targets(out))) if single else f"{out}/ ({len(parts):,} parts)"
    typer.echo(f"wrote {shown} and {book}")
    for text in CAUTIONS[:2]:
        typer.echo(f"caution: {text}")
