"""The DuckDB front: one Arrow UDF that splits a batch of series, and the SQL macros over it.

The UDF receives up to 2048 series per call as Arrow list arrays and hands them to the same
batch path as the Python API; the macros in ``sql/`` group a table into such lists and unnest
the components back to one row per input row.
"""

from __future__ import annotations

from importlib import resources
from typing import Any

import duckdb
import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from . import batch, calendar
from .decompose import OK, segment_counts
from .params import ParamError, SplitParams
from .rows import split_rows

UDF_NAME = "__tide_split_series"

# Every decomposition argument after ``period``, in the order the UDF takes them, with its
# SQL type. The macros are written from this list.
SPLIT_ARGS: tuple[tuple[str, str], ...] = (
    ("season_span", "DOUBLE"),
    ("trend_span", "DOUBLE"),
    ("lowpass_span", "DOUBLE"),
    ("season_degree", "DOUBLE"),
    ("trend_degree", "DOUBLE"),
    ("lowpass_degree", "DOUBLE"),
    ("season_jump", "DOUBLE"),
    ("trend_jump", "DOUBLE"),
    ("lowpass_jump", "DOUBLE"),
    ("robust", "BOOLEAN"),
    ("inner_loops", "DOUBLE"),
    ("outer_loops", "DOUBLE"),
    ("transform", "VARCHAR"),
    ("boxcox_lambda", "DOUBLE"),
    ("fill_gaps", "BOOLEAN"),
    ("on_error", "VARCHAR"),
)
# Arguments of several seasonal periods (tide_split_multi only).
MULTI_ARGS: tuple[tuple[str, str], ...] = (
    ("periods", "DOUBLE[]"),
    ("season_spans", "DOUBLE[]"),
    ("iterations", "DOUBLE"),
)
# What the UDF takes before the decomposition arguments.
LEAD_ARGS: tuple[tuple[str, str], ...] = (
    ("label", "VARCHAR"),
    ("time_codes", "BIGINT[]"),
    ("time_kind", "VARCHAR"),
    ("time_zone", "VARCHAR"),
    ("values", "DOUBLE[]"),
    ("period", "DOUBLE"),
)
UDF_ARGS = LEAD_ARGS + SPLIT_ARGS + MULTI_ARGS

RESULT_TYPE = (
    "STRUCT(trend DOUBLE[], seasonal DOUBLE[], remainder DOUBLE[], adjusted DOUBLE[], "
    "weight DOUBLE[], seasonal_by_period MAP(BIGINT, DOUBLE)[], inserted BOOLEAN[], "
    "time_codes BIGINT[], source BIGINT[], period BIGINT, periods BIGINT[], "
    "boxcox_lambda DOUBLE, status VARCHAR)"
)
_FRONT_ONLY = {"fill_gaps", "on_error"}  # arguments of the call, not of the split


def _column_values(col: pa.Array) -> tuple[bool, list[Any] | Any]:
    """(constant, value): the one value of a constant column, else every row's value."""
    if col.null_count == len(col):
        return True, None
    if pa.types.is_list(col.type):
        rows = [None if v is None else tuple(v) for v in col.to_pylist()]
        return (True, rows[0]) if len(set(rows)) == 1 else (False, rows)
    if len(pc.unique(col)) == 1:
        return True, col[0].as_py()
    return False, col.to_pylist()


def _param_sets(
    names: list[str], columns: list[pa.Array]
) -> tuple[list[dict[str, Any]], np.ndarray]:
    """The distinct argument sets of a call (usually one) and the set of each row."""
    count = len(columns[0])
    found = [_column_values(col) for col in columns]
    if all(constant for constant, _ in found):
        return [dict(zip(names, (v for _, v in found), strict=True))], np.zeros(count, np.int64)
    per_row = [v if not constant else [v] * count for constant, v in found]
    distinct: dict[tuple[Any, ...], int] = {}
    groups = np.array(
        [distinct.setdefault(row, len(distinct)) for row in zip(*per_row, strict=True)],
        dtype=np.int64,
    )
    ordered = sorted(distinct, key=distinct.__getitem__)
    return [dict(zip(names, row, strict=True)) for row in ordered], groups


def _describe_values(values: np.ndarray, offsets: np.ndarray, i: int) -> str:
    head = values[offsets[i] : min(offsets[i + 1], offsets[i] + 3)]
    shown = ", ".join(f"{v:g}" for v in head)
    more = ", ..." if offsets[i + 1] - offsets[i] > 3 else ""
    return f"[{shown}{more}]"


