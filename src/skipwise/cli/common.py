"""Small pieces shared by the command modules: loading inputs, progress, warnings."""

from __future__ import annotations

import contextlib
import warnings
from pathlib import Path
from typing import Callable, Iterator

import pandas as pd
import typer

from skipwise.questionnaire import Questionnaire, load_questionnaire

__all__ = ["load_inputs", "classify_with_progress", "echo_warnings", "sibling"]


def load_inputs(data_path: Path, questionnaire_path: Path) -> tuple[pd.DataFrame, Questionnaire]:
    """Questionnaire first (its problems are the likelier), then the data."""
    from skipwise.io import read_survey

    q = load_questionnaire(questionnaire_path)
    return read_survey(data_path), q


def classify_with_progress(data: pd.DataFrame, q: Questionnaire, *, label: str = "classifying"):
    """Classify, with a progress bar over items when the file is large."""
    from skipwise.classify import classify

    if data.shape[0] * len(q.items) < 2_000_000:
        return classify(data, q)
    with typer.progressbar(length=len(q.items), label=label, file=None) as bar:
        state = {"done": 0}

        def step(done: int, total: int) -> None:
            bar.update(done - state["done"])
            state["done"] = done

        return classify(data, q, progress=step)


@contextlib.contextmanager
def echo_warnings() -> Iterator[None]:
    """Show format adaptations (e.g. SPSS missing ranges) as notes on stderr."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        yield
    for w in caught:
        if issubclass(w.category, UserWarning):
            typer.echo(f"note: {w.message}", err=True)


def sibling(path: Path, suffix: str, ext: str) -> Path:
    """``out/data.sav`` -> ``out/data_faults.csv`` style companion path."""
    return path.with_name(f"{path.stem}{suffix}{ext}")


ProgressFn = Callable[[int, int], None]
