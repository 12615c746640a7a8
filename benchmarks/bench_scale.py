"""The dask engine on a tiled invented survey: classify + report on a local cluster against the in-memory CLI.

Writes an invented survey of CASES x ITEMS (default 5,000,000 x 100, times SKIPWISE_BENCH_SCALE) as
Parquet parts of 250,000 rows (one random block of 250,000 rows tiled, case ids renumbered), then
runs, each as a child process of its own:

- ``skipwise classify PARTS -o OUT --engine dask`` and ``skipwise report PARTS -o r.xlsx --engine
  dask`` (a local cluster: one worker process per core, started and stopped by the command);
- the in-memory CLI (``classify -o x.parquet``, ``report``) on the first ``min(CASES, 1,000,000 x
  SCALE)`` rows as one Parquet file (the whole file would not fit the shared machine's memory).

While each runs, the resident memory of the command (the client) and of each of its child processes
(the workers) is sampled every 0.2 s.  Printed: wall and CPU seconds per million cells for both
engines, the peaks beside the data's in-memory size (8 bytes a cell) and the workers' memory limit.

Targets (issue 15): client peak <= 0.25x the data's in-memory size; each worker <= its limit; CLI
throughput per core (cells per CPU second, every process of the command counted) of the dask engine
>= half the in-memory CLI's.

Usage: python benchmarks/bench_scale.py [CASES] [ITEMS]
"""

from __future__ import annotations

import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from _common import SCALE, result
from bench_report import questionnaire_text, synthetic_data

PART_ROWS = 250_000


def write_parts(folder: Path, n: int, p: int) -> None:
    """The invented survey as Parquet parts: one random block, tiled, the case ids renumbered."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    block = min(n, PART_ROWS)
    table = pa.Table.from_pandas(synthetic_data(block, p), preserve_index=False)
    written = 0
    i = 0
    while written < n:
        rows = min(block, n - written)
        part = table.slice(0, rows)
        part = part.set_column(0, "id", pa.array(np.arange(written, written + rows, dtype=np.int64)))
        pq.write_table(part, folder / f"wave-{i:04d}.parquet")
        written += rows
        i += 1


def run_sampled(args: list[str]) -> dict:
    """Run a command; its wall and CPU seconds, its peak RSS and each child's peak RSS (MB)."""
    import psutil

    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    proc = subprocess.Popen(args, stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True)
    ps = psutil.Process(proc.pid)
    client, workers = 0.0, {}
    while proc.poll() is None:
        try:
            client = max(client, ps.memory_info().rss / 1e6)
            for child in ps.children(recursive=True):
                try:
                    workers[child.pid] = max(workers.get(child.pid, 0.0), child.memory_info().rss / 1e6)
                except psutil.Error:
                    pass
        except psutil.Error:
            pass
        time.sleep(0.2)
    out = proc.stdout.read()
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    if proc.returncode != 0:
        print(out)
        raise SystemExit(f"command failed: {' '.join(args)}")
    big = {pid: mb for pid, mb in workers.items() if mb > 100}  # worker processes, not helper processes
    return {"wall": wall, "cpu": cpu, "client": client, "workers": big, "output": out}


