"""The Spark front (local mode): the same rows and numbers as the DuckDB functions, for every
answer, with keys spread over several buckets and partitions."""

from __future__ import annotations

import inspect
import math
from typing import Any

import numpy as np
import pyarrow as pa
import pytest
from datasets import AIRLINE_PASSENGERS, co2_monthly, elec_equip_monthly, elnino_monthly
from pyspark.errors import PythonException
from pyspark.sql import functions as sf
from pyspark.sql import types as st
from tidesplit.examples import meter_loads, retail_chain

import tidesplit
from tidesplit import answers, arguments
from tidesplit import spark as tide_spark
from tidesplit.errors import ParamError, SplitError

# Equal numbers: the Spark front runs the same batch path as DuckDB's functions, so only the
# order of floating-point work inside one series could differ, and it does not.
TOLERANCE = 1e-12


def same(left: Any, right: Any) -> bool:
    """Equal values, floats to TOLERANCE (relative or absolute), lists, maps and structs
    compared item by item."""
    if isinstance(left, float) and isinstance(right, float):
        if math.isnan(left) or math.isnan(right):
            return math.isnan(left) and math.isnan(right)
        return math.isclose(left, right, rel_tol=TOLERANCE, abs_tol=TOLERANCE)
    if isinstance(left, (list, tuple)) and isinstance(right, (list, tuple)):
        return len(left) == len(right) and all(same(a, b) for a, b in zip(left, right, strict=True))
    if isinstance(left, dict) and isinstance(right, dict):
        return left.keys() == right.keys() and all(same(left[k], right[k]) for k in left)
    return left == right


def assert_same_table(from_spark, from_duckdb, order: list[str]) -> int:
    """Every row and column of the two results equal (after sorting both by ``order``);
    returns the number of rows compared."""
    left: pa.Table = from_spark.toArrow()
    right: pa.Table = from_duckdb.to_arrow_table()
    assert left.column_names == right.column_names
    assert left.num_rows == right.num_rows
    by = [(c, "ascending") for c in order]
    left = left.select(right.column_names).sort_by(by).to_pylist()
    right = right.sort_by(by).to_pylist()
    for row_left, row_right in zip(left, right, strict=True):
        for name, value in row_right.items():
            assert same(row_left[name], value), (name, row_left, row_right)
    return len(right)


@pytest.fixture(scope="module")
def demo_tables(spark):
    weekly = retail_chain.weekly_units(shops=6, products=8, years=3)
    hourly = meter_loads.hourly_loads(meters=6, weeks=4)
    weekly_frame = spark.createDataFrame(weekly)
    # DuckDB's TIMESTAMP has no time zone: its Spark twin is TIMESTAMP_NTZ
    hourly_frame = spark.createDataFrame(hourly).withColumn(
        "reading_at", sf.col("reading_at").cast("timestamp_ntz")
    )
    monthly = retail_chain.monthly_takings(shops=4, years=6)
    monthly_frame = spark.createDataFrame(monthly)
    return {
        "weekly": (weekly, weekly_frame),
        "hourly": (hourly, hourly_frame),
        "monthly": (monthly, monthly_frame),
    }


WEEKLY = ("weekly", ["shop", "product"], "week", "units")
HOURLY = ("hourly", ["meter"], "reading_at", "kwh")
MONTHLY = ("monthly", ["shop"], "month", "takings")
# (table, function, SQL macro, named arguments): every answer, one period and several
DEMO_CASES = [
    (WEEKLY, "split_table", "tide_split", {"period": 52, "robust": True, "transform": "log"}),
    (HOURLY, "split_table", "tide_split_multi", {"periods": [24, 168], "fill_gaps": True}),
    (HOURLY, "split_table", "tide_split", {"fill_gaps": True}),
    (WEEKLY, "profile", "tide_profile", {"period": 52, "transform": "boxcox"}),
    (HOURLY, "profile", "tide_profile", {"periods": []}),
    (WEEKLY, "outliers", "tide_outliers", {"period": 52, "all_rows": True}),
    (HOURLY, "outliers", "tide_outliers", {"rule": "mad", "threshold": 3.5}),
    (WEEKLY, "forecast", "tide_forecast", {"period": 52, "steps_ahead": 4, "transform": "log"}),
    (HOURLY, "forecast", "tide_forecast", {"period": 24, "trend_model": "drift"}),
    (MONTHLY, "profile", "tide_profile", {"calendar_effects": "weekdays", "robust": True}),
]


