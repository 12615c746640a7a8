"""A Dask distributed client: an existing scheduler's, or a local cluster started and stopped here.

The address comes from ``--scheduler``, else the environment variable
``SKIPWISE_SCHEDULER``; without either, a local cluster of worker processes (one
per core, each with a memory limit) is started on 127.0.0.1 and stopped when
the work is done.
"""

from __future__ import annotations

import contextlib
import os
from typing import Iterator

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError

__all__ = ["dask_client", "SCHEDULER_ENV", "require_dask"]

#: Environment variable naming a running scheduler when --scheduler is not given.
SCHEDULER_ENV = "SKIPWISE_SCHEDULER"


def require_dask() -> None:
    """Refuse clearly when the optional engine is not installed."""
    try:
        import dask  # noqa: F401
        import distributed  # noqa: F401
    except ImportError:
        raise SkipwiseError(Problem(
            code=ProblemCode.BAD_VALUE, category=Category.USAGE,
            message="the dask engine needs the packages dask and distributed, which are not installed",
            hint="pip install 'skipwise[scale]' (or pip install 'dask[dataframe]' distributed)")) from None


@contextlib.contextmanager
def dask_client(scheduler: str | None = None, *, workers: int | None = None,
                memory_limit: str | None = None) -> Iterator["object"]:
    """A ``distributed.Client``; a local cluster is started (and stopped) when no scheduler is named."""
    require_dask()
    from distributed import Client, LocalCluster

    address = scheduler or os.environ.get(SCHEDULER_ENV) or None
    if address:
        try:
            client = Client(address, timeout="20s")
        except (OSError, TimeoutError) as err:
            raise SkipwiseError(Problem(
                code=ProblemCode.BAD_VALUE, category=Category.USAGE,
                message=f"cannot reach the Dask scheduler at {address} ({err.__class__.__name__})",
                hint="start it with the cluster's own tools (e.g. 'dask scheduler'), or leave out --scheduler "
                     f"and {SCHEDULER_ENV} to use a local cluster")) from None
        try:
            yield client
        finally:
            client.close()
        return
    n = workers or os.cpu_count() or 1
    with LocalCluster(n_workers=n, threads_per_worker=1, processes=True, host="127.0.0.1",
                      dashboard_address="127.0.0.1:0", memory_limit=memory_limit or "auto", silence_logs=40) as cluster:
        with Client(cluster) as client:
            yield client
