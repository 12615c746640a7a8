"""``skipwise demo``: the whole pipeline on the built-in invented scenario.

It generates the scenario into OUT/data, writes OUT/plan.yaml (with its weighting and
imputation plans), runs that plan exactly as ``skipwise run OUT/plan.yaml`` does, and
then compares what skipwise found with the generator's own truth.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from skipwise.cli.app import app, fail
from skipwise.errors import SkipwiseError


@app.command("demo")
def demo_command(
    out: Annotated[Path, typer.Option("--out", "-o", help="Folder for every output.")] = Path("out"),
    seed: Annotated[int, typer.Option("--seed", help="Seed of the invented scenario.")] = 2026,
    addresses: Annotated[int, typer.Option("--addresses", help="Sampled addresses.")] = 5000,
    overwrite: Annotated[bool, typer.Option("--overwrite", help="Replace outputs of an earlier run.")] = False,
) -> None:
    """Generate the invented Marrowby Valley scenario into OUT/data, write OUT/plan.yaml and run it
    (check, classify, join, weigh, report, diagnose, impute, export into OUT/package), then compare the
    results with the generator's truth.

    Everything in the scenario is invented; the outputs still show how real files would be
    handled: weights and imputation do not repair data missing not at random (the scenario's
    income is built to show it).
    """
    from skipwise.cli.cmd_run import run_and_echo
    from skipwise.demo import generate
    from skipwise.demo.plan import write_demo_plans

    try:
        scenario = generate(seed=seed, n_addresses=addresses)
        scenario.write(out / "data", overwrite=overwrite)
        plan = write_demo_plans(scenario, out, overwrite=overwrite)
        typer.echo(f"invented scenario (seed {seed}): {len(scenario.sample):,} addresses, "
                   f"{len(scenario.interviews):,} interviews -> {out / 'data'}")
        typer.echo(f"run plan: {plan} (the same as: skipwise run {plan})")
        typer.echo("(the scenario holds injected out-of-range values on purpose: check reports them and "
                   "classify marks them invalid)\n")
        result = run_and_echo(plan, overwrite=overwrite)
        _compare(result, scenario)
    except SkipwiseError as err:
        fail(err)
    typer.echo(f"\nall demo outputs are under {out}/")


def _compare(result, scenario) -> None:
    """Print the comparisons with the generator's truth."""
    from skipwise.demo.compare import mean_comparison, status_agreement
    from skipwise.demo.impute import imputed_mean_comparison
    from skipwise.io import read_survey

    cl = result.state.cl
    share, diff = status_agreement(cl, scenario.truth_status)
    typer.echo(f"\nstatuses agree with the generator's truth in {100 * share:.2f}% of "
               f"{cl.codes.size:,} cells ({len(diff):,} disagreements)")
    typer.echo("generator's mechanisms: " + ", ".join(
        f"{k}={v}" for k, v in scenario.mechanisms.items() if v in ("MAR", "MNAR")) + " (all other items MCAR)")
    rep = result.state.diagnostics
    if rep is not None:
        summary = rep.summary
        flagged = summary.loc[summary["flagged"].astype(bool), "item"].tolist()
        typer.echo("diagnostics flag evidence against MCAR for: " + (", ".join(
            f"{item} ({scenario.mechanisms.get(item, '?')} in the generator)" for item in flagged) or "no item"))

    weighted = read_survey(result.files["weighted_frame"])
    w = weighted["wt_final"].to_numpy()
    case_id = result.state.q.case_id
    answered = cl.analysis_values().set_axis(result.state.data[case_id].to_numpy()).reindex(
        weighted[case_id].to_numpy())
    table = mean_comparison(answered, w, w > 0, scenario.true_means)
    typer.echo("\nrespondent means against the generator's true population means:")
    typer.echo(table.to_string(index=False, float_format=lambda v: f"{v:,.3f}"))

    imputed = read_survey(result.files["imputed_1"])
    table = imputed_mean_comparison(imputed, scenario, cl, result.state.q)
    typer.echo("\nimputed means against the generator's true means of the interviewed cases:")
    typer.echo(table.to_string(index=False, float_format=lambda v: f"{v:,.3f}"))