def sql_arguments(given: dict[str, Any]) -> str:
    def literal(v: Any) -> str:
        if isinstance(v, bool):
            return "true" if v else "false"
        if isinstance(v, str):
            return f"'{v}'"
        if isinstance(v, list):
            return "[" + ", ".join(map(literal, v)) + "]" if v else "[]::BIGINT[]"
        return repr(v)

    return "".join(f", {name} := {literal(v)}" for name, v in given.items())


def run_both(con, spark_frame, arrow_table, case, function, macro, given, **spark_options):
    name, keys, time, value = case
    con.register(name, arrow_table)
    key_list = "[" + ", ".join(f"'{k}'" for k in keys) + "]"
    query = f"SELECT * FROM {macro}({name}, {key_list}, '{time}', '{value}'{sql_arguments(given)})"
    from_duckdb = con.sql(query)
    from_spark = getattr(tide_spark, function)(
        spark_frame, keys, time, value, **given, **spark_options
    )
    order = keys if function == "profile" else [*keys, time]
    return from_spark, from_duckdb, order


@pytest.mark.parametrize(("case", "function", "macro", "given"), DEMO_CASES)
def test_demo_answers_equal_duckdb(con, demo_tables, case, function, macro, given):
    arrow_table, spark_frame = demo_tables[case[0]]
    # three buckets: several keys per call, and calls on both partitions
    from_spark, from_duckdb, order = run_both(
        con, spark_frame, arrow_table, case, function, macro, given, buckets=3
    )
    rows = assert_same_table(from_spark, from_duckdb, order)
    assert rows > 0


def test_forecast_with_two_periods_equals_the_python_front(demo_tables):
    # (compared with the Python front: tide_forecast with periods fails in DuckDB for now)
    arrow_table, spark_frame = demo_tables["hourly"]
    given = {"periods": [24, 168], "trend_model": "drift", "steps_ahead": 30}
    python = tidesplit.forecast(arrow_table, "meter", "reading_at", "kwh", **given)
    python = pa.Table.from_pandas(
        python.sort_values(["meter", "steps_ahead"]), preserve_index=False
    )
    remote = tide_spark.forecast(spark_frame, "meter", "reading_at", "kwh", **given, buckets=2)
    remote = remote.toArrow().sort_by([("meter", "ascending"), ("steps_ahead", "ascending")])
    assert remote.num_rows == python.num_rows == 6 * 30
    for name in ("forecast", "low", "high"):
        np.testing.assert_allclose(
            remote.column(name).to_numpy(), python.column(name).to_numpy(), rtol=TOLERANCE
        )
    assert remote.column("reading_at").to_pylist() == python.column("reading_at").to_pylist()


def open_dataset_table() -> pa.Table:
    """Monthly open datasets as keyed rows with DATE times: electrical equipment orders,
    sea temperatures, CO2 (with months missing) and airline passengers; the keys are
    integers, one of them NULL (NULL keys are a group of their own)."""
    keys, months, values = [], [], []
    for key, series in ((1, elec_equip_monthly()), (2, elnino_monthly()), (3, co2_monthly()),
                        (None, AIRLINE_PASSENGERS.astype(float))):  # fmt: skip
        start = np.datetime64("1990-01", "M")
        keys += [key] * series.size
        months.append((start + np.arange(series.size)).astype("datetime64[D]"))
        values.append(series)
    return pa.table(
        {
            "series": pa.array(keys, type=pa.int64()),
            "month": pa.array(np.concatenate(months), type=pa.date32()),
            "reading": pa.array(np.concatenate(values), from_pandas=True),
        }
    )


