"""The benchmark suite: our kernel and SQL next to statsmodels and the engine floor.

    python benchmarks/suite.py            # the table of README's Performance section
    python benchmarks/suite.py --quick    # small sizes, a smoke run of every case
    python benchmarks/suite.py --scale    # also 1,000,000 series end to end (minutes)
    python benchmarks/suite.py --start    # also the cold start, warm and cold numba cache
    python benchmarks/suite.py --rounds 3 # SQL and the floors over three rounds, not five
    python benchmarks/suite.py --only hourly --only "100k robust"  # the cases so named
    python benchmarks/suite.py --only "monthly 100k" --exact       # that case alone

Every measurement runs in a fresh process of its own, so its peak memory (max RSS) is its
own. Baselines come from the same run: statsmodels' STL or MSTL per series with matched
parameters (timed on a subset, scaled to all series); the engine floor, the same SQL with a
UDF that hands the values straight back in the same result shape; and the minimal floor,
the least any split must cost (each series' values listed in time order, a UDF that hands
back three lists of their sizes, the rows unnested with key, time, value, trend, seasonal
and remainder), next to our SQL selecting those same columns (DuckDB then leaves the
others out: neither unnested nor stored). Before timing, each case checks that our
components equal statsmodels' to 1e-8 on the subset. The data are invented by
``make_batch``.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np


@dataclass(frozen=True)
class Case:
    name: str
    series: int
    points: int
    periods: tuple[int, ...]
    robust: bool = False
    missing: float = 0.0
    subset: int = 200  # series timed in statsmodels
    options: dict[str, Any] = field(default_factory=dict)
    on_disk: bool = False  # a database file rather than memory (as an ELT job would)

    @property
    def params(self) -> dict[str, Any]:
        base: dict[str, Any] = {"robust": self.robust, **self.options}
        if len(self.periods) == 1:
            return {"period": self.periods[0], **base}
        return {"periods": list(self.periods), **base}


# MSTL in statsmodels shares one set of STL arguments between periods, so the hourly case
# fixes the jumps for both (ours default to a tenth of each span).
HOURLY = {"season_jump": 2, "trend_jump": 5, "lowpass_jump": 3}


def cases(quick: bool) -> list[Case]:
    if quick:
        return [
            Case("monthly 2k", 2_000, 120, (12,), subset=50),
            Case("monthly 2k robust", 2_000, 120, (12,), robust=True, subset=50),
            Case("monthly 2k 5% missing", 2_000, 120, (12,), missing=0.05, subset=0),
            Case("hourly 20 x 2 periods", 20, 24 * 7 * 8, (24, 168), subset=3, options=HOURLY),
        ]
    found = []
    for count in (10_000, 100_000):
        label = f"{count // 1000}k"
        found += [
            Case(f"monthly {label}", count, 120, (12,)),
            Case(f"monthly {label} robust", count, 120, (12,), robust=True),
            Case(f"monthly {label} 5% missing", count, 120, (12,), missing=0.05, subset=0),
            Case(
                f"monthly {label} robust 5% missing",
                count,
                120,
                (12,),
                robust=True,
                missing=0.05,
                subset=0,
            ),
        ]
    found += [
        Case("hourly 1k x 2 periods", 1_000, 8_760, (24, 168), subset=5, options=HOURLY),
        Case(
            "hourly 1k x 2 periods robust",
            1_000,
            8_760,
            (24, 168),
            robust=True,
            subset=3,
            options=HOURLY,
        ),
    ]
    return found


def make_batch(case: Case, seed: int = 1) -> tuple[np.ndarray, np.ndarray]:
    """Invented series: level, trend, one cycle per period, noise; NaN where missing."""
    rng = np.random.default_rng(seed)
    t = np.arange(case.points)
    level = rng.uniform(50, 500, (case.series, 1))
    data = level + rng.normal(0, 0.5, (case.series, 1)) * t
    for period in case.periods:
        phase = rng.uniform(0, 2 * np.pi, (case.series, 1))
        amp = rng.uniform(0.05, 0.3, (case.series, 1)) * level
        data = data + amp * np.sin(2 * np.pi * t / period + phase)
    data += rng.normal(0, 1, data.shape) * 0.05 * level
    if case.missing:
        holes = rng.random(data.shape) < case.missing
        holes[:, :2] = holes[:, -2:] = False
        data[holes] = np.nan
    values = data.ravel()
    offsets = np.arange(0, values.size + 1, case.points, dtype=np.int64)
    return values, offsets


def statsmodels_fit(case: Case, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """statsmodels' STL or MSTL with our resolved parameters; (trend, summed seasonal)."""
    from statsmodels.tsa.seasonal import MSTL, STL

    from tidesplit import SplitParams

    r = SplitParams.from_kwargs(**case.params).resolve()
    shared = dict(
        seasonal_deg=r.season_degree,
        trend_deg=r.trend_degree,
        low_pass_deg=r.lowpass_degree,
        robust=r.robust,
    )
    if len(case.periods) == 1:
        fit = STL(
            y,
            period=r.period,
            seasonal=r.season_span,
            trend=r.trend_span,
            low_pass=r.lowpass_span,
            seasonal_jump=r.season_jump,
            trend_jump=r.trend_jump,
            low_pass_jump=r.lowpass_jump,
            **shared,
        ).fit(inner_iter=r.inner_loops, outer_iter=r.outer_loops)
        return np.asarray(fit.trend), np.asarray(fit.seasonal)
    fit = MSTL(
        y,
        periods=r.periods,
        windows=r.season_spans,
        iterate=r.iterations,
        stl_kwargs={
            **shared,
            "seasonal_jump": HOURLY["season_jump"],
            "trend_jump": HOURLY["trend_jump"],
            "low_pass_jump": HOURLY["lowpass_jump"],
            "inner_iter": r.inner_loops,
            "outer_iter": r.outer_loops,
        },
    ).fit()
    return np.asarray(fit.trend), np.asarray(fit.seasonal).sum(axis=1)


