"""The same splits and answers on Spark DataFrames, for fleets beyond one machine.

Each function takes a Spark DataFrame and the key, time, value and named arguments of its SQL
twin (checked on the driver against the one argument registry before any job runs), and
returns a Spark DataFrame with the columns of the same answer (``answers``). The work runs
where the data lives: rows are grouped into *buckets* of many keys (a stable hash of the key
modulo a bucket count chosen from the table's size), and each bucket goes through Arrow to
the Python front (``tidesplit.split_table``, ``profile``, ``outliers``, ``forecast``) in one
call, so that one kernel call splits thousands of series and the numbers are those of the
DuckDB functions. ``import tidesplit`` never loads this module or pyspark; install the extra
(``pip install 'tidesplit[spark]'``), and tidesplit on every executor.

Calling a function runs one quick counting job (keys, rows and the longest key, to size the
buckets and refuse a key longer than ``points_per_key_limit`` before any kernel runs); the
split itself runs when the result is used.
"""

from __future__ import annotations

import dataclasses
import inspect
import math
import os
import re
import sys
import warnings
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
import pyarrow as pa
from pyspark.sql import Column, DataFrame, SparkSession
from pyspark.sql import functions as sf
from pyspark.sql import types as st
from pyspark.sql.pandas.types import to_arrow_schema

from . import answers, api, arguments, forecast_ahead
from .arguments import FORECAST, OUTLIERS, PROFILE, SPLIT, SPLIT_MULTI
from .errors import ParamError, SplitError
from .params import SplitParams

# How many series one kernel call should take (a few thousand: the per-call costs of the
# front, sorting and Arrow conversion are then a small share) and how many rows at most, so
# that a bucket of long series still fits an executor's Python worker comfortably.
SERIES_PER_CALL = 4096
ROWS_PER_CALL = 1_000_000
# Fewer series than this per bucket are not worth a bucket of their own even to use every
# core: the fixed cost of a call (about 10 ms) would outweigh the split.
FEWEST_SERIES_PER_CALL = 256
# The most input rows one key may have. A whole bucket sits in one Python worker's memory
# while it is split; at about 0.5 KB of working memory per point (input, grid, components,
# pandas copies) two million points ask for about 1 GB. Raise it where executors hold more.
POINTS_PER_KEY_LIMIT = 2_000_000
BUCKET = "__tide_bucket"
_NUMPY_SCALAR = re.compile(r"np\.(?:int|uint|float)\d+\(([^()]*)\)")

# Spark needs a result's schema before it sees any data, so the answer columns' types are
# read off their SQL types in ``answers`` (the one definition every front shares).
_SQL_TO_SPARK: dict[str, st.DataType] = {
    "DOUBLE": st.DoubleType(),
    "BIGINT": st.LongType(),
    "VARCHAR": st.StringType(),
    "BOOLEAN": st.BooleanType(),
}


def spark_type(sql_type: str) -> st.DataType:
    """The Spark type of an answer column's SQL type (plain, list, struct or map).

    >>> spark_type("STRUCT(period BIGINT, seasonal DOUBLE)[]").simpleString()
    'array<struct<period:bigint,seasonal:double>>'
    >>> spark_type("MAP(BIGINT, DOUBLE)").simpleString()
    'map<bigint,double>'
    """
    text = sql_type.strip()
    if text.endswith("[]"):
        return st.ArrayType(spark_type(text[:-2]))
    head, _, rest = text.partition("(")
    inner = _top_level_parts(rest[:-1]) if rest else []
    if head.upper() == "STRUCT":
        fields = [part.split(None, 1) for part in inner]
        return st.StructType([st.StructField(n, spark_type(t)) for n, t in fields])
    if head.upper() == "MAP":
        return st.MapType(spark_type(inner[0]), spark_type(inner[1]))
    return _SQL_TO_SPARK[text.upper()]


def _top_level_parts(text: str) -> list[str]:
    """``a BIGINT, b STRUCT(x DOUBLE, y DOUBLE)`` split at its top-level commas."""
    parts, depth, start = [], 0, 0
    for i, char in enumerate(text):
        depth += {"(": 1, ")": -1}.get(char, 0)
        if char == "," and depth == 0:
            parts.append(text[start:i].strip())
            start = i + 1
    return [*parts, text[start:].strip()]