def main() -> None:
    import psutil

    n = int(sys.argv[1]) if len(sys.argv) > 1 else max(10_000, int(5_000_000 * SCALE))
    p = int(sys.argv[2]) if len(sys.argv) > 2 else 100
    n_mem = min(n, max(10_000, int(1_000_000 * SCALE)))
    cores = os.cpu_count() or 1
    exe = str(Path(sys.executable).with_name("skipwise"))
    with tempfile.TemporaryDirectory(dir=os.environ.get("SKIPWISE_BENCH_TMP")) as tmp:
        root = Path(tmp)
        (root / "parts").mkdir()
        (root / "q.yaml").write_text(questionnaire_text(p))
        t0 = time.perf_counter()
        write_parts(root / "parts", n, p)
        import pyarrow.parquet as pq

        first = pq.read_table(root / "parts" / "wave-0000.parquet")
        import pyarrow as pa

        tables, rows = [], 0
        for f in sorted((root / "parts").glob("*.parquet")):
            if rows >= n_mem:
                break
            t = pq.read_table(f).slice(0, n_mem - rows)
            tables.append(t)
            rows += len(t)
        pq.write_table(pa.concat_tables(tables), root / "mem.parquet")
        del tables, first
        cols = p + 3
        data_mb = n * cols * 8 / 1e6
        cells, cells_mem = n * p, n_mem * p
        print(f"data: {n:,} cases x {p} items ({cols} columns) in {len(list((root / 'parts').glob('*.parquet')))} "
              f"parts: {data_mb:,.0f} MB in memory (8 bytes a cell); written in {time.perf_counter() - t0:.1f} s")
        q = str(root / "q.yaml")
        dask_cl = run_sampled([exe, "classify", str(root / "parts"), "-q", q, "-o", str(root / "out"),
                               "--engine", "dask"])
        dask_rp = run_sampled([exe, "report", str(root / "parts"), "-q", q, "-o", str(root / "r.xlsx"),
                               "--engine", "dask", "--weight", "wt", "--by", "region"])
        mem_cl = run_sampled([exe, "classify", str(root / "mem.parquet"), "-q", q, "-o", str(root / "m.parquet")])
        mem_rp = run_sampled([exe, "report", str(root / "mem.parquet"), "-q", q, "-o", str(root / "m.xlsx"),
                              "--weight", "wt", "--by", "region"])
    limit_mb = psutil.virtual_memory().total / cores / 1e6  # dask's "auto" limit: the machine's memory per worker
    print(f"{'step':<24} {'wall s/M cells':>15} {'CPU s/M cells':>14} {'client peak MB':>15} {'workers peak MB':>18}")
    for name, r, c in (("dask classify", dask_cl, cells), ("dask report", dask_rp, cells),
                       ("in-memory classify", mem_cl, cells_mem), ("in-memory report", mem_rp, cells_mem)):
        w = ", ".join(f"{mb:,.0f}" for mb in sorted(r["workers"].values())) or "-"
        print(f"{name:<24} {r['wall'] / c * 1e6:>15.3f} {r['cpu'] / c * 1e6:>14.3f} {r['client']:>15,.0f} {w:>18}")
    dask_cpu = (dask_cl["cpu"] + dask_rp["cpu"]) / cells
    mem_cpu = (mem_cl["cpu"] + mem_rp["cpu"]) / cells_mem
    ratio = mem_cpu / dask_cpu  # throughput per core, dask over in-memory
    client_peak = max(dask_cl["client"], dask_rp["client"])
    worker_peak = max([*dask_cl["workers"].values(), *dask_rp["workers"].values(), 0.0])
    print(f"client peak {client_peak:,.0f} MB = {client_peak / data_mb:.3f}x the data's in-memory size "
          f"(target <= 0.25x); worker peak {worker_peak:,.0f} MB, limit {limit_mb:,.0f} MB per worker")
    print(f"CLI throughput per core (cells per CPU second, classify + report): dask {1 / dask_cpu / 1e6:.2f} M, "
          f"in-memory {1 / mem_cpu / 1e6:.2f} M = {ratio:.2f}x (target >= 0.5x)")
    print(f"wall per M cells (classify + report): dask {(dask_cl['wall'] + dask_rp['wall']) / cells * 1e6:.3f} s, "
          f"in-memory {(mem_cl['wall'] + mem_rp['wall']) / cells_mem * 1e6:.3f} s (both with {cores} cores)")
    met = client_peak <= 0.25 * data_mb and worker_peak <= limit_mb and ratio >= 0.5
    result(f"dask classify + report {n:,} x {p}", f"{1 / dask_cpu / 1e6:.2f} M cells/CPU s, client "
           f"{client_peak / data_mb:.2f}x data", f"in-memory {1 / mem_cpu / 1e6:.2f} M cells/CPU s", ratio,
           ">= 0.5x per core; client <= 0.25x data; workers <= limit", met)


if __name__ == "__main__":
    main()