def best_of(runs: int, fn: Callable[[], object]) -> float:
    times = []
    for _ in range(runs):
        started = time.perf_counter()
        fn()
        times.append(time.perf_counter() - started)
    return min(times)


def identity_udf(*columns: Any) -> Any:
    """The engine floor: our UDF's arguments and result, the values handed back as every
    component (and, with several periods, as every period's part), and per series the
    fields ours returns (a period, a list of periods, a status), so that DuckDB converts
    and unnests the same shape."""
    import pyarrow as pa

    from tidesplit.duckdb_ext import PART_ARROW_TYPE, UDF_ARGS

    names = [n for n, _ in UDF_ARGS]
    values = columns[names.index("values")]
    values = values.combine_chunks() if isinstance(values, pa.ChunkedArray) else values
    n = len(values)
    periods = columns[names.index("periods")][0].as_py() or []
    if periods:
        points = len(values.values)
        items = pa.StructArray.from_arrays(
            [
                pa.array(np.tile(np.array(periods, dtype=np.int64), points)),
                pa.array(np.repeat(values.values.to_numpy(zero_copy_only=False), len(periods))),
            ],
            names=["period", "seasonal"],
        )
        rows = pa.ListArray.from_arrays(
            pa.array(np.arange(0, points * len(periods) + 1, len(periods), dtype=np.int32)),
            items,
        )
        parts = pa.ListArray.from_arrays(values.offsets, rows)
    else:
        parts = pa.nulls(n, PART_ARROW_TYPE)
    fields = {
        "trend": values,
        "seasonal": values,
        "remainder": values,
        "adjusted": values,
        "weight": values,
        "seasonal_by_period": parts,
        "inserted": pa.nulls(n, pa.list_(pa.bool_())),
        "time_codes": pa.nulls(n, pa.list_(pa.int64())),
        "source": pa.nulls(n, pa.list_(pa.int64())),
        "period": pa.array(np.full(n, 12, dtype=np.int64)),
        "periods": pa.ListArray.from_arrays(
            pa.array(np.arange(n + 1, dtype=np.int32)), pa.array(np.full(n, 12, np.int64))
        ),
        "boxcox_lambda": pa.nulls(n, pa.float64()),
        "status": pa.array(["ok"] * n),
    }
    return pa.StructArray.from_arrays(list(fields.values()), names=list(fields))


MINIMAL_UDF = "__tide_minimal_floor"


