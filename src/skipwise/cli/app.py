"""The ``skipwise`` Typer application and its error handling."""

from __future__ import annotations

import contextlib
import gc
import sys
from pathlib import Path

import typer
from typer.core import TyperGroup

from skipwise import __version__
from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError


class _Guarded(TyperGroup):
    """The top of the command line: every OS error, memory error and interruption of any command
    ends as one readable paragraph (exit 1, or 130/143 for SIGINT/SIGTERM), never a traceback."""

    def invoke(self, ctx):
        from skipwise.publish import Interrupted, handle_signals, os_error_problem

        args = [*getattr(ctx, "_protected_args", []), *ctx.args]
        with handle_signals(), _quiet_after_failure(), _notes():
            try:
                return super().invoke(ctx)
            except SkipwiseError as err:  # raised outside a command's own handler
                fail(err)
            except OSError as exc:
                fail(SkipwiseError(os_error_problem(exc)))
            except MemoryError:
                fail(SkipwiseError(out_of_memory(args)))
            except Interrupted as exc:
                interrupted(exc.exit_code, exc.committed)
            except KeyboardInterrupt:
                interrupted(130, False)


@contextlib.contextmanager
def _quiet_after_failure():
    """After a failed command, objects of the interrupted work (e.g. a half-saved workbook's
    generators) complain when collected: those complaints are not the user's business."""
    try:
        yield
    except BaseException:
        sys.unraisablehook = lambda _unraisable: None
        gc.collect()
        raise


@contextlib.contextmanager
def _notes():
    """skipwise's own warnings (an input's oddity, a format adaptation) are shown as notes."""
    import warnings

    shown = warnings.showwarning

    def show(message, category, filename, lineno, file=None, line=None):
        if issubclass(category, UserWarning) and category.__module__.startswith("skipwise"):
            typer.echo(f"note: {message}", err=True)
        else:
            shown(message, category, filename, lineno, file, line)

    warnings.showwarning = show
    try:
        yield
    finally:
        warnings.showwarning = shown


def out_of_memory(args: list[str]) -> Problem:
    """The out-of-memory message, naming the command's first existing input file."""
    command = args[0] if args else "skipwise"
    named = next((a for a in args[1:] if not a.startswith("-") and _is_file(a)), None)
    return Problem(code=ProblemCode.OUT_OF_MEMORY, category=Category.USAGE, file=named,
                   message=f"out of memory while running 'skipwise {command}': the data, or the work on "
                           f"them, do not fit in this machine's memory",
                   hint="run it on a machine with more memory, or split the file by cases")


def _is_file(text: str) -> bool:
    try:
        return Path(text).is_file()
    except (OSError, ValueError):
        return False


def interrupted(code: int, committed: bool) -> None:
    """One line for SIGINT (exit 130) or SIGTERM (exit 143)."""
    typer.echo("interrupted: the output had already been published completely" if committed
               else "interrupted: nothing was changed", err=True)
    raise typer.Exit(code=code)

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
    cls=_Guarded,
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