_ANSWER_COLUMNS = {
    SPLIT: answers.SPLIT_COLUMNS,
    SPLIT_MULTI: answers.SPLIT_MULTI_COLUMNS,
    PROFILE: answers.PROFILE_COLUMNS,
    OUTLIERS: answers.OUTLIERS_COLUMNS,
    FORECAST: answers.FORECAST_COLUMNS,
}

_TIME_TYPES = (
    st.ByteType,
    st.ShortType,
    st.IntegerType,
    st.LongType,
    st.DateType,
    st.TimestampType,
    st.TimestampNTZType,
)
_VALUE_TYPES = (st.NumericType,)
_KEY_REFUSED = (st.ArrayType, st.MapType, st.StructType, st.VariantType)


def local_session(cores: int = 2) -> SparkSession:
    """A local Spark session set up for tidesplit (or the active one, if there is one).

    Workers run this very Python (``PYSPARK_PYTHON``), the web UI is off and a shuffle has
    as many partitions as cores. For a cluster, build your own session instead.

    >>> local_session().range(3).count()
    3
    """
    os.environ.setdefault("PYSPARK_PYTHON", sys.executable)
    os.environ.setdefault("PYSPARK_DRIVER_PYTHON", sys.executable)
    return (
        SparkSession.builder.master(f"local[{cores}]")
        .appName("tidesplit")
        .config("spark.ui.enabled", "false")
        .config("spark.ui.showConsoleProgress", "false")
        .config("spark.sql.shuffle.partitions", str(cores))
        .config("spark.sql.execution.arrow.pyspark.enabled", "true")
        .getOrCreate()
    )


@dataclass(frozen=True)
class _Plan:
    """What one bucket call needs: picklable, shipped to the executors with the function."""

    function: str  # SPLIT, SPLIT_MULTI, PROFILE, OUTLIERS or FORECAST
    keys: tuple[str, ...]
    time: str
    value: str
    given: dict[str, Any]  # the named arguments as checked on the driver
    schema: pa.Schema  # of the result
    time_zone: str  # the session's, for TIMESTAMP (with time zone) columns
    points_per_key_limit: int
    outside: tuple[str, ...] = ()  # the outside columns, as the call sees them
    # the real names of the key, time and value columns, by the names the call sees them under
    # (none: the call sees the real names)
    real_names: dict[str, str] = dataclasses.field(default_factory=dict)


@dataclass(frozen=True)
class Sizes:
    """What the counting job found: keys, rows, and the longest key with its rows."""

    keys: int
    rows: int
    longest_key: dict[str, Any] | None
    longest_points: int


