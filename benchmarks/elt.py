"""The command line's speed and memory, Parquet in and Parquet out.

1. A size that fits in memory (default 100,000 series x 120 months): rows per second of
   the job engine (``tidesplit.elt.run``, what ``tidesplit split`` runs) beside the same
   tide_split query run by hand inside DuckDB, Parquet to Parquet, in one process with the
   kernel warm, best of ``--repeat``. Goal: the command line at least 0.8 of the query.
2. A large size (default 3,000,000 series x 120 months = 360 million rows):
   ``tidesplit split`` as a user runs it, in a process of its own, with its peak resident
   memory (from the kernel's accounting of the child). Goal: under 4 GiB.

    python benchmarks/elt.py                       # both, full sizes
    python benchmarks/elt.py --large 300000        # a smaller large run
    python benchmarks/elt.py --skip-large --fits 50000

The invented data (our own formula: a level, a trend, a yearly cycle, hashed noise) is
written once into --folder and reused.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time
from pathlib import Path

import duckdb

import tidesplit
from tidesplit import elt

SETTINGS = {"period": 12}


def invented_sales(path: Path, series: int, months: int = 120) -> int:
    """Write ``series`` x ``months`` invented monthly rows to a Parquet file (streamed by
    DuckDB, so any size fits); the number of rows."""
    rows = series * months
    if not path.exists():
        aside = path.with_suffix(".partial")
        duckdb.sql(
            f"""
            COPY (
              SELECT s AS sku, (DATE '2010-01-01' + INTERVAL (m) MONTH)::DATE AS month,
                     40 + s % 23 + 0.05 * m + 6 * sin(m * pi() / 6 + s % 7)
                       + (hash(s, m) % 1000) / 300.0 AS units
              FROM range({series}) a(s), range({months}) b(m)
            ) TO '{aside}' (FORMAT parquet)
            """
        )
        aside.rename(path)
    return rows


def fits_in_memory(folder: Path, series: int, repeat: int) -> None:
    source = folder / f"sales_{series}.parquet"
    rows = invented_sales(source, series)
    job = elt.Job(
        "split", str(source), str(folder / "split_cli.parquet"), ["sku"], "month", "units",
        dict(SETTINGS),
    )  # fmt: skip
    query = (
        "COPY (SELECT * FROM tide_split(sales, 'sku', 'month', 'units', period := 12)) "
        f"TO '{folder / 'split_sql.parquet'}' (FORMAT parquet)"
    )

    def by_hand() -> float:
        con = tidesplit.connect()
        con.execute(f"CREATE VIEW sales AS SELECT * FROM read_parquet('{source}')")
        started = time.perf_counter()
        con.execute(query)
        return time.perf_counter() - started

    def by_engine() -> float:
        started = time.perf_counter()
        done = elt.run(job)
        assert done.exit_code == elt.EXIT_OK, done.message
        return time.perf_counter() - started

    by_hand()  # the kernel's first load, outside the timings
    query_seconds = min(by_hand() for _ in range(repeat))
    engine_seconds = min(by_engine() for _ in range(repeat))
    started = time.perf_counter()
    command = [sys.executable, "-m", "tidesplit.cli", "split", "--from", str(source), "--to",
               str(folder / "split_cli.parquet"), "--key", "sku", "--time", "month",
               "--value", "units", "--period", "12", "--quiet"]  # fmt: skip
    subprocess.run(command, check=True)
    command_seconds = time.perf_counter() - started
    batches = -(-rows // elt.DEFAULT_BATCH_ROWS)
    print(f"\n{series:,} series x 120 = {rows:,} rows, Parquet to Parquet, period 12, "
          f"best of {repeat}:")  # fmt: skip
    print(f"  tide_split query in DuckDB (COPY ... TO):  {query_seconds:6.2f} s  "
          f"{rows / query_seconds:12,.0f} rows/s")  # fmt: skip
    print(f"  job engine ({batches} batches of keys):       {engine_seconds:6.2f} s  "
          f"{rows / engine_seconds:12,.0f} rows/s  = {query_seconds / engine_seconds:.2f} "
          "of the query")  # fmt: skip
    print(f"  tidesplit split, a process of its own:      {command_seconds:6.2f} s  "
          f"{rows / command_seconds:12,.0f} rows/s  (with start-up)")  # fmt: skip


def large(folder: Path, series: int, batch_rows: int) -> None:
    source = folder / f"sales_{series}.parquet"
    started = time.perf_counter()
    rows = invented_sales(source, series)
    print(f"\ninvented {rows:,} rows in {time.perf_counter() - started:.0f} s "
          f"({source.stat().st_size / 2**30:.2f} GiB of Parquet)")  # fmt: skip
    target = folder / f"split_{series}.parquet"
    command = [sys.executable, "-m", "tidesplit.cli", "split", "--from", str(source), "--to",
               str(target), "--key", "sku", "--time", "month", "--value", "units",
               "--period", "12", "--batch-rows", str(batch_rows),
               "--report", str(folder / "large.json")]  # fmt: skip
    started = time.perf_counter()
    process = subprocess.Popen(command)
    _, status, usage = os.wait4(process.pid, 0)
    seconds = time.perf_counter() - started
    peak = usage.ru_maxrss * 1024  # kilobytes on Linux
    print(f"tidesplit split, {series:,} series x 120 = {rows:,} rows, Parquet to Parquet, "
          f"batches of {batch_rows:,} rows: {seconds:.0f} s, {rows / seconds:,.0f} rows/s, "
          f"peak memory {peak / 2**30:.2f} GiB (goal: under 4 GiB), "
          f"exit {os.waitstatus_to_exitcode(status)}")  # fmt: skip
    print(f"output {target.stat().st_size / 2**30:.2f} GiB")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--folder", default="bench-elt", help="where the data is kept")
    parser.add_argument("--fits", type=int, default=100_000, help="series of the first part")
    parser.add_argument("--large", type=int, default=3_000_000, help="series of the second")
    parser.add_argument("--batch-rows", type=int, default=elt.DEFAULT_BATCH_ROWS)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--skip-fits", action="store_true")
    parser.add_argument("--skip-large", action="store_true")
    args = parser.parse_args()
    folder = Path(args.folder)
    folder.mkdir(exist_ok=True)
    if not args.skip_fits:
        fits_in_memory(folder, args.fits, args.repeat)
    if not args.skip_large:
        large(folder, args.large, args.batch_rows)


if __name__ == "__main__":
    main()