@pytest.mark.parametrize(
    ("function", "macro", "given"),
    [
        ("split_table", "tide_split", {"robust": True, "fill_gaps": True}),
        ("profile", "tide_profile", {"transform": "log"}),
        ("outliers", "tide_outliers", {"all_rows": True}),
        ("forecast", "tide_forecast", {"steps_ahead": 6}),
    ],
)
def test_open_datasets_equal_duckdb(con, spark, function, macro, given):
    # statsmodels' elec_equip, elnino, co2 and Box & Jenkins' airline series (tests/datasets.py)
    table = open_dataset_table()
    case = ("open_data", ["series"], "month", "reading")
    from_spark, from_duckdb, order = run_both(
        con, spark.createDataFrame(table), table, case, function, macro, given, buckets=2
    )
    assert assert_same_table(from_spark, from_duckdb, order) > 0


def test_timestamps_are_read_in_the_session_time_zone(con, spark):
    # daily readings at local midnight across the spring and autumn clock changes: a day is
    # 23 or 25 hours there, and the step (a day, period 7) is found only in the local zone
    zone = "America/New_York"
    days = np.arange(np.datetime64("2025-01-01"), np.datetime64("2025-12-31"))
    local = pa.array(days.astype("datetime64[us]"))
    stamps = pa.compute.assume_timezone(local, zone)
    rng = np.random.default_rng(5)
    keep = rng.random(days.size) > 0.05  # some days missing: gaps to fill
    rows = []
    for key in ("east", "west"):
        y = 20 + 3 * np.sin(2 * np.pi * np.arange(days.size) / 7) + rng.normal(0, 0.5, days.size)
        rows.append(pa.table({"site": [key] * int(keep.sum()), "day": stamps.filter(keep),
                              "load": y[keep]}))  # fmt: skip
    table = pa.concat_tables(rows)
    con.execute(f"SET TimeZone = '{zone}'")
    spark.conf.set("spark.sql.session.timeZone", zone)
    try:
        case = ("daily", ["site"], "day", "load")
        from_spark, from_duckdb, order = run_both(
            con, spark.createDataFrame(table), table, case, "split_table", "tide_split",
            {"fill_gaps": True}, buckets=2,
        )  # fmt: skip
        assert assert_same_table(from_spark, from_duckdb, order) == 2 * days.size
        assert set(from_spark.toArrow().column("period").to_pylist()) == {7}
    finally:
        spark.conf.unset("spark.sql.session.timeZone")


def many_keys(rng: np.random.Generator, count: int, length: int) -> pa.Table:
    """``count`` series of ``length`` points, period 12, with one key too short to split."""
    t = np.arange(length)
    cycle = np.sin(2 * np.pi * t / 12)
    values = 50 + 0.1 * t + 5 * cycle + rng.normal(0, 1, (count, length))
    keys = np.repeat([f"k{i:05d}" for i in range(count)], length)
    table = pa.table(
        {"k": keys, "t": np.tile(t, count), "v": values.ravel()},
    )
    short = pa.table({"k": ["short"] * 10, "t": np.arange(10), "v": np.ones(10)})
    return pa.concat_tables([table, short])


