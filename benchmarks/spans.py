"""Spans chosen per series (``choose_spans := true``) beside the split with the default spans.

    python benchmarks/spans.py                    # 100,000 monthly series x 120 points
    python benchmarks/spans.py --series 20000     # smaller, for a busy machine
    python benchmarks/spans.py --missing 0.05     # 5% of values missing (the pilot route)

Both queries run on one table in one process: each once to warm up (compiles, builds and
caches the linear maps of every candidate pair), then timed as the best of ``--runs``. The
ratio is the cost of the choice. The data are the suite's invented monthly series
(``suite.make_batch``); the spans chosen are counted at the end.
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
    parser.add_argument("--runs", type=int, default=2, help="best of this many runs")
    args = parser.parse_args()
    case = Case("monthly", args.series, args.points, (12,), missing=args.missing)
    values, _ = make_batch(case)
    table = pa.table(
        {
            "id": np.repeat(np.arange(case.series), case.points),
            "t": np.tile(np.arange(case.points), case.series),
            "v": values,
        }
    )
    con = tidesplit.connect()
    con.register("series_src", table)
    con.execute("CREATE TABLE series AS SELECT * FROM series_src")
    con.unregister("series_src")
    extra = ", robust := true" if args.robust else ""
    load = os.getloadavg()[0]
    print(
        f"{case.series:,} monthly series x {case.points} points, {args.missing:.0%} missing"
        f"{', robust' if args.robust else ''}; best of {args.runs} runs; "
        f"load average {load:.2f} on {os.cpu_count()} cores\n"
    )
    baseline = None
    for name, query in QUERIES.items():
        query = query.replace(")", f"{extra})")
        sql = f"CREATE OR REPLACE TABLE answer AS SELECT * FROM {query}"
        con.execute(sql)
        seconds = best_of(args.runs, lambda sql=sql: con.execute(sql))
        baseline = baseline or seconds
        print(f"{name:<28} {seconds:7.2f} s   {seconds / baseline:5.2f} x the default split")
    chosen = con.sql(
        "SELECT season_span, trend_span, count(*) AS series FROM "
        "(SELECT DISTINCT id, season_span, trend_span FROM answer) "
        "GROUP BY ALL ORDER BY series DESC LIMIT 5"
    ).fetchall()
    shown = ", ".join(f"({s}, {t}) {c:,}" for s, t, c in chosen)
    print(f"\nmost chosen (season span, trend span) and their series: {shown}")


if __name__ == "__main__":
    main()
