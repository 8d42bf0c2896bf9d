"""The command line's speed and memory, Parquet in and Parquet out.

1. A size that fits in memory (default 100,000 series x 120 months): rows per second of
   the job engine (``tidesplit.elt.run``, what ``tidesplit split`` runs) beside the same
   tide_split query run by hand inside DuckDB, Parquet to Parquet, in one process with the
   kernel warm, best of ``--repeat``. Goal: the command line at least 0.8 of the query.
2. A large size (default 3,000,000 series x 120 months = 360 million rows):
   ``tidesplit split`` as a user runs it, in a process of its own, with its peak resident
   memory (from the kernel's accounting of the child). Goal: under 4 GiB.
3. Refresh (``--skip-refresh`` leaves it out): the demo's shop sales published with
   ``tidesplit publish`` (240 series, weeks 0 to 310), then week 311 arrives from 4 of the
   12 shops: the refresh (80 keys recomputed, 160 reused) beside a full rerun of the same
   publish into a new database; and ``tidesplit split --refresh`` of the first size's
   series after 2% of them changed, beside the full run (Parquet to Parquet). Both in one
   process with the kernel warm, best of ``--repeat``.

    python benchmarks/elt.py                       # all three, full sizes
    python benchmarks/elt.py --large 300000        # a smaller large run
    python benchmarks/elt.py --skip-large --fits 50000
    python benchmarks/elt.py --skip-fits --skip-large   # the refresh alone (README's table)

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
from tidesplit.examples.retail_chain import SHOP_NAMES, weekly_units

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


def _timed(job: elt.Job) -> tuple[float, elt.Outcome]:
    started = time.perf_counter()
    done = elt.run(job)
    seconds = time.perf_counter() - started
    assert done.exit_code in (elt.EXIT_OK, elt.EXIT_KEPT), done.message
    return seconds, done


def demo_refresh(folder: Path, repeat: int) -> None:
    """The demo's publish: a refresh after one week from 4 of 12 shops, beside a rerun."""
    import shutil

    shops = weekly_units()
    arrived = f"week = 311 AND shop IN {tuple(SHOP_NAMES[:4])}"
    base = folder / "demo_base.duckdb"
    base.unlink(missing_ok=True)
    with duckdb.connect(str(base)) as con:
        con.register("shops", shops)
        con.execute("CREATE TABLE weekly_units AS SELECT * FROM shops WHERE week < 311")
    settings = {"period": 52, "robust": True, "transform": "log"}

    def publish(path: Path) -> elt.Job:
        return elt.Job("publish", f"{path}:weekly_units", str(path), ["shop", "product"],
                       "week", "units", dict(settings), refresh=True)  # fmt: skip

    _timed(publish(base))  # the first publish (and the kernel's first load)
    refreshed, full = [], []
    for _ in range(repeat):
        again = folder / "demo_refresh.duckdb"
        shutil.copy(base, again)
        with duckdb.connect(str(again)) as con:
            con.register("shops", shops)
            con.execute(f"INSERT INTO weekly_units SELECT * FROM shops WHERE {arrived}")
        with duckdb.connect(str(again), read_only=True) as con:
            published = con.sql("SELECT * FROM adjusted_series").to_arrow_table()
            provisional = con.sql("SELECT * FROM provisional_adjusted").to_arrow_table()
        seconds, done = _timed(publish(again))
        refreshed.append((seconds, done))
        with duckdb.connect(str(again), read_only=True) as con:
            con.register("published", published)
            con.register("provisional", provisional)
            moves = con.sql(
                "SELECT p.latest_cycle, count(*), avg(abs(a.adjusted - p.adjusted)), "
                "avg(abs(a.adjusted - p.adjusted) / abs(p.adjusted)) FROM published AS p JOIN "
                "adjusted_series AS a USING (shop, product, week) JOIN (SELECT DISTINCT shop, "
                "product FROM provisional) USING (shop, product) GROUP BY ALL ORDER BY ALL"
            ).fetchall()
            first_seen = con.sql(
                "SELECT count(*), avg(abs(a.adjusted - p.adjusted) / abs(a.adjusted)), "
                "max(abs(a.adjusted - p.adjusted) / abs(a.adjusted)) FROM provisional AS p "
                "JOIN adjusted_series AS a USING (shop, product, week)"
            ).fetchall()[0]
        fresh = folder / "demo_full.duckdb"
        fresh.unlink(missing_ok=True)
        with duckdb.connect(str(fresh)) as con:
            con.execute(f"ATTACH '{again}' AS done (READ_ONLY)")
            con.execute("CREATE TABLE weekly_units AS SELECT * FROM done.weekly_units")
        full.append(_timed(publish(fresh)))
    (r_seconds, r_done), (f_seconds, f_done) = min(refreshed, key=lambda x: x[0]), min(
        full, key=lambda x: x[0])  # fmt: skip
    moved = r_done.revisions or {}
    print(f"\nthe demo's publish (240 series, weekly, period 52, robust, log), week 311 from "
          f"4 of 12 shops, best of {repeat}:")  # fmt: skip
    print(
        f"  refresh: {r_done.keys_recomputed} keys recomputed, {r_done.keys_reused} reused, "
        f"{r_done.keys_dropped} dropped, {r_done.rows_out:,} rows: {r_seconds:.2f} s"
    )
    print(
        f"  full rerun (a new database): {f_done.keys_recomputed} keys computed, "
        f"{f_done.rows_out:,} rows: {f_seconds:.2f} s  (refresh = "
        f"{r_seconds / f_seconds:.2f} of the rerun)"
    )
    print(
        f"  revisions: {moved.get('keys_revised')} keys, {moved.get('points_compared'):,} "
        f"published values compared; mean move {moved.get('mean_change'):.3f} units "
        f"({100 * moved.get('mean_share'):.2f}% of the level), largest "
        f"{moved.get('largest_change'):.2f} units ({100 * moved.get('largest_share'):.1f}% "
        f"of its key's level) at {moved.get('largest_change_key')}"
    )
    for latest, points, mean, share in moves:
        where = "the latest cycle" if latest else "the cycles before it"
        print(
            f"    in {where}: {points:,} values moved by {mean:.3f} units on average "
            f"({100 * share:.2f}% of the value)"
        )
    print(
        f"  the {first_seen[0]} new rows adjusted by the projected factors before the refresh "
        f"moved by {100 * first_seen[1]:.2f}% on average ({100 * first_seen[2]:.1f}% at most) "
        "when the refresh split them with the rest"
    )


