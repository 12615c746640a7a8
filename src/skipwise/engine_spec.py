"""The one definition of an engine choice: in-memory, dask, or auto (docs/scale.md).

Both the command line (``--engine``, ``--scheduler``, ``--partition-rows``) and
the run plan (``engine: {kind: dask, scheduler: ..., partition_rows: ...}``)
end in an :class:`EngineSpec`; :func:`parse_engine` reads the plan's mapping,
collecting every problem with its line, and :func:`engine_problems` says which
of the steps a plan asks for cannot run on the chosen engine.  Every command
and step that runs on a cluster takes its options from here, so the key reads
the same for each of them.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable, Iterable, Mapping

__all__ = ["EngineSpec", "ENGINE_KINDS", "ENGINE_KEYS", "DEFAULT_PARTITION_ROWS", "DASK_STEPS", "parse_engine",
           "unsupported_steps", "MEMORY_BUDGET_ENV"]

#: Engine kinds: the whole file in memory, partitions on a Dask cluster, or dask above a memory budget.
ENGINE_KINDS = ("memory", "dask", "auto")
#: Keys of the plan's ``engine`` mapping and the kind of value of each.
ENGINE_KEYS: Mapping[str, str] = {"kind": "str", "scheduler": "str", "partition_rows": "int"}
#: Rows a partition holds at most (consecutive row groups of a Parquet file are joined up to it).
DEFAULT_PARTITION_ROWS = 250_000
#: Steps of a run plan that run with ``engine: dask`` (skipwise.pipeline.dask_run): classify, check,
#: report and weigh on the cluster; diagnose and impute on the client, on the columns they need gathered
#: when these fit the gather budget (refused at run time with the plan's line otherwise).  A step not
#: named here is refused when the plan is loaded.  Engineers who add the engine to a step add its name here.
DASK_STEPS: frozenset[str] = frozenset({"classify", "check", "report", "weigh", "diagnose", "impute"})
#: Environment variable with the memory budget of ``--engine auto`` (bytes, or e.g. "8GB").
MEMORY_BUDGET_ENV = "SKIPWISE_MEMORY_BUDGET"


@dataclass(frozen=True, kw_only=True)
class EngineSpec:
    """Where a command or a run's steps compute.

    Attributes
    ----------
    kind
        ``memory`` (the default), ``dask`` or ``auto``.
    scheduler
        Address of a running Dask scheduler (``tcp://host:8786``); None: ``$SKIPWISE_SCHEDULER``,
        else a local cluster started and stopped by the command.
    partition_rows
        Rows per partition at most.
    """

    kind: str = "memory"
    scheduler: str | None = None
    partition_rows: int = DEFAULT_PARTITION_ROWS

    @property
    def dask(self) -> bool:
        return self.kind == "dask"


def parse_engine(value: Any, *, line: int | None, key_line: Callable[[str], int | None],
                 add: Callable[..., None]) -> EngineSpec:
    """The plan's ``engine`` value as an :class:`EngineSpec`; problems go to ``add(code, message, line, hint)``.

    ``value`` is a kind name (``engine: dask``) or a mapping with ``kind``, ``scheduler`` and
    ``partition_rows``; ``key_line(key)`` gives the line of a key of the mapping.
    """
    from skipwise.errors import ProblemCode, did_you_mean

    if value is None:
        return EngineSpec()
    if isinstance(value, str):
        value = {"kind": value}
        key_line = lambda key: line  # noqa: E731
    if not isinstance(value, Mapping):
        add(ProblemCode.BAD_VALUE, f"'engine' must be a kind ({', '.join(ENGINE_KINDS)}) or a mapping with "
            f"{', '.join(ENGINE_KEYS)}", line, "e.g. engine: {kind: dask, scheduler: tcp://10.0.0.5:8786}")
        return EngineSpec()
    for key in value:
        if key not in ENGINE_KEYS:
            add(ProblemCode.UNKNOWN_KEY, f"unknown key '{key}' in 'engine'", key_line(str(key)),
                did_you_mean(str(key), tuple(ENGINE_KEYS)) or f"valid keys: {', '.join(ENGINE_KEYS)}")
    kind = value.get("kind", "memory")
    if not isinstance(kind, str) or kind.strip().lower() not in ENGINE_KINDS:
        add(ProblemCode.BAD_VALUE, f"'engine.kind' must be one of {', '.join(ENGINE_KINDS)}, found {kind!r}",
            key_line("kind"), did_you_mean(str(kind), ENGINE_KINDS) or "e.g. kind: dask")
        kind = "memory"
    scheduler = value.get("scheduler")
    if scheduler is not None and (not isinstance(scheduler, str) or "://" not in scheduler):
        add(ProblemCode.BAD_VALUE, f"'engine.scheduler' must be a scheduler address, found {scheduler!r}",
            key_line("scheduler"), "e.g. scheduler: tcp://10.0.0.5:8786 (leave it out for a local cluster)")
        scheduler = None
    rows = value.get("partition_rows", DEFAULT_PARTITION_ROWS)
    if isinstance(rows, bool) or not isinstance(rows, int) or rows < 1:
        add(ProblemCode.BAD_VALUE, f"'engine.partition_rows' must be a whole number >= 1, found {rows!r}",
            key_line("partition_rows"), f"e.g. partition_rows: {DEFAULT_PARTITION_ROWS}")
        rows = DEFAULT_PARTITION_ROWS
    kind = kind.strip().lower()
    if kind == "memory" and (scheduler is not None or "partition_rows" in value):
        add(ProblemCode.BAD_VALUE, "'engine.scheduler' and 'engine.partition_rows' apply to the dask engine only",
            key_line("scheduler") or key_line("partition_rows"), "add 'kind: dask', or remove them")
    return EngineSpec(kind=kind, scheduler=scheduler.strip() if scheduler else None, partition_rows=rows)


def unsupported_steps(spec: EngineSpec, steps: Iterable[str]) -> list[str]:
    """The steps of ``steps`` that cannot run on ``spec`` (none for the in-memory engine)."""
    if spec.kind == "memory":
        return []
    return [s for s in steps if s not in DASK_STEPS]
