"""The split with calendar effects (weekdays, Easter) beside the plain split, in SQL.

    python benchmarks/effects.py                    # 100,000 monthly series x 120 points
    python benchmarks/effects.py --series 20000     # smaller, on a busy machine
    python benchmarks/effects.py --skip-robust      # without the robust queries
    python benchmarks/effects.py --daily 10000      # daily series with holidays and an
                                                    # outside column instead

Each query runs once to warm up (compiles, caches) and is then timed as the best of
``--runs``, in one process on one table, so the plain split is the baseline of the same
run. The data are the suite's invented monthly series (``suite.make_batch``) on monthly
dates from 2010, each series starting in its own month.
"""

from __future__ import annotations

import argparse

import numpy as np
import pyarrow as pa
from suite import Case, best_of, make_batch

import tidesplit

HOLIDAYS = "(SELECT list(struct_pack(day := day, name := name)) FROM chain_days)"
QUERIES = {
    "plain split": "tide_split(series, 'id', 't', 'v')",
    "weekdays": "tide_split(series, 'id', 't', 'v', calendar_effects := 'weekdays')",
    "weekdays, easter": (
        "tide_split(series, 'id', 't', 'v', calendar_effects := 'weekdays, easter')"
    ),
    "plain split, robust": "tide_split(series, 'id', 't', 'v', robust := true)",
    "weekdays, robust": (
        "tide_split(series, 'id', 't', 'v', calendar_effects := 'weekdays', robust := true)"
    ),
}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--series", type=int, default=100_000)
    parser.add_argument("--runs", type=int, default=2, help="best of this many runs")
    parser.add_argument(
        "--skip-robust", action="store_true", help="only the non-robust queries (quicker)"
    )
    parser.add_argument(
        "--daily", type=int, default=0, metavar="SERIES",
        help="time this many invented daily series of two years with holidays and an outside "
        "column instead (the demo's daily takings)",
    )  # fmt: skip
    args = parser.parse_args()
    if args.daily:
        daily(args.daily, args.runs)
        return
    case = Case("monthly", args.series, 120, (12,))
    values, _ = make_batch(case)
    start = np.datetime64("2010-01", "M") + np.arange(case.series) % 12
    months = (start[:, None] + np.arange(case.points)[None, :]).ravel()
    table = pa.table(
        {
            "id": np.repeat(np.arange(case.series), case.points),
            "t": months.astype("datetime64[D]"),
            "v": values,
        }
    )
    con = tidesplit.connect()
    con.register("series_src", table)
    con.execute("CREATE TABLE series AS SELECT * FROM series_src")
    con.unregister("series_src")
    print(f"{case.series:,} monthly series x {case.points} points, best of {args.runs} runs\n")
    baseline = {}
    for name, query in QUERIES.items():
        if args.skip_robust and "robust" in name:
            continue
        sql = f"CREATE OR REPLACE TABLE answer AS SELECT * FROM {query}"
        con.execute(sql)
        seconds = best_of(args.runs, lambda sql=sql: con.execute(sql))
        plain = "robust" if "robust" in name else "plain"
        baseline.setdefault(plain, seconds)
        per_series = seconds / case.series * 1e6
        print(
            f"{name:<22} {seconds:7.2f} s  {per_series:7.1f} us a series  "
            f"{seconds / baseline[plain]:5.2f} x the {plain} split"
        )


DAILY_QUERIES = {
    "plain split": "tide_split(takings, 'shop', 'day', 'takings', transform := 'log')",
    "special_days": (
        "tide_split(takings, 'shop', 'day', 'takings', transform := 'log', "
        f"special_days := {HOLIDAYS})"
    ),
    "holidays, outside": (
        "tide_split(takings, 'shop', 'day', 'takings', transform := 'log', "
        f"special_days := {HOLIDAYS}, outside_columns := ['promotion'])"
    ),
}


def daily(series: int, runs: int) -> None:
    """The demo's daily takings (two years, the chain's holidays and each shop's
    promotions), ``series`` shops, the plain split beside the split with the effects."""
    from tidesplit.examples import retail_chain

    con = tidesplit.connect()
    con.register("takings_src", retail_chain.daily_takings(shops=series, years=2))
    con.execute("CREATE TABLE takings AS SELECT * FROM takings_src")
    con.unregister("takings_src")
    con.register("chain_days", retail_chain.chain_holidays(2021, 2))
    print(f"{series:,} daily series x 730 points, best of {runs} runs\n")
    baseline = None
    for name, query in DAILY_QUERIES.items():
        sql = f"CREATE OR REPLACE TABLE answer AS SELECT * FROM {query}"
        con.execute(sql)
        seconds = best_of(runs, lambda sql=sql: con.execute(sql))
        baseline = baseline or seconds
        print(
            f"{name:<22} {seconds:7.2f} s  {seconds / series * 1e6:7.1f} us a series  "
            f"{seconds / baseline:5.2f} x the plain split"
        )


if __name__ == "__main__":
    main()
