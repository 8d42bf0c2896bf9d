"""Spans chosen per series (``choose_spans := true``) beside the split with the default spans.

    python benchmarks/spans.py                    # 100,000 monthly series x 120 points
    python benchmarks/spans.py --series 20000     # smaller, for a busy machine
    python benchmarks/spans.py --missing 0.05     # 5% of values missing (the pilot route)
    python benchmarks/spans.py --mixed            # lengths from half to all of --points

Both queries run on one table in one process: each once to warm up (compiles, builds and
caches the linear maps of every candidate pair; its time is printed too), then timed as the
best of ``--runs``. The ratio is the cost of the choice. The data are the suite's invented
monthly series (``suite.make_batch``); the spans chosen are counted at the end.
"""

from __future__ import annotations

import argparse
import os

import numpy as np
import pyarrow as pa
from suite import Case, best_of, make_batch

import tidesplit

QUERIES = {
    "tide_split, default spans": "tide_split(series, 'id', 't', 'v', period := 12)",
    "tide_split, choose_spans": (
        "tide_split(series, 'id', 't', 'v', period := 12, choose_spans := true)"
    ),
}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--series", type=int, default=100_000)
    parser.add_argument("--points", type=int, default=120)
    parser.add_argument("--missing", type=float, default=0.0, help="share of values missing")
    parser.add_argument("--robust", action="store_true")
    parser.add_argument(
        "--mixed",
        action="store_true",
        help="each series keeps its last L points, L drawn from half to all of --points: "
        "many lengths, each with its own linear maps to build on first use",
    )
    parser.add_argument("--runs", type=int, default=2, help="best of this many runs")
    args = parser.parse_args()
    case = Case("monthly", args.series, args.points, (12,), missing=args.missing)
    values, _ = make_batch(case)
    ids = np.repeat(np.arange(case.series), case.points)
    times = np.tile(np.arange(case.points), case.series)
    if args.mixed:
        first = np.random.default_rng(2).integers(0, case.points // 2 + 1, case.series)
        kept = times >= np.repeat(first, case.points)
        ids, times, values = ids[kept], times[kept], values[kept]
    table = pa.table({"id": ids, "t": times, "v": values})
    con = tidesplit.connect()
    con.register("series_src", table)
    con.execute("CREATE TABLE series AS SELECT * FROM series_src")
    con.unregister("series_src")
    extra = ", robust := true" if args.robust else ""
    load = os.getloadavg()[0]
    shape = f"{case.points // 2}-{case.points}" if args.mixed else f"{case.points}"
    print(
        f"{case.series:,} monthly series x {shape} points, {args.missing:.0%} missing"
        f"{', robust' if args.robust else ''}; best of {args.runs} runs; "
        f"load average {load:.2f} on {os.cpu_count()} cores\n"
    )
    baseline = None
    for name, query in QUERIES.items():
        query = query.replace(")", f"{extra})")
        sql = f"CREATE OR REPLACE TABLE answer AS SELECT * FROM {query}"
        first = best_of(1, lambda sql=sql: con.execute(sql))
        seconds = best_of(args.runs, lambda sql=sql: con.execute(sql))
        baseline = baseline or seconds
        print(
            f"{name:<28} {seconds:7.2f} s   {seconds / baseline:5.2f} x the default split   "
            f"(first run, compiling and building the maps: {first:.2f} s)"
        )
    chosen = con.sql(
        "SELECT season_span, trend_span, count(*) AS series FROM "
        "(SELECT DISTINCT id, season_span, trend_span FROM answer) "
        "GROUP BY ALL ORDER BY series DESC LIMIT 5"
    ).fetchall()
    shown = ", ".join(f"({s}, {t}) {c:,}" for s, t, c in chosen)
    print(f"\nmost chosen (season span, trend span) and their series: {shown}")


if __name__ == "__main__":
    main()
