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

from . import batch
from .decompose import OK, split_batch
from .params import SplitParams

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
    ("on_error", "VARCHAR"),
)

RESULT_TYPE = (
    "STRUCT(trend DOUBLE[], seasonal DOUBLE[], remainder DOUBLE[], adjusted DOUBLE[], "
    "weight DOUBLE[], boxcox_lambda DOUBLE, status VARCHAR)"
)
_PARAM_NAMES = ("period", *(name for name, _ in SPLIT_ARGS[:-1]))


def _param_columns(columns: list[pa.Array]) -> tuple[list[SplitParams], np.ndarray, list[Any]]:
    """Parameter sets of a call: usually one, constant over every row."""
    count = len(columns[0])
    if all(len(pc.unique(col)) <= 1 for col in columns):
        first = [col[0].as_py() if count else None for col in columns]
        return [_params_from_row(first[:-1])], np.zeros(count, dtype=np.int64), [first[-1]]
    rows = list(zip(*(col.to_pylist() for col in columns), strict=True))
    distinct: dict[tuple[Any, ...], int] = {}
    groups = np.array([distinct.setdefault(row, len(distinct)) for row in rows], dtype=np.int64)
    ordered = sorted(distinct, key=distinct.__getitem__)
    return [_params_from_row(list(row[:-1])) for row in ordered], groups, [r[-1] for r in ordered]


def _params_from_row(row: list[Any]) -> SplitParams:
    given = {
        name: value for name, value in zip(_PARAM_NAMES, row, strict=True) if value is not None
    }
    return SplitParams.from_kwargs(**given)


def _describe_values(values: np.ndarray, offsets: np.ndarray, i: int) -> str:
    head = values[offsets[i] : min(offsets[i + 1], offsets[i] + 3)]
    shown = ", ".join(f"{v:g}" for v in head)
    more = ", ..." if offsets[i + 1] - offsets[i] > 3 else ""
    return f"[{shown}{more}]"


def _split_udf(
    labels: Any,
    times: Any,
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
    on_error: Any,
) -> pa.Array:
    params = (
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
        on_error,
    )
    labels = batch.as_array(labels)
    value_lists = batch.as_array(values)
    offsets, child, null_rows = batch.list_layout(value_lists)
    flat = batch.float_values(child)
    count = len(value_lists)
    status = [OK] * count
    for i in np.flatnonzero(null_rows):
        status[i] = "the list of values is NULL"

    time_lists = batch.as_array(times)
    time_codes = None
    if time_lists.null_count < len(time_lists):
        time_offsets, time_child, _ = batch.list_layout(time_lists)
        if not np.array_equal(time_offsets, offsets):
            raise ValueError(f"{UDF_NAME}: times and values differ in length")
        time_codes, time_nulls = batch.int_values(time_child)
        if time_nulls.any():
            from .decompose import segment_counts

            for i in np.flatnonzero(segment_counts(time_nulls, offsets)):
                if status[i] == OK:
                    status[i] = "a time is NULL"

    param_sets, groups, error_modes = _param_columns([batch.as_array(p) for p in params])
    on_error = error_modes[0] or "raise"
    if len(set(error_modes)) > 1:
        on_error = "keep" if all(m == "keep" for m in error_modes) else "raise"

    def label(i: int) -> str:
        text = labels[i].as_py() if len(labels) else None
        return text if text is not None else _describe_values(flat, offsets, i)

    result = split_batch(
        flat,
        offsets,
        param_sets,
        groups,
        label=label,
        times=time_codes,
        status=status,
        on_error=on_error,
        parallel=False,
    )
    nulls = null_rows if null_rows.any() else None
    fields = [
        batch.float_lists(getattr(result, name), offsets, nulls)
        for name in ("trend", "seasonal", "remainder", "adjusted", "weight")
    ]
    fields.append(pa.array(result.lambdas, type=pa.float64(), from_pandas=True))
    fields.append(pa.array(result.status, type=pa.string()))
    names = ["trend", "seasonal", "remainder", "adjusted", "weight", "boxcox_lambda", "status"]
    return pa.StructArray.from_arrays(fields, names=names)


def _macro_sql() -> str:
    text = resources.files("tidesplit").joinpath("sql/tide_split.sql").read_text()
    return (
        text.replace("{split_args}", ", ".join(f"{name} := NULL" for name, _ in SPLIT_ARGS))
        .replace("{split_pass}", ", ".join(name for name, _ in SPLIT_ARGS))
        .replace("{split_named}", ", ".join(f"{name} := {name}" for name, _ in SPLIT_ARGS))
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
        arg_types = ["VARCHAR", "BIGINT[]", "DOUBLE[]", "DOUBLE"] + [t for _, t in SPLIT_ARGS]
        con.create_function(
            UDF_NAME,
            _split_udf,
            arg_types,
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