def test_many_keys_in_many_buckets_equal_duckdb(con, spark, rng):
    # 2,500 keys: more than one DuckDB UDF call (2,048 rows) and several Spark buckets
    table = many_keys(rng, 2_500, 36)
    frame = spark.createDataFrame(table).repartition(3)
    case = ("many", ["k"], "t", "v")
    given = {"period": 12, "on_error": "keep"}
    from_spark, from_duckdb, order = run_both(
        con, frame, table, case, "split_table", "tide_split", given, series_per_call=600
    )
    assert assert_same_table(from_spark, from_duckdb, order) == table.num_rows
    # every key came back once per row, and the bad one says why
    statuses = from_spark.groupBy("status").count().collect()
    counts = {row["status"]: row["count"] for row in statuses}
    assert counts["ok"] == 2_500 * 36
    assert [s for s in counts if s != "ok"] == [
        "has 10 points; at least two periods (24) are needed"
    ]


def test_bucket_count_spreads_keys(spark):
    sizes = tide_spark.Sizes(keys=2_500, rows=90_000, longest_key=None, longest_points=36)
    assert tide_spark.bucket_count(sizes, parallelism=2, series_per_call=600) == 5
    # the many-keys table with series_per_call=600 lands in five buckets, several keys each
    frame = spark.createDataFrame(many_keys(np.random.default_rng(0), 2_500, 4))
    bucketed = (
        frame.select("k").distinct().withColumn("bucket", tide_spark._bucket_column(["k"], 5))
    )
    per_bucket = [row["count"] for row in bucketed.groupBy("bucket").count().collect()]
    assert len(per_bucket) == 5
    assert min(per_bucket) > 300  # a stable hash spreads the keys about evenly


def test_bad_key_fails_the_job_with_our_message(spark, rng):
    frame = spark.createDataFrame(many_keys(rng, 30, 36))
    result = tide_spark.split_table(frame, "k", "t", "v", period=12, buckets=2)
    with pytest.raises(
        PythonException, match=r"SplitError: series \{'k': 'short'\}: has 10 points"
    ):
        result.collect()
    # integer keys are named as SQL names them ({'k': 7}, not numpy's np.int64(7))
    numbered = frame.withColumn("k", sf.when(sf.col("k") == "short", 7).otherwise(sf.hash("k")))
    result = tide_spark.split_table(numbered, "k", "t", "v", period=12, buckets=2)
    with pytest.raises(PythonException, match=r"SplitError: series \{'k': 7\}: has 10 points"):
        result.collect()


def test_bad_key_is_kept_with_its_status(spark, rng):
    frame = spark.createDataFrame(many_keys(rng, 30, 36))
    for function in ("profile", "forecast"):
        result = getattr(tide_spark, function)(frame, "k", "t", "v", period=12, on_error="keep")
        short = result.where(sf.col("k") == "short").collect()
        assert [row["status"] for row in short] == [
            "has 10 points; at least two periods (24) are needed"
        ]
    assert result.where(sf.col("k") != "short").count() == 30 * 12  # steps_ahead rows per key


def test_key_longer_than_the_limit_is_refused_before_the_kernel(spark, rng):
    frame = spark.createDataFrame(many_keys(rng, 3, 36))
    with pytest.raises(SplitError, match=r"series \{'k': 'k0000\d'\}: has 36 rows, more than "):
        tide_spark.split_table(frame, "k", "t", "v", period=12, points_per_key_limit=35)


def test_executor_checks_the_limit_again():
    # the driver's count may be stale (a live source): each bucket checks before splitting
    table = many_keys(np.random.default_rng(0), 2, 20).filter(pa.compute.field("k") != "short")
    plan = tide_spark._Plan(
        function=arguments.SPLIT,
        keys=("k",),
        time="t",
        value="v",
        given={"period": 4},
        schema=pa.schema([]),
        time_zone="UTC",
        points_per_key_limit=19,
    )
    with pytest.raises(SplitError, match=r"series \{'k': 'k0000[01]'\}: has 20 rows"):
        tide_spark._split_bucket(plan, table)


