"""``skipwise classify``: one status per cell, written beside the data, plus the routing faults."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Optional

import typer

from skipwise.classify.export import ExportForm
from skipwise.cli.app import app, fail
from skipwise.cli.common import classify_with_progress, echo_warnings, load_inputs
from skipwise.cli.engine import ENGINE_HELP, PARTITION_HELP, PARTS_HELP, SCHEDULER_HELP, Engine, PartFormat
from skipwise.errors import SkipwiseError

OUT_FORMATS = (".sav", ".zsav", ".dta", ".parquet", ".csv", ".xlsx")


@app.command("classify")
def classify_command(
    data: Annotated[Path, typer.Argument(help="Survey file (.sav .zsav .dta .csv .xlsx .parquet .sas7bdat .xpt).")],
    questionnaire: Annotated[Path, typer.Option("-q", "--questionnaire", help="Questionnaire file (YAML).")],
    out: Annotated[Path, typer.Option("-o", "--out", help="Output file: .sav, .zsav, .dta, .parquet, .csv or .xlsx "
                                                          "(SAS files are read, not written).")],
    form: Annotated[ExportForm, typer.Option(
        "--form", case_sensitive=False,
        help="'columns': add one labelled status column per item; 'recoded': replace every "
             "non-answer cell by a special code per status (user-missing in .sav, extended "
             "missing in .dta).")] = ExportForm.COLUMNS,
    overwrite: Annotated[bool, typer.Option("--overwrite", help="Replace existing output files.")] = False,
    engine: Annotated[Engine, typer.Option("--engine", help=ENGINE_HELP)] = Engine.MEMORY,
    scheduler: Annotated[Optional[str], typer.Option("--scheduler", help=SCHEDULER_HELP)] = None,
    partition_rows: Annotated[int, typer.Option("--partition-rows", min=1, help=PARTITION_HELP)] = 250_000,
    parts: Annotated[PartFormat, typer.Option("--parts", case_sensitive=False, help=PARTS_HELP)] = PartFormat.PARQUET,
    jobs: Annotated[int | None, typer.Option(
        "--jobs", min=1, help="Threads classifying blocks of rows at once (default: every core of the "
                              "machine). The result is the same for every number.")] = None,
) -> None:
    """Classify every cell as answered, skipped, a nonresponse reason, item_missing, gate_unknown,
    breakoff, off_route, wrong_code, invalid or left_blank (an optional item left blank).

    Writes OUT with every original column and label kept, and OUT.faults.csv (e.g. x.sav.faults.csv)
    listing each routing fault with its case id — that listing holds respondents' data: share it
    only under your organization's data protection rules.

    With --engine dask (files larger than memory, clusters; docs/scale.md) OUT is a folder of parts
    (plus OUT_faults/), or one .parquet or .csv file written part by part; .sav and .dta are refused.
    """
    from skipwise.classify.export import (
        faults_path, recoded_copy, with_status_columns, write_fault_listing,
    )
    from skipwise.io import get_meta, write_survey
    from skipwise.publish import check_writable, publish_files
    from skipwise.io.readers import SUPPORTED_EXTENSIONS, output_format_of
    from skipwise.io.stable import stamp_file, timestamp_of

    if engine is Engine.AUTO:
        from skipwise.cli.engine import choose_engine

        # a folder OUT needs an explicit --engine dask; auto never changes the form of the output
        allows = ExportForm(form) is ExportForm.COLUMNS and out.suffix.lower() in (".parquet", ".csv")
        try:
            engine = choose_engine(engine, data, output_allows=allows, echo=typer.echo)
        except SkipwiseError as err:
            fail(err)
    if engine is Engine.DASK:
        from skipwise.cli.engine import classify_with_dask

        try:
            classify_with_dask(data, questionnaire, out, form=form, scheduler=scheduler,
                               partition_rows=partition_rows, overwrite=overwrite, parts_form=parts.value)
        except SkipwiseError as err:
            fail(err)
        return
    try:
        if out.suffix.lower() not in OUT_FORMATS:
            if out.suffix.lower() in SUPPORTED_EXTENSIONS:
                output_format_of(out)  # SAS is refused with its reason
            raise SkipwiseError(f"output {out} must end in one of {', '.join(OUT_FORMATS)}")
        chosen = ExportForm(form)
        fault_file = faults_path(out)
        inputs = (data, questionnaire)
        check_writable(out, overwrite=overwrite, inputs=inputs)
        check_writable(fault_file, overwrite=overwrite, inputs=inputs)
        frame, q = load_inputs(data, questionnaire)
        cl = classify_with_progress(frame, q, jobs=jobs)
        from skipwise.classify.delivery import delivery_meta

        meta = delivery_meta(get_meta(frame), q, frame)  # levels; the questionnaire's labels for a CSV
        fmt = out.suffix.lower().lstrip(".")
        if chosen is ExportForm.COLUMNS:
            # SPSS and Stata files take the numbers as floats: float32 ones are written as they are
            # (the same file as from int16, without a second copy); other formats keep int16.
            import numpy as np

            status_dtype = np.float32 if fmt in ("sav", "zsav", "dta") else np.int16
            result, meta = with_status_columns(frame, cl, meta, dtype=status_dtype)
        else:
            result, meta = recoded_copy(frame, cl, fmt, meta)
        # Both files appear together or not at all.
        with publish_files([out, fault_file], overwrite=overwrite) as (tmp_out, tmp_faults):
            with echo_warnings({str(tmp_out): str(out)}):
                write_survey(result, tmp_out, meta, overwrite=True)
            del result  # the status columns or recoded copy: not held while the faults are listed
            stamp_file(tmp_out, timestamp_of(data))  # the write time inside the file: the data's own
            faults = write_fault_listing(cl, tmp_faults)  # part by part: never the whole listing at once
    except SkipwiseError as err:
        fail(err)
    shares = cl.counts().sum(axis=0)
    total = max(int(shares.sum()), 1)
    typer.echo(f"classified {len(frame):,} cases x {len(q.items)} items")
    for status, count in shares.items():
        if count:
            typer.echo(f"  {status:<14} {int(count):>10,}  {100 * count / total:6.2f}%")
    _echo_invalid_hint(cl, data, questionnaire)
    typer.echo(f"wrote {out}")
    typer.echo(f"wrote {fault_file} ({faults:,} routing faults; it lists case ids)")


def _echo_invalid_hint(cl, data: Path, questionnaire: Path) -> None:
    from skipwise.classify.hints import invalid_hint

    hint = invalid_hint(cl, data=str(data), questionnaire=str(questionnaire))
    if hint:
        typer.echo(hint)