def minimal_udf(values: Any) -> Any:
    """The minimal floor: one list of values per series in, three lists of the same sizes
    out (trend, seasonal, remainder: the values handed back), the least any split's result
    can be."""
    import pyarrow as pa

    values = values.combine_chunks() if isinstance(values, pa.ChunkedArray) else values
    return pa.StructArray.from_arrays(
        [values, values, values], names=["trend", "seasonal", "remainder"]
    )


def minimal_sql() -> str:
    """The least any split costs in SQL: each series' values listed in time order, the
    minimal UDF, and the rows back with the columns users need (key, time, value and the
    three components)."""
    return (
        "CREATE OR REPLACE TABLE out AS SELECT id, unnest(ts) AS t, unnest(vs) AS v, "
        "unnest(p.trend) AS trend, unnest(p.seasonal) AS seasonal, "
        "unnest(p.remainder) AS remainder "
        f"FROM (SELECT id, ts, vs, {MINIMAL_UDF}(vs) AS p FROM (SELECT id, "
        "list(t ORDER BY t) AS ts, list(v::DOUBLE ORDER BY t) AS vs FROM series GROUP BY id))"
    )


# the minimal floor's columns, under our names
MINIMAL_COLUMNS = "id, t, v, trend, seasonal, remainder"


def sql_text(case: Case, columns: str = "*") -> str:
    """Our split of the case's table into ``out``, every column or the ones named."""
    args = ", ".join(
        f"{k} := {str(v).lower() if isinstance(v, bool) else v}" for k, v in case.params.items()
    )
    macro = "tide_split" if len(case.periods) == 1 else "tide_split_multi"
    return (
        f"CREATE OR REPLACE TABLE out AS SELECT {columns} "
        f"FROM {macro}(series, 'id', 't', 'v', {args})"
    )


