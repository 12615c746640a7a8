"""``skipwise report``: the item-level nonresponse workbook (.xlsx)."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Optional

import typer

from skipwise.cli.app import app, fail
from skipwise.cli.engine import ENGINE_HELP, PARTITION_HELP, SCHEDULER_HELP, Engine
from skipwise.errors import SkipwiseError
from skipwise.rates import DEFAULT_MIN_BASE, item_rates, worst_lines

HELP = (
    "Write an Excel workbook on item nonresponse: an overview with the rate definitions, one row per "
    "item (every status count, the item nonresponse rate and each nonresponse reason's rate), the "
    "routing faults, the most frequent joint nonresponse patterns as a shaded grid, rates by subgroup "
    "(--by), case completeness and charts.\n\n"
    "D = cells in universe, excluding breakoff and left_blank. Item nonresponse rate = (nonresponse "
    "reasons + item_missing) / D; answered and fault rates share the same D, and the three add up to "
    "100%; gate_unknown, breakoff, off_route and left_blank are shown apart. Items and subgroup cells "
    "with D under --min-base are marked and never ranked.\n\n"
    "Caution: nonresponse adjustments do not repair data missing not at random (MNAR). The Routing "
    "faults sheet lists case ids (leave them out with --no-case-ids): share the workbook only under "
    "your organization's data protection rules.\n\n"
    "With --engine dask (files larger than memory, clusters; docs/scale.md) every figure comes from "
    "counts of partitions merged on the client, and the workbook equals the in-memory engine's."
)


@app.command("report", help=HELP)
def report_command(
    data: Annotated[Path, typer.Argument(help="Survey file (.sav .zsav .dta .csv .xlsx .parquet .sas7bdat .xpt).")],
    questionnaire: Annotated[Path, typer.Option("-q", "--questionnaire", help="Questionnaire file (YAML).")],
    out: Annotated[Path, typer.Option("-o", "--out", help="Workbook to write (.xlsx).")],
    weight: Annotated[Optional[str], typer.Option(
        "--weight", help="Column of case weights: weighted rates are shown beside the unweighted ones.")] = None,
    by: Annotated[Optional[list[str]], typer.Option(
        "--by", help="Column whose groups the Subgroups sheet compares (repeat for several).")] = None,
    no_case_ids: Annotated[bool, typer.Option(
        "--no-case-ids", help="Leave every case id out of the workbook (the fault list keeps its other columns).")] = False,
    top_items: Annotated[int, typer.Option(
        "--top-items", min=1, help="Items in the pattern grid: those with the highest nonresponse rates.")] = 12,
    top_patterns: Annotated[int, typer.Option(
        "--top-patterns", min=1, help="Most frequent nonresponse patterns shown.")] = 20,
    fault_rows: Annotated[int, typer.Option(
        "--fault-rows", min=0, help="Most routing faults listed one per row (capped at a worksheet's "
                                    "row limit); the per-item fault counts always cover all.")] = 100_000,
    min_base: Annotated[int, typer.Option(
        "--min-base", min=0, help="Minimum cells in universe (D, unweighted) for a rate to be ranked; items "
                                  "and subgroup cells under it are shown but marked (default 30: common "
                                  "practice).")] = DEFAULT_MIN_BASE,
    overwrite: Annotated[bool, typer.Option("--overwrite", help="Replace an existing workbook.")] = False,
    engine: Annotated[Engine, typer.Option("--engine", help=ENGINE_HELP)] = Engine.MEMORY,
    scheduler: Annotated[Optional[str], typer.Option("--scheduler", help=SCHEDULER_HELP)] = None,
    partition_rows: Annotated[int, typer.Option("--partition-rows", min=1, help=PARTITION_HELP)] = 250_000,
) -> None:
    from skipwise.cli.common import classify_with_progress, load_inputs
    from skipwise.io.atomic import check_writable
    from skipwise.report import write_item_report

    if engine is Engine.AUTO:
        from skipwise.cli.engine import choose_engine

        try:
            engine = choose_engine(engine, data, output_allows=True, echo=typer.echo)
        except SkipwiseError as err:
            fail(err)
    if engine is Engine.DASK:
        from skipwise.cli.engine import report_with_dask

        try:
            if out.suffix.lower() != ".xlsx":
                raise SkipwiseError(f"output {out} must end in .xlsx")
            report_with_dask(data, questionnaire, out, scheduler=scheduler, partition_rows=partition_rows,
                             overwrite=overwrite, weight=weight, by=tuple(by or ()), case_ids=not no_case_ids,
                             top_items=top_items, top_patterns=top_patterns, fault_rows=fault_rows, min_base=min_base)
        except SkipwiseError as err:
            fail(err)
        return
    try:
        if out.suffix.lower() != ".xlsx":
            raise SkipwiseError(f"output {out} must end in .xlsx")
        check_writable(out, overwrite=overwrite, inputs=(data, questionnaire))
        frame, q = load_inputs(data, questionnaire)
        cl = classify_with_progress(frame, q)
        path = write_item_report(
            frame, q, out, classification=cl, weight=weight, by=tuple(by or ()), case_ids=not no_case_ids,
            top_items=top_items, top_patterns=top_patterns, fault_rows=fault_rows, min_base=min_base, input_path=data,
            overwrite=overwrite,
        )
    except SkipwiseError as err:
        fail(err)
        return
    typer.echo(f"{len(frame):,} cases x {len(q.items)} items")
    w = None if weight is None else frame[weight].to_numpy(dtype=float, na_value=float("nan"))
    rates = item_rates(cl, w, min_base=min_base)
    typer.echo("highest item nonresponse rates" + (" (weighted)" if w is not None else "") + ":")
    for line in worst_lines(rates, weighted=w is not None):
        typer.echo(line)
    typer.echo(f"wrote {path}" + ("" if no_case_ids else " (its Routing faults sheet lists case ids)"))
