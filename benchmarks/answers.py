"""The answer macros (profile, outliers, forecast) next to the plain split they build on.

    python benchmarks/answers.py              # 20,000 monthly series x 120 points
    python benchmarks/answers.py --series 100000

Each query runs once to warm up (compiles, caches) and is then timed as the best of
``--runs``, all in one process and on one table, so the split is the baseline of the same
run. The data are the suite's invented monthly series (``suite.make_batch``).
"""

from __future__ import annotations

import argparse

import numpy as np
import pyarrow as pa
from suite import Case, best_of, make_batch

import tidesplit

QUERIES = {
    "tide_split": "tide_split(series, 'id', 't', 'v', period := 12)",
    "tide_split robust": "tide_split(series, 'id', 't', 'v', period := 12, robust := true)",
    "tide_profile": "tide_profile(series, 'id', 't', 'v', period := 12)",
    "tide_outliers": "tide_outliers(series, 'id', 't', 'v', period := 12)",
    "tide_forecast": "tide_forecast(series, 'id', 't', 'v', period := 12)",
}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--series", type=int, default=20_000)
    parser.add_argument("--runs", type=int, default=2, help="best of this many runs")
    args = parser.parse_args()
    case = Case("monthly", args.series, 120, (12,))
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
    print(f"{case.series:,} monthly series x {case.points} points, best of {args.runs} runs\n")
    baseline = None
    for name, query in QUERIES.items():
        sql = f"CREATE OR REPLACE TABLE answer AS SELECT * FROM {query}"
        con.execute(sql)
        seconds = best_of(args.runs, lambda sql=sql: con.execute(sql))
        baseline = baseline or seconds
        print(f"{name:<20} {seconds:7.2f} s   {seconds / baseline:5.2f} x tide_split")


if __name__ == "__main__":
    main()