def _per_row_maps(
    parts: np.ndarray, series_periods: list[tuple[int, ...]], offsets: np.ndarray
) -> pa.Array:
    """One MAP(period -> seasonal part) per output row, as a list per series."""
    lengths = np.diff(offsets)
    width = parts.shape[0]
    table = np.zeros((len(series_periods), width), dtype=np.int64)
    kept = np.array([len(p) for p in series_periods], dtype=np.int64)
    for s, periods in enumerate(series_periods):
        table[s, : len(periods)] = periods
    row_kept = np.repeat(kept, lengths)
    used = np.arange(width)[None, :] < row_kept[:, None]  # rows x periods
    keys = np.repeat(table, lengths, axis=0)[used]
    items = parts.T[used]
    map_offsets = np.concatenate(([0], np.cumsum(row_kept))).astype(np.int32)
    maps = pa.MapArray.from_arrays(
        pa.array(map_offsets), pa.array(keys, pa.int64()), pa.array(items, pa.float64())
    )
    return pa.ListArray.from_arrays(pa.array(offsets.astype(np.int32)), maps)


def _split_udf(  # DuckDB passes one argument per SQL parameter, in UDF_ARGS order
    label: Any,
    time_codes: Any,
    time_kind: Any,
    time_zone: Any,
    values: Any,
    period: Any,
    season_span: Any,
    trend_span: Any,
    lowpass_span: Any,
    season_degree: Any,
    trend_degree: Any,
    lowpass_degree: Any,
    season_jump: Any,
    trend_jump: Any,
    lowpass_jump: Any,
    robust: Any,
    inner_loops: Any,
    outer_loops: Any,
    transform: Any,
    boxcox_lambda: Any,
    fill_gaps: Any,
    on_error: Any,
    periods: Any,
    season_spans: Any,
    iterations: Any,
) -> pa.Array:
    labels = batch.as_array(label)
    value_lists = batch.as_array(values)
    offsets, child, null_rows = batch.list_layout(value_lists)
    flat = batch.float_values(child)
    count = len(value_lists)
    status = [OK] * count
    for i in np.flatnonzero(null_rows):
        status[i] = "the list of values is NULL"

    time_lists = batch.as_array(time_codes)
    codes = None
    if time_lists.null_count < len(time_lists):
        time_offsets, time_child, _ = batch.list_layout(time_lists)
        if not np.array_equal(time_offsets, offsets):
            raise ValueError(f"{UDF_NAME}: times and values differ in length")
        codes, time_nulls = batch.int_values(time_child)
        if time_nulls.any():
            for i in np.flatnonzero(segment_counts(time_nulls, offsets)):
                if status[i] == OK:
                    status[i] = "a time is NULL"
    kinds = batch.as_array(time_kind)
    kind = calendar.time_kind(kinds[0].as_py() if len(kinds) else None)
    zones = batch.as_array(time_zone)
    zone = zones[0].as_py() if len(zones) else None

    names = ["period"] + [n for n, _ in SPLIT_ARGS + MULTI_ARGS]
    columns = [
        period,
        season_span,
        trend_span,
        lowpass_span,
        season_degree,
        trend_degree,
        lowpass_degree,
        season_jump,
        trend_jump,
        lowpass_jump,
        robust,
        inner_loops,
        outer_loops,
        transform,
        boxcox_lambda,
        fill_gaps,
        on_error,
        periods,
        season_spans,
        iterations,
    ]
    sets, _ = _param_sets(names, [batch.as_array(c) for c in columns])
    if len(sets) > 1:
        # rare: arguments that vary from row to row; split each group on its own
        raise ParamError("arguments must be the same for every series of one query")
    given = sets[0]
    mode = given.pop("on_error") or "raise"
    fill = bool(given.pop("fill_gaps"))
    split_params = SplitParams.from_kwargs(**{k: v for k, v in given.items() if v is not None})
    if given.get("periods") == ():
        split_params = SplitParams.from_kwargs(
            **{k: v for k, v in given.items() if v is not None and k != "periods"}, periods=()
        )

    def name(i: int) -> str:
        text = labels[i].as_py() if len(labels) else None
        return text if text is not None else _describe_values(flat, offsets, i)

    result = split_rows(
        flat,
        offsets,
        split_params,
        codes=codes,
        kind=kind,
        time_zone=zone,
        label=name,
        status=status,
        on_error=mode,
        parallel=False,
        fill_gaps=fill,
    )
    out_offsets = result.offsets
    nulls = null_rows if null_rows.any() else None
    fields = {
        part: batch.float_lists(getattr(result, part), out_offsets, nulls)
        for part in ("trend", "seasonal", "remainder", "adjusted", "weight")
    }
    if result.seasonal_parts is not None:
        fields["seasonal_by_period"] = _per_row_maps(
            result.seasonal_parts, result.batch.series_periods, out_offsets
        )
    else:
        fields["seasonal_by_period"] = pa.nulls(count, pa.list_(pa.map_(pa.int64(), pa.float64())))
    offsets32 = pa.array(out_offsets.astype(np.int32))
    fields["inserted"] = pa.ListArray.from_arrays(offsets32, pa.array(result.inserted))
    if fill and result.codes is not None:
        fields["time_codes"] = pa.ListArray.from_arrays(offsets32, pa.array(result.codes))
        fields["source"] = pa.ListArray.from_arrays(offsets32, pa.array(result.source))
    else:
        fields["time_codes"] = pa.nulls(count, pa.list_(pa.int64()))
        fields["source"] = pa.nulls(count, pa.list_(pa.int64()))
    used = result.batch.periods
    fields["period"] = pa.array(np.where(used > 0, used, 0), mask=used == 0)
    series_periods = result.batch.series_periods or [(int(p),) if p else () for p in used]
    fields["periods"] = pa.array([list(p) for p in series_periods], pa.list_(pa.int64()))
    fields["boxcox_lambda"] = pa.array(result.batch.lambdas, type=pa.float64(), from_pandas=True)
    fields["status"] = pa.array(result.status, type=pa.string())
    return pa.StructArray.from_arrays(list(fields.values()), names=list(fields))


