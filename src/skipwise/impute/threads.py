"""One BLAS thread while imputation chains run.

The chains' linear algebra is on narrow matrices (cases x predictors), where BLAS threads
gain little; several threads per chain make results depend on how a reduction was split
(a dot product summed in two halves rounds differently), and with chains in parallel
processes they oversubscribe the cores (OpenBLAS threads spin while they wait, which on a
shared machine burns CPU time other processes need).  So a chain runs with one BLAS thread,
and the previous setting is restored afterwards.

This talks to the OpenBLAS libraries the process has loaded (numpy's and scipy's wheels
each bring one) through their ``*_set_num_threads`` functions; with another BLAS, or where
the loaded libraries cannot be listed (no ``/proc/self/maps``), it does nothing.
"""

from __future__ import annotations

import ctypes
import os
from contextlib import contextmanager
from functools import lru_cache
from typing import Callable, Iterator

__all__ = ["one_blas_thread", "blas_threads"]

_PREFIXES = ("scipy_openblas", "openblas")
_SUFFIXES = ("64_", "")


@lru_cache(maxsize=1)
def _controls() -> tuple[tuple[Callable[[], int], Callable[[int], None]], ...]:
    """(get, set) number-of-threads functions of every OpenBLAS library loaded."""
    try:
        with open("/proc/self/maps", encoding="utf-8", errors="replace") as fh:
            paths = sorted({line.split()[-1] for line in fh
                            if "openblas" in os.path.basename(line.split()[-1]).lower()})
    except OSError:
        return ()
    out = []
    for path in paths:
        try:
            lib = ctypes.CDLL(path)
        except OSError:
            continue
        for prefix in _PREFIXES:
            found = False
            for suffix in _SUFFIXES:
                get = getattr(lib, f"{prefix}_get_num_threads{suffix}", None)
                put = getattr(lib, f"{prefix}_set_num_threads{suffix}", None)
                if get is not None and put is not None:
                    get.restype, put.argtypes = ctypes.c_int, [ctypes.c_int]
                    out.append((get, put))
                    found = True
                    break
            if found:
                break
    return tuple(out)


@contextmanager
def one_blas_thread() -> Iterator[None]:
    """Run the block with one BLAS thread in every loaded OpenBLAS; restore the counts after."""
    controls = _controls()
    before = [get() for get, _ in controls]
    for _, put in controls:
        put(1)
    try:
        yield
    finally:
        for (_, put), n in zip(controls, before):
            put(n)


def blas_threads() -> list[int]:
    """Current thread count of every loaded OpenBLAS (empty when none can be reached)."""
    return [get() for get, _ in _controls()]
