"""Time tide_split on many monthly series, side by side with statsmodels and the engine floor.

Run:  python benchmarks/bench_split.py [--series 20000] [--points 120] [--subset 400]

Prints one table: our kernel on a prepared batch, our SQL end to end, statsmodels' STL per
series with matched parameters (timed on a subset, scaled to all series), and the same SQL
shape with a UDF that does no work (the engine's floor). Before timing it checks that our
components equal statsmodels' on the subset, so the speed never comes from computing
something else.
"""

from __future__ import annotations

import argparse
import time
from collections.abc import Callable

import numpy as np
import pyarrow as pa
from statsmodels.tsa.seasonal import STL

import tidesplit
from tidesplit import SplitParams, split_batch
from tidesplit.duckdb_ext import RESULT_TYPE, SPLIT_ARGS, UDF_NAME


def make_series(count: int, points: int, period: int, seed: int = 1) -> np.ndarray:
    """Invented monthly series: level, trend, a yearly cycle of varying shape, noise."""
    rng = np.random.default_rng(seed)
    t = np.arange(points)
    level = rng.uniform(50, 500, (count, 1))
    slope = rng.normal(0, 0.5, (count, 1))
    amp = rng.uniform(0.05, 0.4, (count, 1)) * level
    phase = rng.uniform(0, 2 * np.pi, (count, 1))
    cycle = np.sin(2 * np.pi * t / period + phase) + 0.3 * np.cos(4 * np.pi * t / period)
    return level + slope * t + amp * cycle + rng.normal(0, 1, (count, points)) * 0.05 * level


def identity_udf(
    labels: pa.ChunkedArray,
    times: pa.ChunkedArray,
    values: pa.ChunkedArray,
    period: pa.ChunkedArray,
    season_span: pa.ChunkedArray,
    trend_span: pa.ChunkedArray,
    lowpass_span: pa.ChunkedArray,
    season_degree: pa.ChunkedArray,
    trend_degree: pa.ChunkedArray,
    lowpass_degree: pa.ChunkedArray,
    season_jump: pa.ChunkedArray,
    trend_jump: pa.ChunkedArray,
    lowpass_jump: pa.ChunkedArray,
    robust: pa.ChunkedArray,
    inner_loops: pa.ChunkedArray,
    outer_loops: pa.ChunkedArray,
    transform: pa.ChunkedArray,
    boxcox_lambda: pa.ChunkedArray,
    on_error: pa.ChunkedArray,
) -> pa.StructArray:
    """The floor: same arguments and result type as our UDF, values passed straight back."""
    values = values.combine_chunks() if isinstance(values, pa.ChunkedArray) else values
    n = len(values)
    return pa.StructArray.from_arrays(
        [values] * 5 + [pa.nulls(n, pa.float64()), pa.array(["ok"] * n)],
        names=["trend", "seasonal", "remainder", "adjusted", "weight", "boxcox_lambda", "status"],
    )


def best_of(runs: int, fn: Callable[[], object]) -> float:
    times = []
    for _ in range(runs):
        started = time.perf_counter()
        fn()
        times.append(time.perf_counter() - started)
    return min(times)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--series", type=int, default=20_000)
    parser.add_argument("--points", type=int, default=120)
    parser.add_argument("--period", type=int, default=12)
    parser.add_argument("--subset", type=int, default=400, help="series timed in statsmodels")
    parser.add_argument("--runs", type=int, default=3)
    args = parser.parse_args()
    count, points, period = args.series, args.points, args.period

    data = make_series(count, points, period)
    params = SplitParams(period=period)
    resolved = params.resolve()
    matched = dict(
        period=period,
        seasonal=resolved.season_span,
        trend=resolved.trend_span,
        low_pass=resolved.lowpass_span,
        seasonal_deg=resolved.season_degree,
        trend_deg=resolved.trend_degree,
        low_pass_deg=resolved.lowpass_degree,
        seasonal_jump=resolved.season_jump,
        trend_jump=resolved.trend_jump,
        low_pass_jump=resolved.lowpass_jump,
    )
    values = data.ravel()
    offsets = np.arange(0, values.size + 1, points, dtype=np.int64)

    # Correctness first: our components against statsmodels on the subset.
    subset = min(args.subset, count)
    ours = split_batch(values[: subset * points], offsets[: subset + 1], params)
    worst = 0.0
    for i in range(subset):
        fit = STL(data[i], **matched).fit(inner_iter=resolved.inner_loops, outer_iter=0)
        sl = slice(i * points, (i + 1) * points)
        worst = max(
            worst,
            np.abs(ours.trend[sl] - fit.trend).max(),
            np.abs(ours.seasonal[sl] - fit.seasonal).max(),
        )
    assert worst < 1e-8, worst

    kernel = best_of(args.runs, lambda: split_batch(values, offsets, params))
    started = time.perf_counter()
    for i in range(subset):
        STL(data[i], **matched).fit(inner_iter=resolved.inner_loops, outer_iter=0)
    statsmodels_all = (time.perf_counter() - started) / subset * count

    table = pa.table(
        {
            "id": np.repeat(np.arange(count), points),
            "t": np.tile(np.arange(points), count),
            "v": values,
        }
    )
    sql = (
        "CREATE OR REPLACE TABLE out AS SELECT * FROM "
        f"tide_split(series, 'id', 't', 'v', period := {period})"
    )
    con = tidesplit.connect()
    con.register("series_src", table)
    con.execute("CREATE TABLE series AS SELECT * FROM series_src")
    end_to_end = best_of(args.runs, lambda: con.execute(sql))
    assert con.sql("SELECT count(*) FROM out").fetchall()[0][0] == values.size

    floor_con = tidesplit.connect()
    floor_con.remove_function(UDF_NAME)
    floor_con.create_function(
        UDF_NAME,
        identity_udf,
        ["VARCHAR", "BIGINT[]", "DOUBLE[]", "DOUBLE"] + [t for _, t in SPLIT_ARGS],
        RESULT_TYPE,
        type="arrow",
        null_handling="special",
    )
    floor_con.register("series_src", table)
    floor_con.execute("CREATE TABLE series AS SELECT * FROM series_src")
    floor = best_of(args.runs, lambda: floor_con.execute(sql))

    n_points = values.size
    print(
        f"\n{count:,} series x {points} points (period {period}), non-robust, "
        f"defaults of the paper; statsmodels timed on {subset} series and scaled."
    )
    print(f"components equal statsmodels' on the subset: max |difference| {worst:.1e}\n")
    print(f"{'what':<44}{'seconds':>10}{'points/s':>14}{'ratio':>18}")
    rows_out = [
        (
            "tidesplit kernel (split_batch, prepared)",
            kernel,
            f"{statsmodels_all / kernel:,.0f}x faster than statsmodels",
        ),
        (
            "tidesplit SQL end to end (CREATE TABLE AS)",
            end_to_end,
            f"{statsmodels_all / end_to_end:,.0f}x faster than statsmodels",
        ),
        ("statsmodels STL per series (matched)", statsmodels_all, ""),
        (
            "engine floor: same SQL, identity UDF",
            floor,
            f"SQL is {end_to_end / floor:.2f}x the floor",
        ),
    ]
    for name, seconds, note in rows_out:
        print(f"{name:<44}{seconds:>10.3f}{n_points / seconds:>14,.0f}   {note}")


if __name__ == "__main__":
    main()
