"""How a run tells its caller what it is doing, without printing (library code never prints)."""

from __future__ import annotations

import contextlib
from typing import Callable, ContextManager, Iterator, Protocol

__all__ = ["Reporter", "SilentReporter", "classify_progress"]


class Reporter(Protocol):
    """Receives a run's progress; the command line echoes it, tests may record it."""

    def step(self, name: str, text: str) -> None:
        """A step starts."""

    def info(self, text: str) -> None:
        """A line worth showing (a summary figure, a note, a caution)."""

    def progress(self, label: str, length: int) -> ContextManager[Callable[[int], None]]:
        """A progress bar of ``length`` units; the yielded function advances it by n units."""


class SilentReporter:
    """Shows nothing: the default of :func:`skipwise.pipeline.run.run_plan`."""

    def step(self, name: str, text: str) -> None:
        pass

    def info(self, text: str) -> None:
        pass

    @contextlib.contextmanager
    def progress(self, label: str, length: int) -> Iterator[Callable[[int], None]]:
        yield lambda n: None


@contextlib.contextmanager
def classify_progress(reporter: Reporter, n_items: int, n_cells: int,
                      label: str = "classifying") -> Iterator[Callable[[int, int], None] | None]:
    """A ``progress(done, total)`` callback for :func:`skipwise.classify.classify` on large files.

    Small files (under two million cells) get no bar: it would only flicker.
    """
    if n_cells < 2_000_000:
        yield None
        return
    with reporter.progress(label, n_items) as advance:
        state = {"done": 0}

        def step(done: int, total: int) -> None:
            advance(done - state["done"])
            state["done"] = done

        yield step
