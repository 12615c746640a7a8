"""Small pieces shared by the command modules: loading inputs, progress, warnings."""

from __future__ import annotations

import contextlib
import warnings
from pathlib import Path
from typing import Callable, Iterator

import pandas as pd
import typer

from skipwise.questionnaire import Questionnaire, load_questionnaire

__all__ = ["EchoReporter", "load_inputs", "classify_with_progress", "echo_warnings", "sibling", "out_option"]


def load_inputs(data_path: Path, questionnaire_path: Path) -> tuple[pd.DataFrame, Questionnaire]:
    """Questionnaire first (its problems are the likelier), then the data."""
    from skipwise.io import read_survey

    q = load_questionnaire(questionnaire_path)
    return read_survey(data_path), q


def classify_with_progress(data: pd.DataFrame, q: Questionnaire, *, label: str = "classifying",
                           jobs: int | None = None):
    """Classify, with a progress bar over items when the file is large (``jobs``: threads, default all cores)."""
    from skipwise.classify import classify
    from skipwise.pipeline.reporting import classify_progress

    with classify_progress(EchoReporter(), len(q.items), data.shape[0] * len(q.items), label) as step:
        return classify(data, q, progress=step, jobs=jobs)


class EchoReporter:
    """Shows a run's progress on the terminal: one line per step, bars for long work."""

    def __init__(self) -> None:
        self.number = 0

    def step(self, name: str, text: str) -> None:
        self.number += 1
        typer.echo(f"[{self.number}] {name}: {text}")

    def info(self, text: str) -> None:
        typer.echo(f"    {text}")

    @contextlib.contextmanager
    def progress(self, label: str, length: int) -> Iterator[Callable[[int], None]]:
        with typer.progressbar(length=max(int(length), 1), label=f"    {label}", file=None) as bar:
            yield bar.update


@contextlib.contextmanager
def echo_warnings(shown: dict[str, str] | None = None) -> Iterator[None]:
    """Show format adaptations (e.g. SPSS missing ranges) as notes on stderr, one per file.

    ``shown`` maps texts to print otherwise (a temporary file's name to the output's).
    """
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        yield
    for w in caught:
        if issubclass(w.category, UserWarning):
            text = str(w.message)
            for old, new in (shown or {}).items():
                text = text.replace(old, new)
            typer.echo(f"note: {text}", err=True)


def sibling(path: Path, suffix: str, ext: str) -> Path:
    """``out/data.sav`` -> ``out/data_weights.xlsx`` style companion path."""
    return path.with_name(f"{path.stem}{suffix}{ext}")


def out_option(out: Path | None, old: Path | None, default: Path | None = None) -> Path:
    """The output path from ``-o/--out`` or its older hidden spelling ``--output``.

    Both given (and different), or neither without a default, is a usage error (exit 2).
    """
    if out is not None and old is not None and out != old:
        raise typer.BadParameter("give the output once (--output is the older spelling of --out)",
                                 param_hint="'-o' / '--out'")
    chosen = out if out is not None else old if old is not None else default
    if chosen is None:
        raise typer.BadParameter("missing: name the file to write", param_hint="'-o' / '--out'")
    return chosen

