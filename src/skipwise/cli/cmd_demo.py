"""``skipwise demo``: the whole pipeline on the built-in invented scenario.

Each step runs the real subcommand in-process, so the demo shows exactly what a user gets, and
then compares what skipwise found with the generator's own truth.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from skipwise.cli.app import app, fail
from skipwise.errors import SkipwiseError


def _run(args: list[str]) -> int:
    """Run one subcommand in-process and return its exit status."""
    typer.echo(f"\n$ skipwise {' '.join(args)}")
    try:
        status = app(args=args, standalone_mode=False)
    except typer.Exit as stop:
        status = stop.exit_code
    except SystemExit as stop:  # click's own usage errors
        status = int(stop.code or 0)
    return int(status or 0)


def _step(args: list[str]) -> None:
    """Run one subcommand; a failing step stops the demo with its exit status."""
    status = _run(args)
    if status:
        raise typer.Exit(code=status)


@app.command("demo")
def demo_command(
    out: Annotated[Path, typer.Option("--out", "-o", help="Folder for every output.")] = Path("out"),
    seed: Annotated[int, typer.Option("--seed", help="Seed of the invented scenario.")] = 2026,
    addresses: Annotated[int, typer.Option("--addresses", help="Sampled addresses.")] = 5000,
    overwrite: Annotated[bool, typer.Option("--overwrite", help="Replace outputs of an earlier run.")] = False,
) -> None:
    """Generate the invented Marrowby Valley scenario and run check, classify, report, diagnose,
    weigh and impute on it, comparing the results with the generator's truth.

    Everything in the scenario is invented; the outputs still show how real files would be
    handled: weights and imputation do not repair data missing not at random (the scenario's
    income is built to show it).
    """
    from skipwise.demo import generate, questionnaire_path
    from skipwise.demo.compare import mean_comparison, status_agreement, weighting_input, weighting_plan_text
    from skipwise.io import read_survey
    from skipwise.io.atomic import atomic_output
    from skipwise.questionnaire import load_questionnaire

    ow = ["--overwrite"] if overwrite else []
    q_path = str(questionnaire_path())
    try:
        scenario = generate(seed=seed, n_addresses=addresses)
        paths = scenario.write(out / "data", overwrite=overwrite)
        data = str(paths["interviews_sav"])
        typer.echo(f"invented scenario (seed {seed}): {len(scenario.sample):,} addresses, "
                   f"{len(scenario.interviews):,} interviews -> {out / 'data'}")

        if _run(["check", data, "-q", q_path]):
            typer.echo("(expected: the scenario holds injected out-of-range values, which classify "
                       "marks as invalid routing faults)")
    except SkipwiseError as err:
        fail(err)
    try:
        classified = out / "classified"
        _step(["classify", data, "-q", q_path, "-o", str(classified / "marrowby-2026_status.sav"), *ow])
        _step(["classify", str(paths["interviews_dta"]), "-q", q_path, "-o",
              str(classified / "marrowby-2026_coded.dta"), "--form", "recoded", *ow])
        from skipwise.classify import classify

        cl = classify(read_survey(data), load_questionnaire(q_path))
        share, diff = status_agreement(cl, scenario.truth_status)
        typer.echo(f"\nstatuses agree with the generator's truth in {100 * share:.2f}% of "
                   f"{cl.codes.size:,} cells ({len(diff):,} disagreements)")

        _step(["report", data, "-q", q_path, "-o", str(out / "report" / "item_report.xlsx"),
              "--by", "district", *ow])
        _step(["diagnose", data, "-q", q_path, "-o", str(out / "diagnostics" / "diagnostics.xlsx"), *ow])
        typer.echo("generator's mechanisms: " + ", ".join(
            f"{k}={v}" for k, v in scenario.mechanisms.items() if v in ("MAR", "MNAR")) + " (all other items MCAR)")

        weights_dir = out / "weights"
        frame = weighting_input(scenario.sample, scenario.interviews)
        w_input = weights_dir / "weighting_input.parquet"
        plan = weights_dir / "weighting_plan.yaml"
        weights_dir.mkdir(parents=True, exist_ok=True)
        with atomic_output(w_input, overwrite=True) as tmp:
            frame.to_parquet(tmp, index=False)
        with atomic_output(plan, overwrite=True) as tmp:
            tmp.write_text(weighting_plan_text(scenario.population_totals), encoding="utf-8")
        weighted = weights_dir / "marrowby-2026_weighted.parquet"
        _step(["weigh", str(w_input), "--plan", str(plan), "-o", str(weighted), *ow])
        result = read_survey(weighted)
        respondent = result["wt_final"].to_numpy() > 0
        table = mean_comparison(result, result["wt_final"].to_numpy(), respondent, scenario.true_means)
        typer.echo("\nrespondent means against the generator's true population means:")
        typer.echo(table.to_string(index=False, float_format=lambda v: f"{v:,.3f}"))

        _demo_impute(out, data, q_path, scenario, ow)
    except typer.Exit as stop:
        raise typer.Exit(code=stop.exit_code) from None
    except SkipwiseError as err:
        fail(err)
    typer.echo(f"\nall demo outputs are under {out}/")


def _demo_impute(out: Path, data: str, q_path: str, scenario, ow: list[str]) -> None:
    from skipwise.demo.impute import imputation_plan_text, imputed_mean_comparison
    from skipwise.io import read_survey
    from skipwise.io.atomic import atomic_output

    folder = out / "imputed"
    folder.mkdir(parents=True, exist_ok=True)
    plan = folder / "imputation_plan.yaml"
    with atomic_output(plan, overwrite=True) as tmp:
        tmp.write_text(imputation_plan_text(), encoding="utf-8")
    target = folder / "marrowby-2026_imputed.parquet"
    _step(["impute", data, "-q", q_path, "--plan", str(plan), "-o", str(target), *ow])
    table = imputed_mean_comparison(read_survey(target), scenario)
    typer.echo("\nimputed means against the generator's true means of the interviewed cases:")
    typer.echo(table.to_string(index=False, float_format=lambda v: f"{v:,.3f}"))