def measure(case: Case, mode: str, runs: int) -> dict[str, Any]:
    """One measurement in this process: mode kernel, sql, floor, minimal, same_columns (our
    SQL with the minimal floor's columns) or statsmodels."""
    out: dict[str, Any] = {}
    if case.on_disk:
        return measure_on_disk(case, runs)
    values, offsets = make_batch(case)
    if mode == "statsmodels":
        import tidesplit

        subset = min(case.subset, case.series)
        y = values[: subset * case.points].reshape(subset, case.points)
        mine = tidesplit.split_batch(
            values[: subset * case.points],
            offsets[: subset + 1],
            tidesplit.SplitParams.from_kwargs(**case.params),
        )
        statsmodels_fit(case, y[0])  # imports and first-call costs stay out of the timing
        started = time.perf_counter()
        fits = [statsmodels_fit(case, y[i]) for i in range(subset)]
        elapsed = time.perf_counter() - started
        worst = 0.0
        for i, (trend, seasonal) in enumerate(fits):
            sl = slice(i * case.points, (i + 1) * case.points)
            worst = max(
                worst,
                np.abs(mine.trend[sl] - trend).max(),
                np.abs(mine.seasonal[sl] - seasonal).max(),
            )
        out.update(seconds=elapsed / subset * case.series, max_difference=worst)
    elif mode == "kernel":
        import tidesplit

        params = tidesplit.SplitParams.from_kwargs(**case.params)
        tidesplit.split_batch(values[: 50 * case.points], offsets[:51], params)  # compile
        out["seconds"] = best_of(runs, lambda: tidesplit.split_batch(values, offsets, params))
    else:
        import pyarrow as pa

        import tidesplit
        from tidesplit.duckdb_ext import RESULT_TYPE, UDF_ARGS, UDF_NAME, udf_signature

        table = pa.table(
            {
                "id": np.repeat(np.arange(case.series), case.points),
                "t": np.tile(np.arange(case.points), case.series),
                "v": pa.array(values, from_pandas=True),
            }
        )
        del values
        con = tidesplit.connect()
        if mode == "floor":
            identity_udf.__signature__ = udf_signature(  # type: ignore[attr-defined]
                [n for n, _ in UDF_ARGS]
            )
            con.remove_function(UDF_NAME)
            con.create_function(
                UDF_NAME,
                identity_udf,
                [t for _, t in UDF_ARGS],
                RESULT_TYPE,
                type="arrow",
                null_handling="special",
            )
        if mode == "minimal":
            con.create_function(
                MINIMAL_UDF,
                minimal_udf,
                ["DOUBLE[]"],
                "STRUCT(trend DOUBLE[], seasonal DOUBLE[], remainder DOUBLE[])",
                type="arrow",
                null_handling="special",
            )
        con.register("series_src", table)
        con.execute("CREATE TABLE series AS SELECT * FROM series_src")
        con.unregister("series_src")
        del table
        if mode == "minimal":
            sql = minimal_sql()
        elif mode == "same_columns":
            sql = sql_text(case, MINIMAL_COLUMNS)
        else:
            sql = sql_text(case)
        out["seconds"] = best_of(runs, lambda: con.execute(sql))
        rows = con.sql("SELECT count(*) FROM out").fetchall()[0][0]
        assert rows == case.series * case.points, rows
    out["peak_mib"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    return out


def measure_on_disk(case: Case, runs: int) -> dict[str, Any]:
    """The scale run: data made inside DuckDB (so that Python holds none of it), a database
    file, one CREATE TABLE AS; peak memory is the whole process's."""
    import tidesplit

    with tempfile.TemporaryDirectory() as folder:
        con = tidesplit.connect(os.path.join(folder, "scale.duckdb"))
        con.execute(
            f"CREATE TABLE series AS SELECT i // {case.points} AS id, i % {case.points} AS t, "
            f"100 + (i // {case.points}) % 50 + 10 * sin(2 * pi() * (i % {case.periods[0]}) "
            f"/ {case.periods[0]} + i // {case.points}) + 0.1 * (i % {case.points}) "
            f"+ random() AS v FROM range({case.series * case.points}) r(i)"
        )
        seconds = best_of(runs, lambda: con.execute(sql_text(case)))
        rows = con.sql("SELECT count(*) FROM out").fetchall()[0][0]
        assert rows == case.series * case.points, rows
        con.close()
    return {
        "seconds": seconds,
        "peak_mib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
    }


def in_child(case: Case, mode: str, runs: int, env: dict[str, str] | None = None) -> dict:
    spec = json.dumps({**case.__dict__, "mode": mode, "runs": runs})
    done = subprocess.run(
        [sys.executable, __file__, "--child", spec],
        capture_output=True,
        text=True,
        env=env,
        check=False,
    )
    if done.returncode != 0:
        raise RuntimeError(f"{case.name} / {mode} failed:\n{done.stderr[-3000:]}")
    return json.loads(done.stdout.strip().splitlines()[-1])


def cold_start(env_extra: dict[str, str]) -> float:
    code = (
        "import time; t0 = time.perf_counter(); import tidesplit; con = tidesplit.connect(); "
        'con.sql("SELECT tide_split_list(list(v), 12) FROM (SELECT (i % 12)::DOUBLE + i / 10 '
        'AS v FROM range(48) r(i))").fetchall(); print(time.perf_counter() - t0)'
    )
    started = time.perf_counter()
    subprocess.run(
        [sys.executable, "-c", code],
        env={**os.environ, **env_extra},
        check=True,
        capture_output=True,
    )
    return time.perf_counter() - started


def main() -> None:
    parser = argparse.ArgumentParser(description="tidesplit benchmark suite")
    parser.add_argument("--quick", action="store_true", help="small sizes (a smoke run)")
    parser.add_argument("--scale", action="store_true", help="add 1,000,000 x 120 end to end")
    parser.add_argument("--start", action="store_true", help="add the cold-start timings")
    parser.add_argument("--runs", type=int, default=2, help="best of this many runs")
    parser.add_argument(
        "--rounds",
        type=int,
        # five, not three: a full run once had two of three rounds of the plain case come
        # out slow, where sixteen rounds of it alone half an hour later were steady
        default=5,
        help="SQL and floor measured this many times, alternating, in fresh processes; the "
        "median of the rounds is shown, with the spread of SQL / floor",
    )
    parser.add_argument(
        "--only",
        action="append",
        default=[],
        help="run only the cases whose name contains this text (may be given again)",
    )
    parser.add_argument(
        "--exact",
        action="store_true",
        help='--only names whole cases ("monthly 100k" alone, not its robust and missing kin)',
    )
    parser.add_argument("--child", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        spec = json.loads(args.child)
        mode, runs = spec.pop("mode"), spec.pop("runs")
        spec["periods"] = tuple(spec["periods"])
        print(json.dumps(measure(Case(**spec), mode, runs)))
        return

    print(
        f"tidesplit benchmark suite, {os.cpu_count()} cores; seconds are the best of "
        f"{args.runs} runs; SQL, floor, minimal floor and cols (our SQL selecting the "
        f"minimal floor's columns) the median of {args.rounds} alternating rounds, SQL / "
        "floor and cols / minimal floor the medians of the rounds' ratios with their "
        "ranges; statsmodels is timed per series on a subset and scaled.\n"
    )
    header = (
        f"{'case':<34}{'points':>12}{'kernel s':>10}{'SQL s':>9}{'floor s':>9}"
        f"{'statsm. s':>11}{'kernel pts/s':>14}{'x statsm.':>10}{'SQL/floor':>10}"
        f"{'kernel MiB':>11}{'SQL MiB':>9}{'max diff':>10}{'SQL/floor range':>17}"
        f"{'min floor s':>13}{'cols s':>8}{'cols/min floor':>16}{'range':>11}"
    )
    print(header)
    for case in cases(args.quick):
        if args.only and not any(
            part == case.name if args.exact else part in case.name for part in args.only
        ):
            continue
        kernel = in_child(case, "kernel", args.runs)
        # alternating rounds, so that a slow spell of the machine weighs on all alike
        rounds = [
            (
                in_child(case, "sql", args.runs),
                in_child(case, "floor", args.runs),
                in_child(case, "minimal", args.runs),
                in_child(case, "same_columns", args.runs),
            )
            for _ in range(max(1, args.rounds))
        ]
        ratios = sorted(s["seconds"] / f["seconds"] for s, f, _, _ in rounds)
        least_ratios = sorted(c["seconds"] / m["seconds"] for _, _, m, c in rounds)
        middle = len(rounds) // 2
        sql, floor, least, same = (
            sorted((r[k] for r in rounds), key=lambda r: r["seconds"])[middle] for k in range(4)
        )
        ratio_median = ratios[middle]
        least_median = least_ratios[middle]
        reference = in_child(case, "statsmodels", 1) if case.subset else None
        points = case.series * case.points
        ratio = f"{reference['seconds'] / kernel['seconds']:.0f}x" if reference else "-"
        ref_s = f"{reference['seconds']:.1f}" if reference else "-"
        diff = f"{reference['max_difference']:.0e}" if reference else "-"
        if reference:
            assert reference["max_difference"] < 1e-8, (case.name, reference)
        print(
            f"{case.name:<34}{points:>12,}{kernel['seconds']:>10.2f}{sql['seconds']:>9.2f}"
            f"{floor['seconds']:>9.2f}{ref_s:>11}{points / kernel['seconds']:>14,.0f}"
            f"{ratio:>10}{ratio_median:>10.2f}"
            f"{kernel['peak_mib']:>11.0f}{sql['peak_mib']:>9.0f}{diff:>10}"
            f"{f'{ratios[0]:.2f}-{ratios[-1]:.2f}':>17}"
            f"{least['seconds']:>13.2f}{same['seconds']:>8.2f}{least_median:>16.2f}"
            f"{f'{least_ratios[0]:.2f}-{least_ratios[-1]:.2f}':>11}"
        )
    if args.scale:
        big = Case("monthly 1M (scale run)", 1_000_000, 120, (12,), subset=0, on_disk=True)
        sql = in_child(big, "sql", 1)
        print(
            f"\nscale run: {big.series:,} series x {big.points} points end to end in SQL "
            f"into a database file: {sql['seconds']:.1f} s, peak memory "
            f"{sql['peak_mib'] / 1024:.2f} GiB"
        )
    if args.start:
        # best of the runs, like every other figure: the first fresh process after a large
        # case may read the libraries back from disk
        warm = min(cold_start({}) for _ in range(args.runs))
        with tempfile.TemporaryDirectory() as empty:
            cold = cold_start({"NUMBA_CACHE_DIR": empty})
        print(
            f"\nfresh process to first SQL result: {warm:.2f} s with a warm numba cache, "
            f"{cold:.2f} s with an empty one (the first compile)"
        )


if __name__ == "__main__":
    main()
