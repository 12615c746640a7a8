"""What the dask engine's conversion pays for reading a .dta or .sas7bdat file in chunks (measured only).

The conversion to Parquet parts (skipwise/scale/convert.py) reads the file with
``pyreadstat.read_file_in_chunks``, which starts each chunk with a fresh read at ``row_offset``.
This prints the CPU seconds of that reading alone (the same readers and options as the
conversion), whole and in chunks, for an invented numeric file written as Stata (.dta, by
pyreadstat) and as SAS (.sas7bdat, by the ReadStat command-line tool ``readstat`` when it is on
the PATH: pyreadstat writes no SAS7BDAT), best of ``--repeat`` runs. If the chunks cost more than
the whole, the difference is the re-read of the rows before each chunk; one chunk read alone
at the start and at the end of the file tells what the rows before a chunk cost.

    python benchmarks/bench_chunk_reread.py [--rows 200000] [--cols 21] [--repeat 3]
"""

from __future__ import annotations

import argparse
import shutil
import subprocess
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pyreadstat

OPTS = {"dta": dict(user_missing=True, apply_value_formats=False, dates_as_pandas_datetime=True),
        "sas7bdat": dict(user_missing=True, dates_as_pandas_datetime=True)}  # as scale/convert.py reads
READERS = {"dta": pyreadstat.read_dta, "sas7bdat": pyreadstat.read_sas7bdat}


def invented(rows: int, cols: int, seed: int = 5) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    data = {f"v{j:02d}": rng.integers(1, 6, rows).astype(float) for j in range(cols - 1)}
    data["v_last"] = rng.uniform(0, 100, rows).round(2)
    frame = pd.DataFrame(data)
    frame.iloc[::17, 0] = np.nan
    return frame


def cpu_of(path: Path, fmt: str, chunk: int | None, repeat: int) -> tuple[float, int]:
    best, rows = float("inf"), 0
    for _ in range(repeat):
        t0 = time.process_time()
        if chunk is None:
            frame, _ = READERS[fmt](str(path), **OPTS[fmt])
            rows = len(frame)
        else:
            rows = sum(len(df) for df, _ in pyreadstat.read_file_in_chunks(READERS[fmt], str(path),
                                                                           chunksize=chunk, **OPTS[fmt]))
        best = min(best, time.process_time() - t0)
    return best, rows


def offset_cpu(path: Path, fmt: str, offset: int, limit: int, repeat: int) -> float:
    """CPU seconds of reading ``limit`` rows at ``offset`` alone (what one chunk of the conversion does)."""
    best = float("inf")
    for _ in range(repeat):
        t0 = time.process_time()
        READERS[fmt](str(path), row_offset=offset, row_limit=limit, **OPTS[fmt])
        best = min(best, time.process_time() - t0)
    return best


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=200_000)
    ap.add_argument("--cols", type=int, default=21)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--chunks", type=int, nargs="+", default=[50_000, 20_000, 5_000])
    args = ap.parse_args()
    frame = invented(args.rows, args.cols)
    with tempfile.TemporaryDirectory() as tmp:
        files = {"dta": Path(tmp) / "invented.dta"}
        pyreadstat.write_dta(frame, str(files["dta"]))
        if shutil.which("readstat"):
            files["sas7bdat"] = Path(tmp) / "invented.sas7bdat"
            subprocess.run(["readstat", str(files["dta"]), str(files["sas7bdat"])], check=True,
                           capture_output=True)
        else:
            print("sas7bdat: skipped (no 'readstat' command to write one)")
        print(f"{args.rows:,} rows x {args.cols} numeric columns; CPU seconds of the reading, best of {args.repeat}")
        for fmt, path in files.items():
            whole, n = cpu_of(path, fmt, None, args.repeat)
            assert n == args.rows
            line = [f"{fmt:>9} ({path.stat().st_size / 1e6:,.1f} MB): whole {whole:.2f} s"]
            for chunk in args.chunks:
                t, n = cpu_of(path, fmt, chunk, args.repeat)
                assert n == args.rows
                line.append(f"chunks of {chunk:,} rows ({-(-args.rows // chunk)} chunks) {t:.2f} s "
                            f"({t / whole:.2f}x)")
            print("; ".join(line))
            last = min(args.chunks)
            first = offset_cpu(path, fmt, 0, last, args.repeat * 3)
            end = offset_cpu(path, fmt, args.rows - last, last, args.repeat * 3)
            print(f"{'':>9}  one chunk of {last:,} rows alone: at the start {first:.3f} s, at the end {end:.3f} s "
                  f"(the rows before it cost {max(end - first, 0.0) / max(args.rows - last, 1) * 1e6:.2f} "
                  f"CPU s a million)")


if __name__ == "__main__":
    main()
