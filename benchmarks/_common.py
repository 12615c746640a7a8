"""Shared helpers of the benchmark scripts: sizes scaled by SKIPWISE_BENCH_SCALE, timing, result lines.

Every script prints its figure, the floor measured in the same run, their ratio and the target,
and ends with one ``RESULT`` line that ``make bench`` collects.  Set SKIPWISE_BENCH_SCALE to scale
the number of cases (0.2 gives 200,000 instead of 1,000,000; 2 doubles them on a bigger machine)
and SKIPWISE_BENCH_REPEAT for the best-of count of the quick measurements (default 3).
"""

from __future__ import annotations

import os
import resource
import time
from typing import Callable

SCALE = float(os.environ.get("SKIPWISE_BENCH_SCALE", "1"))
REPEAT = max(1, int(os.environ.get("SKIPWISE_BENCH_REPEAT", "3")))


def scaled(n: int) -> int:
    """``n`` cases at scale 1, scaled (at least 1,000)."""
    return max(1_000, int(round(n * SCALE)))


def best_of(fn: Callable[[], object], repeat: int = REPEAT) -> tuple[float, object]:
    """Best wall-clock seconds of ``repeat`` calls and the last call's result."""
    best, out = float("inf"), None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


def cpu_of(fn: Callable[[], object]) -> tuple[float, float, object]:
    """Wall and CPU seconds (this process, all its threads) of one call, and its result.

    On a shared machine the CPU seconds show the work done when other processes hold the cores.
    """
    w0, c0 = time.perf_counter(), time.process_time()
    out = fn()
    return time.perf_counter() - w0, time.process_time() - c0, out


def children_peak_mb() -> float:
    """Largest resident set of any finished child process so far, in MB (Linux reports KB)."""
    return resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024


def result(workload: str, now: str, floor: str, ratio: float | None, target: str, met: bool) -> None:
    """The one summary line of a script: workload | now | floor | ratio | target | verdict."""
    r = "-" if ratio is None else f"{ratio:.2f}x"
    print(f"RESULT | {workload} | {now} | {floor} | {r} | {target} | {'met' if met else 'MISSED'}", flush=True)
