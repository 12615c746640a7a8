"""`skipwise check`: the questionnaire file against a data file, as a table of findings."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Optional, Sequence

import typer

from skipwise.checkdata import check_data
from skipwise.cli.app import app, fail
from skipwise.cli.engine import ENGINE_HELP, PARTITION_HELP, SCHEDULER_HELP, Engine
from skipwise.errors import SkipwiseError

COLUMNS = ("kind", "item", "finding", "detail")


def format_table(rows: Sequence[tuple], header: Sequence[str] = COLUMNS) -> list[str]:
    """Aligned plain-text lines; the last column is left unpadded."""
    cells = [tuple(str(v) if v not in (None, "") else "-" for v in r) for r in rows]
    widths = [max([len(h)] + [len(r[i]) for r in cells]) for i, h in enumerate(header[:-1])]

    def line(values: Sequence[str]) -> str:
        return "  ".join([v.ljust(w) for v, w in zip(values, widths)] + [values[-1]]).rstrip()

    return [line(header), line(["-" * w for w in widths] + ["-" * len(header[-1])])] + [line(c) for c in cells]


@app.command("check")
def check_command(
    data: Annotated[Path, typer.Argument(help="Survey data file: .sav, .zsav, .dta, .csv, .xlsx, .parquet, .sas7bdat or .xpt.")],
    questionnaire: Annotated[Path, typer.Option("--questionnaire", "-q",
                                                help="Questionnaire file (YAML, format 1) to check.")],
    top: Annotated[int, typer.Option("--top", min=1,
                                     help="How many values or case ids a finding lists.")] = 5,
    engine: Annotated[Engine, typer.Option("--engine", help=ENGINE_HELP)] = Engine.MEMORY,
    scheduler: Annotated[Optional[str], typer.Option("--scheduler", help=SCHEDULER_HELP)] = None,
    partition_rows: Annotated[int, typer.Option("--partition-rows", min=1, help=PARTITION_HELP)] = 250_000,
) -> None:
    """Check a questionnaire file against a data file before classifying.

    Lists questionnaire columns missing from the data, data columns the
    questionnaire does not name, values that are neither declared nor in range
    (most frequent first), declared codes that never occur, and duplicate or blank
    case ids.  Errors stop classification from being right; notes are worth a
    look.  Exit status 1 when there is an error finding, 0 otherwise.

    The table shows a few stored values and case ids: the data holds
    respondents' answers, so treat the output under your organization's data
    protection rules.

    With --engine dask (files larger than memory, clusters; docs/scale.md) partitions are counted
    on the cluster and duplicate case ids found across them; the findings equal the in-memory
    engine's.
    """
    if engine is Engine.AUTO:
        from skipwise.cli.engine import choose_engine

        try:
            engine = choose_engine(engine, data, output_allows=True, echo=typer.echo)
        except SkipwiseError as err:
            fail(err)
    try:
        q = load(questionnaire)
        if engine is Engine.DASK:
            from skipwise.cli.engine import check_with_dask

            result = check_with_dask(data, q, scheduler=scheduler, partition_rows=partition_rows, top=top)
        else:
            from skipwise.io import read_survey

            frame = read_survey(data)
            result = check_data(frame, q, top=top)
    except SkipwiseError as err:
        fail(err)
    rows = result.to_rows(list(COLUMNS))
    if rows:
        for text in format_table(rows):
            typer.echo(text)
        typer.echo("")
    n_err, n_note = len(result.errors), len(result.notes)
    typer.echo(f"{n_err} error(s), {n_note} note(s): {data} ({result.n_cases:,} cases, "
               f"{result.n_columns:,} columns) against {questionnaire} ({len(q.items):,} items).")
    if not result.ok:
        typer.echo("Fix the errors (in the questionnaire or the data) before classifying.")
        raise typer.Exit(code=1)
    if not rows:
        typer.echo("The questionnaire and the data agree.")


def load(path: Path):
    from skipwise.questionnaire import load_questionnaire

    return load_questionnaire(path)