def bucket_count(
    sizes: Sizes,
    parallelism: int,
    series_per_call: int = SERIES_PER_CALL,
    rows_per_call: int = ROWS_PER_CALL,
) -> int:
    """How many buckets to spread the keys over.

    Enough that a bucket holds about ``series_per_call`` series and at most about
    ``rows_per_call`` rows, and at least one per core (``parallelism``) once every bucket
    still gets ``FEWEST_SERIES_PER_CALL`` series.

    >>> bucket_count(Sizes(100_000, 12_000_000, None, 120), parallelism=2)
    25
    >>> bucket_count(Sizes(240, 74_880, None, 312), parallelism=2)
    1
    >>> bucket_count(Sizes(600, 74_880, None, 312), parallelism=2)
    2
    """
    by_series = math.ceil(sizes.keys / series_per_call)
    by_rows = math.ceil(sizes.rows / rows_per_call)
    by_cores = min(parallelism, sizes.keys // FEWEST_SERIES_PER_CALL)
    return max(1, by_series, by_rows, by_cores)


def _column(name: str) -> Column:
    """A column by its exact name, whatever characters it holds."""
    return sf.col("`" + name.replace("`", "``") + "`")


def _resolve(frame: DataFrame, name: str, role: str) -> st.StructField:
    """The field a name means (Spark matches names without regard to case)."""
    matches = [f for f in frame.schema.fields if f.name.lower() == name.lower()]
    exact = [f for f in matches if f.name == name]
    if exact or len(matches) == 1:
        return (exact or matches)[0]
    columns = ", ".join(frame.columns)
    raise KeyError(f"no {role} column named {name}; the table has {columns}")


def _check_columns(
    frame: DataFrame, key: str | Sequence[str], time: str, value: str, answer: tuple[str, ...]
) -> tuple[list[st.StructField], st.StructField, st.StructField]:
    names = [key] if isinstance(key, str) else list(key)
    if not names:
        raise ParamError("give at least one key column")
    keys = [_resolve(frame, name, "key") for name in names]
    time_field = _resolve(frame, time, "time")
    value_field = _resolve(frame, value, "value")
    clashes = answers.name_clashes(
        [k.name for k in keys], time_field.name, value_field.name, answer
    )
    if clashes:
        raise ParamError("; ".join(clashes))
    if not isinstance(time_field.dataType, _TIME_TYPES):
        raise ParamError(
            f"the time column {time_field.name} holds {time_field.dataType.simpleString()}; "
            "give integers, DATE, TIMESTAMP or TIMESTAMP_NTZ (cast it first)"
        )
    if not isinstance(value_field.dataType, _VALUE_TYPES):
        raise ParamError(
            f"the value column {value_field.name} holds {value_field.dataType.simpleString()}; "
            "give numbers"
        )
    for field in keys:
        if isinstance(field.dataType, _KEY_REFUSED):
            raise ParamError(
                f"the key column {field.name} holds {field.dataType.simpleString()}; "
                "give columns of plain values (text, numbers, dates)"
            )
    return keys, time_field, value_field


def _result_schema(
    function: str,
    keys: list[st.StructField],
    time: st.StructField,
    value: st.StructField,
) -> st.StructType:
    """The input's key (and time, value) fields, then the answer's columns."""
    lead = {
        SPLIT: [*keys, time, value],
        SPLIT_MULTI: [*keys, time, value],
        PROFILE: keys,
        OUTLIERS: [*keys, time, value],
        FORECAST: [*keys, time],
    }[function]
    fields = [st.StructField(f.name, f.dataType, True) for f in lead]
    fields += [st.StructField(c.name, spark_type(c.sql_type)) for c in _ANSWER_COLUMNS[function]]
    return st.StructType(fields)


def measure(frame: DataFrame, keys: Sequence[str]) -> Sizes:
    """Count the keys and rows of a table and find its longest key (one Spark job).

    >>> spark = local_session()
    >>> table = spark.createDataFrame([("a", 1), ("a", 2), ("b", 1)], "k string, t int")
    >>> measure(table, ["k"])
    Sizes(keys=2, rows=3, longest_key={'k': 'a'}, longest_points=2)
    """
    per_key = frame.groupBy(*[_column(k) for k in keys]).count()
    row = per_key.agg(
        sf.count(sf.lit(1)).alias("keys"),
        sf.sum("count").alias("rows"),
        sf.max_by(sf.struct(*[_column(k) for k in keys]), sf.col("count")).alias("longest"),
        sf.max("count").alias("most"),
    ).first()
    if row is None or not row["keys"]:
        return Sizes(0, 0, None, 0)
    return Sizes(int(row["keys"]), int(row["rows"]), row["longest"].asDict(), int(row["most"]))


def _too_long(label: str, points: int, limit: int) -> SplitError:
    return SplitError(
        f"series {label}: has {points:,} rows, more than points_per_key_limit "
        f"({limit:,}) allows one key to hold in an executor's memory; raise the limit where "
        "executors have the memory for it, or split the key"
    )


def _bucket_column(keys: Sequence[str], buckets: int) -> Column:
    # xxhash64 is Spark's stable hash (a fixed seed, the same on every executor and run)
    return sf.pmod(sf.xxhash64(*[_column(k) for k in keys]), sf.lit(buckets)).cast("int")


def _run(
    function: str,
    frame: DataFrame,
    key: str | Sequence[str],
    time: str,
    value: str,
    period: int | None,
    given: dict[str, Any],
    *,
    series_per_call: int | None,
    buckets: int | None,
    points_per_key_limit: int,
) -> DataFrame:
    given = given if period is None else {"period": period, **given}
    settings = arguments.accept(function, given)  # a bad argument fails before any job
    SplitParams.from_settings(settings).check()
    if function == FORECAST:
        forecast_ahead.forecast_arguments(
            settings["steps_ahead"], settings["coverage"], settings["trend_model"]
        )
    answer = answers.names(_ANSWER_COLUMNS[function])
    key_fields, time_field, value_field = _check_columns(frame, key, time, value, answer)
    keys = [f.name for f in key_fields]
    if series_per_call is not None and buckets is not None:
        raise ParamError("give series_per_call or buckets, not both")
    for name, number in (
        ("series_per_call", series_per_call),
        ("points_per_key_limit", points_per_key_limit),
        ("buckets", buckets),
    ):
        if number is not None and (arguments.whole_number(name, number) or 0) < 1:
            raise ParamError(f"{name} must be at least 1, got {number!r}")
    if isinstance(value_field.dataType, st.DecimalType):
        # the fronts take binary numbers; decimals become doubles, as in the SQL functions
        frame = frame.withColumn(value_field.name, _column(value_field.name).cast("double"))
        value_field = st.StructField(value_field.name, st.DoubleType())
    outside = [_resolve(frame, name, "outside") for name in settings.get("outside_columns") or ()]
    clashes = answers.outside_clashes(keys, time_field.name, value_field.name,
                                      [f.name for f in outside])  # fmt: skip
    if clashes:
        raise ParamError("; ".join(clashes))
    for field in outside:
        if not isinstance(field.dataType, (st.NumericType, st.BooleanType)):
            raise ParamError(
                f"the outside column {field.name!r} holds {field.dataType.simpleString()}; "
                "give numbers or true/false"
            )
        # as the value column: the fronts take binary numbers
        frame = frame.withColumn(field.name, _column(field.name).cast("double"))
    if outside:
        # the columns as the table names them (Spark matched them without regard to case)
        given = {**given, "outside_columns": [f.name for f in outside]}
    wanted = [*keys, time_field.name, value_field.name, *(f.name for f in outside)]
    frame = frame.select(*[_column(c) for c in wanted])

    sizes = measure(frame, keys)
    if sizes.longest_points > points_per_key_limit:
        label = "{" + ", ".join(f"{k!r}: {v!r}" for k, v in sizes.longest_key.items()) + "}"
        raise _too_long(label, sizes.longest_points, points_per_key_limit)

    # Spark's grouped call reads a dot in a column name as a path into a struct, so the call
    # sees the columns under names of our own and the answer takes the real ones back
    real = [*keys, time_field.name, value_field.name, *(f.name for f in outside)]
    inner = [f"__tide_key{i}" for i in range(len(keys))] + ["__tide_time", "__tide_value"]
    inner += [f"__tide_outside{i}" for i in range(len(outside))]
    frame = frame.toDF(*inner)
    outer_schema = _result_schema(function, key_fields, time_field, value_field)
    to_inner = dict(zip(real, inner, strict=True))
    lead = len(outer_schema.fields) - len(_ANSWER_COLUMNS[function])
    schema = st.StructType(
        [
            st.StructField(to_inner[f.name], f.dataType, f.nullable) if i < lead else f
            for i, f in enumerate(outer_schema.fields)
        ]
    )
    keys = inner[: len(keys)]
    value_inner = inner[len(keys) + 1]
    session = frame.sparkSession
    time_zone = session.conf.get("spark.sql.session.timeZone") or "UTC"
    plan = _Plan(
        function=function,
        keys=tuple(keys),
        time=inner[len(keys)],
        value=value_inner,
        outside=tuple(inner[len(keys) + 2 :]),
        given=given,
        schema=to_arrow_schema(schema, timezone="UTC"),  # Spark's Arrow timestamps are UTC
        time_zone=time_zone,
        points_per_key_limit=points_per_key_limit,
        real_names=dict(zip(inner, real, strict=True)),
    )

    def call(table):  # type: ignore[no-untyped-def]
        # no type hints on purpose: pyspark reads them to choose among its call forms and
        # fails on ours; without them it takes the plain table-in, table-out form
        return _split_bucket(plan, table)

    series_per_call = SERIES_PER_CALL if series_per_call is None else series_per_call
    if series_per_call == 1:
        # one call per series: for comparison (benchmarks), never faster
        grouped = frame.groupBy(*[_column(k) for k in keys])
    else:
        count = buckets or bucket_count(
            sizes, session.sparkContext.defaultParallelism, series_per_call=series_per_call
        )
        grouped = frame.withColumn(BUCKET, _bucket_column(keys, count)).groupBy(BUCKET)
    with warnings.catch_warnings():
        # pyspark warns about pandas 3 on every grouped call; our path hands it Arrow only
        warnings.filterwarnings("ignore", "PySpark does not yet fully support pandas")
        answer_frame = grouped.applyInArrow(call, schema)
    return answer_frame.toDF(*[plan.real_names.get(f.name, f.name) for f in schema.fields])


# ---------------------------------------------------------------- on the executors


def _to_pandas(table: pa.Table, plan: _Plan) -> pd.DataFrame:
    """The bucket as the Python fronts take it: integers with NULLs stay integers, and
    timestamps are read in the session's time zone (as DuckDB reads TIMESTAMPTZ in its own)."""
    columns = {}
    for name in [*plan.keys, plan.time, plan.value, *plan.outside]:
        column = table.column(name)
        if pa.types.is_timestamp(column.type) and column.type.tz is not None:
            column = column.cast(pa.timestamp("us", tz=plan.time_zone))
        columns[name] = column

    def integers(kind: pa.DataType) -> Any:
        return pd.Int64Dtype() if pa.types.is_integer(kind) else None

    return pa.table(columns).to_pandas(types_mapper=integers)


def _arrow_column(values: Any, kind: pa.DataType) -> pa.Array:
    """A pandas column as Arrow of the declared type; NaN becomes NULL, as in SQL."""
    if pa.types.is_list(kind):
        items = [None if v is None or (isinstance(v, float) and np.isnan(v)) else list(v)
                 for v in values]  # fmt: skip
        return pa.array(items, type=kind)
    if pa.types.is_map(kind):
        items = [None if not isinstance(v, dict) else sorted(v.items()) for v in values]
        return pa.array(items, type=kind)
    array = pa.array(values, from_pandas=True)
    return array if array.type == kind else array.cast(kind)


def _parts(frame: pd.DataFrame, kind: pa.DataType) -> pa.Array:
    """``seasonal_by_period`` (one {period, seasonal} per period a series used) from the
    Python front's ``seasonal_period_<period>`` columns, built per distinct period list."""
    periods = frame["periods"].to_numpy()
    out: list[Any] = [None] * len(frame)
    lists = pd.Series([tuple(p) if p is not None else None for p in periods])
    for used, rows in lists.groupby(lists, dropna=True).groups.items():
        rows = np.asarray(rows)
        parts = np.column_stack(
            [frame[f"seasonal_period_{p}"].to_numpy(dtype=float)[rows] for p in used]
        )
        for r, values in zip(rows, parts, strict=True):
            out[r] = [
                {"period": p, "seasonal": None if np.isnan(v) else float(v)}
                for p, v in zip(used, values, strict=True)
            ]
    return pa.array(out, type=kind)


def _hold_threads_to_task() -> None:
    """Let the kernel use the cores Spark gave this task (``spark.task.cpus``, 1 unless
    set), not every core of the machine: the executor already runs a task per core, and
    each asking numba for all of them would put cores x cores threads on the machine."""
    from pyspark import TaskContext

    context = TaskContext.get()
    if context is None:
        return
    import numba

    numba.set_num_threads(max(1, min(int(context.cpus()), numba.config.NUMBA_NUM_THREADS)))


def _split_bucket(plan: _Plan, table: pa.Table) -> pa.Table:
    """One bucket of many keys through the Python front of the plan's function."""
    _hold_threads_to_task()
    frame = _to_pandas(table, plan).rename(columns=plan.real_names)
    real = plan.real_names
    keys = [real.get(k, k) for k in plan.keys]
    counts = frame.groupby(keys, dropna=False, sort=False).size()
    if len(counts) and counts.max() > plan.points_per_key_limit:
        # the driver checked this; the data may have changed since (a live source)
        longest = counts.idxmax()
        values = longest if isinstance(longest, tuple) else (longest,)
        label = "{" + ", ".join(f"{k!r}: {v!r}" for k, v in zip(keys, values, strict=True)) + "}"
        raise _too_long(label, int(counts.max()), plan.points_per_key_limit)
    front = {
        SPLIT: api.split_table,
        SPLIT_MULTI: api.split_table,
        PROFILE: api.profile,
        OUTLIERS: api.outliers,
        FORECAST: api.forecast,
    }[plan.function]
    try:
        time, value = real.get(plan.time, plan.time), real.get(plan.value, plan.value)
        result = front(frame, keys, time, value, **plan.given)
    except SplitError as error:
        # name the key as SQL does ({'k': 7}): the front shows numpy's scalars as they
        # print themselves (np.int64(7)), and a bucket's integer keys arrive as such
        raise SplitError(_NUMPY_SCALAR.sub(r"\1", str(error))) from None
    columns = []
    for field in plan.schema:
        name = real.get(field.name, field.name)
        if name == "seasonal_by_period":
            columns.append(_parts(result, field.type))
        elif name == "strength_by_period" and name not in result:
            columns.append(pa.nulls(len(result), field.type))
        else:
            columns.append(_arrow_column(result[name], field.type))
    return pa.Table.from_arrays(columns, schema=plan.schema)


# ---------------------------------------------------------------- the public functions


def split_table(
    frame: DataFrame,
    key: str | Sequence[str],
    time: str,
    value: str,
    period: int | None = None,
    *,
    series_per_call: int | None = None,
    buckets: int | None = None,
    points_per_key_limit: int = POINTS_PER_KEY_LIMIT,
    **given: Any,
) -> DataFrame:
    """Split every series of a Spark DataFrame: the rows and columns of ``tide_split``.

    Parameters
    ----------
    frame : a Spark DataFrame with the key, time and value columns.
    key : one column name or a list of names; NULL key values form a group of their own.
    time : an integer, DATE, TIMESTAMP or TIMESTAMP_NTZ column (TIMESTAMP is read in the
        session's time zone, like TIMESTAMPTZ in DuckDB).
    value : the number to split.
    period, **given : the named arguments of ``tide_split`` (``periods=[...]`` those of
        ``tide_split_multi``, with a ``seasonal_by_period`` column), checked on the driver.
    series_per_call : about how many series one call of the kernel takes (keys are hashed
        into buckets of this size; default ``SERIES_PER_CALL``, 4,096); 1 calls it once
        per key.
    buckets : the number of buckets, instead of ``series_per_call``.
    points_per_key_limit : the most rows one key may have; a longer key fails the call
        before any kernel runs, naming the key.

    Returns
    -------
    A Spark DataFrame, computed when used: the key(s), time and value, then ``trend``,
    ``seasonal``, ``remainder``, ``adjusted``, ``weight``, ``inserted``, ``period``,
    ``season_span`` and ``trend_span`` (or ``periods`` and ``seasonal_by_period``),
    ``boxcox_lambda`` and ``status``.

    Examples
    --------
    >>> spark = local_session()
    >>> rows = [(shop, t, 10.0 + (t % 4) + 0.1 * t) for shop in "ab" for t in range(16)]
    >>> table = spark.createDataFrame(rows, "shop string, week long, units double")
    >>> parts = split_table(table, "shop", "week", "units", period=4)
    >>> parts.count(), parts.columns[3:6]
    (32, ['trend', 'seasonal', 'remainder'])
    """
    function = SPLIT_MULTI if given.get("periods") is not None else SPLIT
    return _run(
        function,
        frame,
        key,
        time,
        value,
        period,
        given,
        series_per_call=series_per_call,
        buckets=buckets,
        points_per_key_limit=points_per_key_limit,
    )


def profile(
    frame: DataFrame,
    key: str | Sequence[str],
    time: str,
    value: str,
    period: int | None = None,
    *,
    series_per_call: int | None = None,
    buckets: int | None = None,
    points_per_key_limit: int = POINTS_PER_KEY_LIMIT,
    **given: Any,
) -> DataFrame:
    """One row per key with the columns of ``tide_profile``; arguments as in ``split_table``.

    Examples
    --------
    >>> spark = local_session()
    >>> rows = [("a", t, 10.0 + (t % 4)) for t in range(16)]
    >>> table = spark.createDataFrame(rows, "k string, t long, v double")
    >>> profile(table, "k", "t", "v", period=4).select("points", "period").first()
    Row(points=16, period=4)
    """
    return _run(
        PROFILE,
        frame,
        key,
        time,
        value,
        period,
        given,
        series_per_call=series_per_call,
        buckets=buckets,
        points_per_key_limit=points_per_key_limit,
    )


def outliers(
    frame: DataFrame,
    key: str | Sequence[str],
    time: str,
    value: str,
    period: int | None = None,
    *,
    series_per_call: int | None = None,
    buckets: int | None = None,
    points_per_key_limit: int = POINTS_PER_KEY_LIMIT,
    **given: Any,
) -> DataFrame:
    """Unusual points with the columns of ``tide_outliers``; arguments as in ``split_table``.

    Examples
    --------
    >>> spark = local_session()
    >>> noise = np.random.default_rng(1).normal(0, 0.1, 120)
    >>> rows = [("a", t, 10.0 + t % 12 / 4 + float(noise[t]) + 5.0 * (t == 30)) for t in range(120)]
    >>> table = spark.createDataFrame(rows, "k string, t long, v double")
    >>> found = outliers(table, "k", "t", "v", period=12)
    >>> found.where("t = 30").select("t", "direction").collect()
    [Row(t=30, direction='high')]
    """
    return _run(
        OUTLIERS,
        frame,
        key,
        time,
        value,
        period,
        given,
        series_per_call=series_per_call,
        buckets=buckets,
        points_per_key_limit=points_per_key_limit,
    )


def forecast(
    frame: DataFrame,
    key: str | Sequence[str],
    time: str,
    value: str,
    period: int | None = None,
    *,
    series_per_call: int | None = None,
    buckets: int | None = None,
    points_per_key_limit: int = POINTS_PER_KEY_LIMIT,
    **given: Any,
) -> DataFrame:
    """Future rows per key with the columns of ``tide_forecast``; arguments as in
    ``split_table``.

    Examples
    --------
    >>> spark = local_session()
    >>> rows = [("a", t, 10.0 + (t % 4) + 0.5 * t) for t in range(24)]
    >>> table = spark.createDataFrame(rows, "k string, t long, v double")
    >>> ahead = forecast(table, "k", "t", "v", period=4, steps_ahead=2, trend_model="drift")
    >>> [row.t for row in ahead.orderBy("t").collect()]
    [24, 25]
    """
    return _run(
        FORECAST,
        frame,
        key,
        time,
        value,
        period,
        given,
        series_per_call=series_per_call,
        buckets=buckets,
        points_per_key_limit=points_per_key_limit,
    )


def _signed(function: Any, *functions: str) -> None:
    """Show the registry's arguments in the function's signature (``help``, completion)."""
    lead = [
        inspect.Parameter(name, inspect.Parameter.POSITIONAL_OR_KEYWORD)
        for name in ("frame", "key", "time", "value")
    ]
    lead.append(inspect.Parameter("period", inspect.Parameter.POSITIONAL_OR_KEYWORD, default=None))
    lead += [
        inspect.Parameter(name, inspect.Parameter.KEYWORD_ONLY, default=default)
        for name, default in (
            ("series_per_call", None),
            ("buckets", None),
            ("points_per_key_limit", POINTS_PER_KEY_LIMIT),
        )
    ]
    function.__signature__ = arguments.signature(functions, lead)


_signed(split_table, SPLIT, SPLIT_MULTI)
_signed(profile, PROFILE)
_signed(outliers, OUTLIERS)
_signed(forecast, FORECAST)
