"""Whether pyreadstat's multiprocessing reader pays for big .sav / .dta input (the speed issue asks to
measure it before using it).

The routed survey of bench_classify (1,000,000 x 200 at scale 1) is written as .sav and .dta, then
read in child processes of their own, three ways each: ``read_sav``/``read_dta`` in one process
(what ``skipwise`` does), and ``pyreadstat.read_file_multiprocessing`` with one worker per core.
Printed for each: wall seconds, CPU seconds of the reading process and of its workers, and the
memory: the reading process's peak and, for the multiprocessing reader, the largest worker's peak
(the workers run at the same time, so the machine holds about the parent's peak plus one worker's
peak per worker).  No target: the figures decide whether ``read_survey`` should switch readers.

    python benchmarks/bench_read.py [--cases N]
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np
import pyreadstat

from _common import scaled
from bench_classify import routed_survey

#: A child that reads the file one way and prints wall, CPU (self, workers) and peaks (self, largest worker).
CHILD = """
import resource, sys, time, pyreadstat
path, how, procs = sys.argv[1], sys.argv[2], int(sys.argv[3])
reader = pyreadstat.read_sav if path.endswith(".sav") else pyreadstat.read_dta
t0 = time.perf_counter()
if how == "one":
    frame, _ = reader(path, user_missing=True)
else:
    frame, _ = pyreadstat.read_file_multiprocessing(reader, path, num_processes=procs, user_missing=True)
wall = time.perf_counter() - t0
me, kids = resource.getrusage(resource.RUSAGE_SELF), resource.getrusage(resource.RUSAGE_CHILDREN)
print(wall, me.ru_utime + me.ru_stime, kids.ru_utime + kids.ru_stime, me.ru_maxrss / 1024, kids.ru_maxrss / 1024)
"""


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--cases", type=int, default=scaled(1_000_000))
    args = ap.parse_args()
    procs = os.cpu_count() or 1
    _, data = routed_survey(args.cases, 200, 100, np.random.default_rng(1))
    frame_mb = data.memory_usage(deep=True).sum() / 2**20
    with tempfile.TemporaryDirectory() as tmp:
        files = [Path(tmp) / "big.sav", Path(tmp) / "big.dta"]
        pyreadstat.write_sav(data, str(files[0]))
        pyreadstat.write_dta(data, str(files[1]))
        del data
        print(f"{args.cases:,} x 200, frame {frame_mb:,.0f} MB; {procs} cores")
        for path in files:
            for how in ("one", "multi"):
                out = subprocess.run([sys.executable, "-c", CHILD, str(path), how, str(procs)],
                                     capture_output=True, text=True, check=True).stdout.split()
                wall, cpu, kids, peak, kid_peak = map(float, out)
                memory = (f"peak {peak:,.0f} MB" if how == "one" else
                          f"peak {peak:,.0f} MB + {procs} workers of up to {kid_peak:,.0f} MB")
                print(f"{path.suffix:<5} {how + ' process' + ('' if how == 'one' else 'es'):<16} wall {wall:6.1f} s, "
                      f"CPU {cpu:6.1f} s + workers {kids:6.1f} s, {memory}")


if __name__ == "__main__":
    main()
