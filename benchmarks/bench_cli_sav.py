"""End to end: ``skipwise classify big.sav -q q.yaml -o out.sav``, beside pyreadstat's own read and write.

Figure: wall time and peak memory (largest resident set) of the command in a child process on
bench_classify's routed survey of 1,000,000 x 200 (stored values that follow the routing, about
3.7 M routing faults: the speed issue's file; bench_faults.py times the listing of the 60 M-fault
worst case).  Floors measured in the same run, after the command, in one child process of their
own: pyreadstat's read of the input .sav, and pyreadstat's write of the command's result frame
(the data plus 200 status columns, made by the API between the two timed calls).  Targets: at
most 1.2x (read + write floors); peak at most 2x the frame in memory, or the reader's own peak
where that is higher (pyreadstat's read_sav alone peaks above 2x the frame it returns; the
floors' child measures that peak right after its read, before it imports skipwise).  The input
.sav is set-up, written before the clock starts by ``_sav.write_numeric_sav`` (the bytes
pyreadstat writes, checked against pyreadstat on a slice, in seconds instead of two minutes).
Also printed: the CPU seconds of the command and of the floors (the figures to compare on a
shared machine) and the size of the fault listing the command writes beside the data (the floors
write no listing).

    python benchmarks/bench_cli_sav.py [--cases N]
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pyreadstat

from _common import children_peak_mb, result, scaled
from _sav import write_numeric_sav
from bench_classify import routed_survey

#: The floors' child process: argv = input .sav, questionnaire, floor .sav.  It prints five numbers:
#: the read's wall and CPU seconds, its own peak (MB) right after the read (the reader's peak),
#: and the write's wall and CPU seconds.
FLOORS = """
import resource, sys, time
from pathlib import Path
import pyreadstat

def timed(fn):
    w, c = time.perf_counter(), time.process_time()
    out = fn()
    return time.perf_counter() - w, time.process_time() - c, out

read, read_cpu, (data, _) = timed(lambda: pyreadstat.read_sav(sys.argv[1], user_missing=True))
peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024     # skipwise not imported yet
from skipwise.classify import classify
from skipwise.classify.export import with_status_columns
from skipwise.questionnaire import loads_questionnaire
res, _ = with_status_columns(data, classify(data, loads_questionnaire(Path(sys.argv[2]).read_text())))
del data
write, write_cpu, _ = timed(lambda: pyreadstat.write_sav(res, sys.argv[3]))
print(read, read_cpu, peak, write, write_cpu)
"""


def _children_cpu() -> float:
    """User + system CPU seconds of the finished child processes so far."""
    import resource

    use = resource.getrusage(resource.RUSAGE_CHILDREN)
    return use.ru_utime + use.ru_stime


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--cases", type=int, default=scaled(1_000_000))
    args = ap.parse_args()
    text, data = routed_survey(args.cases, 200, 100, np.random.default_rng(1))
    frame_mb = data.memory_usage(deep=True).sum() / 2**20
    with tempfile.TemporaryDirectory() as tmp:
        src, qfile, out = Path(tmp) / "big.sav", Path(tmp) / "q.yaml", Path(tmp) / "out.sav"
        qfile.write_text(text)
        write_numeric_sav(data, src)
        del data
        skipwise = [sys.executable, "-m", "skipwise"]
        c0 = _children_cpu()
        t0 = time.perf_counter()
        done = subprocess.run([*skipwise, "classify", str(src), "-q", str(qfile), "-o", str(out)],
                              capture_output=True, text=True, env=os.environ)
        secs = time.perf_counter() - t0
        cpu = _children_cpu() - c0
        faults = (Path(tmp) / "out.sav.faults.csv").stat().st_size / 2**20 if done.returncode == 0 else 0
        if done.returncode != 0:
            print(done.stdout, done.stderr)
            raise SystemExit("the command failed")
        peak = children_peak_mb()                       # before the floors' child runs
        out.unlink()
        floors = subprocess.run([sys.executable, "-c", FLOORS, str(src), str(qfile), str(Path(tmp) / "floor.sav")],
                                capture_output=True, text=True, check=True)
        read, read_cpu, reader_peak, write, write_cpu = map(float, floors.stdout.split()[-5:])
    floor = read + write
    limit = max(2 * frame_mb, reader_peak)
    print(f"classify .sav -> .sav : {secs:.1f} s, peak {peak:,.0f} MB ({peak / frame_mb:.2f}x the {frame_mb:,.0f} MB frame)")
    print(f"peak target           : {limit:,.0f} MB = the larger of 2x the frame ({2 * frame_mb:,.0f} MB) and "
          f"pyreadstat's read_sav alone ({reader_peak:,.0f} MB)")
    print(f"floors                : read {read:.1f} s + write {write:.1f} s = {floor:.1f} s")
    print(f"CPU seconds           : command {cpu:.1f} s; floors read {read_cpu:.1f} s + write {write_cpu:.1f} s = "
          f"{read_cpu + write_cpu:.1f} s ({cpu / max(read_cpu + write_cpu, 1e-9):.2f}x; on a busy machine "
          f"compare these); the command also wrote a {faults:,.0f} MB fault listing")
    result(f"CLI classify .sav {args.cases:,} x 200", f"{secs:.1f} s, peak {peak:,.0f} MB ({peak / frame_mb:.2f}x frame)",
           f"{floor:.1f} s; peak {limit:,.0f} MB", secs / floor, "<= 1.2x, peak <= max(2x frame, reader's peak)",
           secs <= 1.2 * floor and peak <= limit)


if __name__ == "__main__":
    main()