def split_refresh(folder: Path, series: int, changed: float, repeat: int) -> None:
    """``split --refresh`` of the invented monthly series after a share of them changed."""
    import shutil

    source = folder / f"sales_{series}.parquet"
    rows = invented_sales(source, series)
    later = folder / f"sales_{series}_later.parquet"
    every = max(1, round(1 / changed))
    duckdb.sql(
        f"COPY (SELECT sku, month, CASE WHEN sku % {every} = 0 AND month = "
        f"(SELECT max(month) FROM '{source}') THEN units + 1 ELSE units END AS units "
        f"FROM '{source}') TO '{later}' (FORMAT parquet)"
    )
    base = folder / "refresh_base.parquet"

    def job(source: Path, target: Path, refresh: bool) -> elt.Job:
        return elt.Job("split", str(source), str(target), ["sku"], "month", "units",
                       dict(SETTINGS), refresh=refresh)  # fmt: skip

    _timed(job(source, base, True))
    refreshed, full = [], []
    for _ in range(repeat):
        target = folder / "refresh_again.parquet"
        shutil.copy(base, target)
        shutil.copy(folder / "refresh_base_refresh_keys.parquet",
                    folder / "refresh_again_refresh_keys.parquet")  # fmt: skip
        (folder / "refresh_again_revisions.parquet").unlink(missing_ok=True)
        refreshed.append(_timed(job(later, target, True)))
        full.append(_timed(job(later, folder / "refresh_full.parquet", False)))
    (r_seconds, r_done), (f_seconds, _) = min(refreshed, key=lambda x: x[0]), min(
        full, key=lambda x: x[0])  # fmt: skip
    print(f"\n{series:,} series x 120 months ({rows:,} rows), the last month of one series in "
          f"{every} revised, Parquet to Parquet, best of {repeat}:")  # fmt: skip
    print(
        f"  tidesplit split --refresh: {r_done.keys_recomputed:,} keys recomputed, "
        f"{r_done.keys_reused:,} reused: {r_seconds:.2f} s"
    )
    print(
        f"  tidesplit split (a full run): {f_seconds:.2f} s  (refresh = "
        f"{r_seconds / f_seconds:.2f} of the full run)"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--folder", default="bench-elt", help="where the data is kept")
    parser.add_argument("--fits", type=int, default=100_000, help="series of the first part")
    parser.add_argument("--large", type=int, default=3_000_000, help="series of the second")
    parser.add_argument("--batch-rows", type=int, default=elt.DEFAULT_BATCH_ROWS)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--skip-fits", action="store_true")
    parser.add_argument("--skip-large", action="store_true")
    parser.add_argument("--skip-refresh", action="store_true")
    parser.add_argument(
        "--changed",
        type=float,
        default=0.02,
        help="share of series changed before the split refresh",
    )
    args = parser.parse_args()
    folder = Path(args.folder)
    folder.mkdir(exist_ok=True)
    if not args.skip_fits:
        fits_in_memory(folder, args.fits, args.repeat)
    if not args.skip_refresh:
        demo_refresh(folder, args.repeat)
        split_refresh(folder, args.fits, args.changed, args.repeat)
    if not args.skip_large:
        large(folder, args.large, args.batch_rows)


if __name__ == "__main__":
    main()
