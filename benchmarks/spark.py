"""The Spark front on 1 and 2 local cores, beside the DuckDB functions in the same run.

    python benchmarks/spark.py                      # 100,000 monthly series x 120 points
    python benchmarks/spark.py --series 10000 --per-series 500

For each core count a child process is pinned to that many cores (numba and DuckDB told the
same), reads one Parquet file of invented monthly series (``suite.make_batch``) into DuckDB
and into a cached Spark DataFrame, warms both up, and times the split (written to a table in
DuckDB, to Spark's no-op sink) and the profile. The Spark figure includes the counting job
that sizes the buckets; it is also shown alone, and so is Spark's floor: the same buckets
through ``applyInArrow`` handed straight back, the cost of the engine alone. On the largest
core count it also times the same split with one kernel call per key
(``series_per_call=1``) on the first ``--per-series`` keys, beside the bucketed split of
those keys: what batching keys buys.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path
from typing import Any

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
from suite import Case, make_batch


def write_table(series: int, folder: Path) -> Path:
    case = Case("monthly", series, 120, (12,))
    values, _ = make_batch(case)
    table = pa.table(
        {
            "id": np.repeat(np.arange(case.series), case.points),
            "t": np.tile(np.arange(case.points), case.series),
            "v": values,
        }
    )
    path = folder / "series.parquet"
    pq.write_table(table, path)
    return path


def timed(fn: Any) -> float:
    start = time.perf_counter()
    fn()
    return time.perf_counter() - start


def _hand_back(table):  # type: ignore[no-untyped-def]
    # (no type hints: pyspark chooses its call form from them)
    return table.drop(["__tide_bucket"])


def measure(path: Path, cores: int, per_series: int) -> dict[str, float]:
    """Run in a child pinned to ``cores`` cores."""
    from pyspark.sql import SparkSession
    from pyspark.sql import functions as sf

    import tidesplit
    from tidesplit import spark as tide_spark

    out: dict[str, float] = {}
    con = tidesplit.connect()
    con.execute(f"SET threads = {cores}")
    con.execute(f"CREATE TABLE series AS SELECT * FROM read_parquet('{path}')")
    queries = {
        "split": "tide_split(series, 'id', 't', 'v', period := 12)",
        "profile": "tide_profile(series, 'id', 't', 'v', period := 12)",
    }
    con.execute("CREATE VIEW few AS SELECT * FROM series WHERE id < 100")
    con.execute("CREATE TABLE warm AS SELECT * FROM tide_split(few, 'id', 't', 'v', period := 12)")
    for name, query in queries.items():
        sql = f"CREATE OR REPLACE TABLE answer AS SELECT * FROM {query}"
        out[f"duckdb {name}"] = timed(lambda sql=sql: con.execute(sql))
    con.close()

    os.environ["PYSPARK_PYTHON"] = sys.executable
    spark = (
        SparkSession.builder.master(f"local[{cores}]")
        .config("spark.ui.enabled", "false")
        .config("spark.ui.showConsoleProgress", "false")
        .config("spark.sql.shuffle.partitions", str(cores))
        .config("spark.driver.memory", "6g")
        .getOrCreate()
    )
    spark.sparkContext.setLogLevel("ERROR")
    frame = spark.read.parquet(str(path)).cache()
    frame.count()
    small = frame.where(sf.col("id") < per_series).cache()
    small.count()

    def sink(result: Any) -> None:
        result.write.format("noop").mode("overwrite").save()

    # warm up every worker (Python start, the kernel from numba's cache) and the JVM's code
    few = frame.where(sf.col("id") < 1_000)
    for function in (tide_spark.split_table, tide_spark.profile):
        sink(function(few, "id", "t", "v", period=12, buckets=cores))
    out["spark counting job"] = timed(lambda: tide_spark.measure(frame, ["id"]))
    out["spark split"] = timed(
        lambda: sink(tide_spark.split_table(frame, "id", "t", "v", period=12))
    )
    out["spark profile"] = timed(lambda: sink(tide_spark.profile(frame, "id", "t", "v", period=12)))
    # Spark's floor: the same buckets through applyInArrow, handed straight back
    buckets = tide_spark.bucket_count(tide_spark.measure(frame, ["id"]), cores)
    grouped = frame.withColumn(
        tide_spark.BUCKET, tide_spark._bucket_column(["id"], buckets)
    ).groupBy(tide_spark.BUCKET)
    out["spark floor: buckets handed straight back"] = timed(
        lambda: sink(grouped.applyInArrow(_hand_back, "id long, t long, v double"))
    )
    if per_series:
        out[f"spark split, {per_series:,} keys, buckets"] = timed(
            lambda: sink(tide_spark.split_table(small, "id", "t", "v", period=12))
        )
        out[f"spark split, {per_series:,} keys, one call per key"] = timed(
            lambda: sink(
                tide_spark.split_table(small, "id", "t", "v", period=12, series_per_call=1)
            )
        )
    spark.stop()
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--series", type=int, default=100_000)
    parser.add_argument("--cores", type=int, nargs="+", default=[1, 2])
    parser.add_argument("--per-series", type=int, default=2_000)
    parser.add_argument("--child", type=str, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        cores = args.cores[0]
        print(json.dumps(measure(Path(args.child), cores, args.per_series)))
        return
    with tempfile.TemporaryDirectory() as folder:
        path = write_table(args.series, Path(folder))
        print(f"{args.series:,} monthly series x 120 points ({args.series * 120:,} rows)\n")
        results = {}
        for cores in args.cores:
            env = os.environ | {"NUMBA_NUM_THREADS": str(cores)}
            per_series = args.per_series if cores == max(args.cores) else 0
            command = [sys.executable, __file__, "--child", str(path), "--cores", str(cores),
                       "--per-series", str(per_series)]  # fmt: skip
            pinned = ["taskset", "-c", f"0-{cores - 1}", *command]
            run = subprocess.run(pinned, env=env, capture_output=True, text=True, check=True)
            results[cores] = json.loads(run.stdout.strip().splitlines()[-1])
        names = list(dict.fromkeys(n for r in results.values() for n in r))
        print(f"{'':<44}" + "".join(f"{f'{c} core(s)':>10}  " for c in args.cores))
        for name in names:
            cells = "".join(
                f"{results[c][name]:8.2f} s  " if name in results[c] else f"{'':<12}"
                for c in args.cores
            )
            print(f"{name:<44}{cells}")


if __name__ == "__main__":
    main()