def test_bad_arguments_fail_on_the_driver(spark):
    frame = spark.createDataFrame([("a", 1, 1.0)], "k string, t long, v double")
    with pytest.raises(ParamError, match="did you mean season_span"):
        tide_spark.split_table(frame, "k", "t", "v", sesonal_span=7)
    with pytest.raises(ParamError, match="transform must be one of"):
        tide_spark.profile(frame, "k", "t", "v", transform="sqrt")
    with pytest.raises(ParamError, match="steps_ahead"):
        tide_spark.forecast(frame, "k", "t", "v", steps_ahead=0)
    with pytest.raises(ParamError, match="the time column t holds string"):
        tide_spark.outliers(frame.withColumn("t", sf.lit("x")), "k", "t", "v")
    with pytest.raises(ParamError, match='"trend" has the name of an output column'):
        tide_spark.split_table(frame.withColumnRenamed("k", "trend"), "trend", "t", "v")
    with pytest.raises(KeyError, match="no value column named w"):
        tide_spark.split_table(frame, "k", "t", "w")
    with pytest.raises(ParamError, match="series_per_call must be at least 1"):
        tide_spark.split_table(frame, "k", "t", "v", series_per_call=0)
    with pytest.raises(ParamError, match="series_per_call or buckets, not both"):
        tide_spark.split_table(frame, "k", "t", "v", series_per_call=10, buckets=2)


def test_signatures_are_the_registry():
    for name, function in (
        ("split_table", "split"),
        ("profile", "profile"),
        ("outliers", "outliers"),
        ("forecast", "forecast"),
    ):
        parameters = inspect.signature(getattr(tide_spark, name)).parameters
        for argument in arguments.of(function):
            assert parameters[argument.name].default == argument.default_in(function)


def test_every_answer_column_has_a_spark_type():
    # the result schemas are read off the answers' SQL types: every one of them must map
    for function, columns in tide_spark._ANSWER_COLUMNS.items():
        for column in columns:
            assert tide_spark.spark_type(column.sql_type) is not None, (function, column)
    # and the Spark columns are the answers' columns, in their order
    fields = [st.StructField("k", st.StringType())]
    time, value = st.StructField("t", st.LongType()), st.StructField("v", st.DoubleType())
    schema = tide_spark._result_schema(arguments.FORECAST, fields, time, value)
    assert schema.fieldNames() == ["k", "t", *answers.FORECAST]


def test_python_front_is_the_same_batch_path(spark):
    # the Spark front calls the Python twins: one of them, on one key, gives the same numbers
    table = many_keys(np.random.default_rng(3), 4, 48).filter(pa.compute.field("k") != "short")
    local = tidesplit.profile(table, "k", "t", "v", period=12).sort_values("k")
    remote = tide_spark.profile(spark.createDataFrame(table), "k", "t", "v", period=12)
    remote = remote.toArrow().sort_by("k").column("strength_of_season").to_numpy()
    np.testing.assert_allclose(remote, local["strength_of_season"], rtol=TOLERANCE)