def _macro_sql() -> str:
    text = resources.files("tidesplit").joinpath("sql/tide_split.sql").read_text()
    return (
        text.replace("{split_args}", ", ".join(f"{name} := NULL" for name, _ in SPLIT_ARGS))
        .replace("{split_pass}", ", ".join(name for name, _ in SPLIT_ARGS))
        .replace("{split_named}", ", ".join(f"{name} := {name}" for name, _ in SPLIT_ARGS))
        .replace("{multi_args}", ", ".join(f"{name} := NULL" for name, _ in MULTI_ARGS))
        .replace("{multi_pass}", ", ".join(name for name, _ in MULTI_ARGS))
        .replace("{multi_named}", ", ".join(f"{name} := {name}" for name, _ in MULTI_ARGS))
    )


def _has_udf(con: duckdb.DuckDBPyConnection) -> bool:
    found = con.execute(
        "SELECT count(*) FROM duckdb_functions() WHERE function_name = ?", [UDF_NAME]
    ).fetchall()
    return bool(found[0][0])


def register(con: duckdb.DuckDBPyConnection, *, replace: bool = False) -> duckdb.DuckDBPyConnection:
    """Make the ``tide_*`` SQL functions available on ``con``; safe to call again.

    Parameters
    ----------
    con : an open DuckDB connection.
    replace : re-create the UDF even if this connection already has it.

    Examples
    --------
    >>> import duckdb
    >>> con = register(duckdb.connect())
    >>> sql = "SELECT len(tide_split_list([1, 3, 2, 4, 1, 3, 2, 4]::DOUBLE[], 2).trend)"
    >>> con.sql(sql).fetchall()
    [(8,)]
    """
    if replace and _has_udf(con):
        con.remove_function(UDF_NAME)
    if replace or not _has_udf(con):
        con.create_function(
            UDF_NAME,
            _split_udf,
            [t for _, t in UDF_ARGS],
            RESULT_TYPE,
            type="arrow",
            null_handling="special",
            side_effects=False,
        )
    con.execute(_macro_sql())
    return con


def connect(database: str | None = None, **kwargs: Any) -> duckdb.DuckDBPyConnection:
    """A DuckDB connection (in memory unless ``database`` names a file) with tidesplit registered.

    >>> con = connect()
    >>> con.sql("SELECT 1").fetchall()
    [(1,)]
    """
    return register(duckdb.connect(database if database is not None else ":memory:", **kwargs))
