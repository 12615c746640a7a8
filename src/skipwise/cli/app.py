"""The ``skipwise`` Typer application and its error handling."""

from __future__ import annotations

import sys

import typer

from skipwise import __version__
from skipwise.errors import SkipwiseError

app = typer.Typer(
    name="skipwise",
    help=(
        "Decode every gap of a survey file against its questionnaire's routing: legitimate "
        "skips, item nonresponse, routing faults and break-offs; then report, diagnose, "
        "weight and impute.\n\nCaution: weights and imputation do not repair data missing "
        "not at random, and survey files hold respondents' answers — follow your "
        "organization's methodology standards and data protection rules."
    ),
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    context_settings={"help_option_names": ["-h", "--help"]},
)


def version_callback(value: bool) -> None:
    if value:
        typer.echo(f"skipwise {__version__}")
        raise typer.Exit()


@app.callback()
def _root(
    version: bool = typer.Option(False, "--version", callback=version_callback, is_eager=True,
                                 help="Show the version and exit."),
) -> None:
    """skipwise command line."""


def fail(err: SkipwiseError) -> None:
    """Print a user error without a traceback and exit with status 1."""
    typer.echo(f"error: {err.render()}", err=True)
    raise typer.Exit(code=1)


def run_app(argv: list[str] | None = None) -> None:
    try:
        app(args=argv, standalone_mode=True)
    except SkipwiseError as err:  # raised outside a command body
        typer.echo(f"error: {err.render()}", err=True)
        sys.exit(1)