def test_the_command_line_runs_a_job_on_spark(spark, tmp_path):
    # the same job on DuckDB and on Spark: the same rows and numbers, exit codes alike
    import pyarrow as pa
    import pyarrow.parquet as pq

    from tidesplit import cli

    t = np.arange(48)
    keys = [f"s{k}" for k in range(30)]
    table = pa.table(
        {
            "k": np.repeat([*keys, "short"], [48] * 30 + [5]),
            "t": np.concatenate([np.tile(t, 30), np.arange(5)]),
            "v": np.concatenate(
                [10 + k + np.sin(2 * np.pi * t / 4) + 0.01 * t for k in range(30)] + [np.ones(5)]
            ),
        }
    )
    source = tmp_path / "in.parquet"
    pq.write_table(table, source)
    common = ["--from", str(source), "--key", "k", "--time", "t", "--value", "v"]
    common += ["--period", "4", "--on-error", "keep", "--quiet"]
    on_duckdb = tmp_path / "duckdb.parquet"
    on_spark = tmp_path / "spark.parquet"
    assert cli.main(["split", *common, "--to", str(on_duckdb)]) == 3  # kept a bad key
    assert cli.main(["split", *common, "--to", str(on_spark), "--engine", "spark"]) == 3
    mine = pq.read_table(on_spark).to_pandas().sort_values(["k", "t"]).reset_index(drop=True)
    theirs = pq.read_table(on_duckdb).to_pandas().sort_values(["k", "t"]).reset_index(drop=True)
    assert list(mine.columns) == list(theirs.columns) and len(mine) == len(theirs) == 1445
    for column in ("trend", "seasonal", "remainder"):
        np.testing.assert_allclose(mine[column], theirs[column], rtol=1e-12, atol=1e-12)
    assert (mine["status"] == theirs["status"]).all()
    # a run again replaces the file whole; a database source is refused with exit code 2
    assert cli.main(["split", *common, "--to", str(on_spark), "--engine", "spark"]) == 3
    assert len(pq.read_table(on_spark)) == 1445
    refused = ["split", "--from", str(tmp_path / "w.duckdb") + ":sales", "--to", str(on_spark)]
    refused += ["--key", "k", "--time", "t", "--value", "v", "--engine", "spark", "--quiet"]
    assert cli.main(refused) == 2


def test_calendar_effects_equal_duckdb(con, demo_tables):
    # Spark's buckets and DuckDB's calls group the series differently, so some splits take
    # the linear-map shortcut in one and the loops in the other (equal to about 1e-13); the
    # start of the effects' fit solves a small system from those splits, which carries the
    # difference on to about 1e-11: compared to 1e-9 here
    arrow_table, frame = demo_tables["monthly"]
    from_spark, from_duckdb, order = run_both(
        con, frame, arrow_table, MONTHLY, "split_table", "tide_split",
        {"calendar_effects": "weekdays, easter"},
    )  # fmt: skip
    left = from_spark.toArrow()
    right = from_duckdb.to_arrow_table()
    assert left.column_names == right.column_names
    by = [(c, "ascending") for c in order]
    left, right = left.sort_by(by), right.sort_by(by)
    for name in ("trend", "seasonal", "remainder", "adjusted", "calendar_effect",
                 "adjusted_season_only"):  # fmt: skip
        np.testing.assert_allclose(
            left.column(name).to_numpy(), right.column(name).to_numpy(), rtol=1e-9, atol=1e-9
        )
    assert left.column("status").to_pylist() == right.column("status").to_pylist()


def test_holidays_and_outside_columns_equal_duckdb(spark, con):
    # the demo's daily takings with the chain's holidays and each shop's promotions: the
    # split and the profile's coefficients as DuckDB gives them (daily series of three
    # years take the loops in both, so the numbers are the same to the bit)
    table = retail_chain.daily_takings(shops=5, years=2)
    holidays = retail_chain.chain_holidays(2021, 2)
    con.register("daily", table)
    con.register("chain_days", holidays)
    days = "(SELECT list(struct_pack(day := day, name := name)) FROM chain_days)"
    frame = spark.createDataFrame(table.to_pandas())
    given = {"special_days": holidays.to_pylist(), "outside_columns": ["promotion"]}
    for function, macro, order in (
        ("split_table", "tide_split", ["shop", "day"]),
        ("profile", "tide_profile", ["shop"]),
    ):
        from_duckdb = con.sql(
            f"SELECT * FROM {macro}(daily, 'shop', 'day', 'takings', transform := 'log', "
            f"special_days := {days}, outside_columns := ['promotion'])"
        )
        from_spark = getattr(tide_spark, function)(
            frame, "shop", "day", "takings", transform="log", **given
        )
        assert assert_same_table(from_spark, from_duckdb, order) > 0
    noted = frame.withColumn("note", sf.lit("x"))
    with pytest.raises(ParamError, match="the outside column 'note' holds string"):
        tide_spark.split_table(noted, "shop", "day", "takings", outside_columns=["note"])
