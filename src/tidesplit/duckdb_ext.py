"""The DuckDB front: Arrow UDFs over batches of series, and the SQL macros over them.

Each UDF (split, profile, outliers, forecast) receives up to 2048 series per call as Arrow
list arrays, decodes them once (``_decode``) and hands them to the same batch path as the
Python API; the macros in ``sql/`` group a table into such lists and unnest the answers
back into rows.
"""

from __future__ import annotations

import inspect
import re
from dataclasses import dataclass
from importlib import resources
from typing import Any

import duckdb
import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

# The answers other than the split (forecast_ahead, series_profile, unusual) are imported by
# their handlers: a plain split, the common first query, needs none of them.
from . import answers, arguments, arrow_lists, calendar, sql_build
from . import effects as effects_front
from .answers import COMPONENTS
from .arguments import SQL_TYPES
from .batch_split import segment_counts
from .errors import ParamError
from .kernel import grid
from .keyed_split import RowsResult, split_rows
from .params import SplitParams
from .status import OK
from .tuning import PARALLEL_POINTS

UDF_NAME = "__tide_split_series"
# The split's columns that only regression effects fill (see _split_handler).
EFFECT_PARTS = ("calendar_effect", "outside_effect", "adjusted_season_only")


def udf_types(udf: str) -> list[tuple[str, str]]:
    """Every parameter of a UDF, with its SQL type: the lead ones, then its arguments."""
    named = [(a.name, SQL_TYPES[a.kind]) for a in sql_build.udf_arguments(udf)]
    return [*sql_build.LEAD, *named]


UDF_ARGS = udf_types(UDF_NAME)  # the split UDF's, which the benchmarks' floor takes too

# One seasonal part per period on every row, as a list of (period, seasonal) structs in
# ascending period. A MAP(period -> part) read more tersely, but DuckDB checks the keys of
# every map it takes in: on 400 hourly series a year long, with the UDF's results cached,
# that took 1.8 s of the 2.6 s the engine spent on them; a list of structs costs about what
# a plain list does.
PART_TYPE = "STRUCT(period BIGINT, seasonal DOUBLE)[]"
PART_ARROW_TYPE = pa.list_(
    pa.list_(pa.struct([("period", pa.int64()), ("seasonal", pa.float64())]))
)
RESULT_TYPE = (
    "STRUCT("
    + "".join(f"{part} DOUBLE[], " for part in COMPONENTS)
    + f"seasonal_by_period {PART_TYPE}[], inserted BOOLEAN[], "
    "time_codes BIGINT[], source BIGINT[], period BIGINT, periods BIGINT[], "
    "season_span BIGINT, trend_span BIGINT, boxcox_lambda DOUBLE, status VARCHAR)"
)


def _column_values(col: pa.Array) -> tuple[bool, Any]:
    """(constant, value): whether every row holds one value, and that value."""
    if col.null_count == len(col):
        return True, None
    if pa.types.is_list(col.type):
        # repr: a list of structs (holidays) holds dicts, which a set cannot
        rows = {None if v is None else repr(v) for v in col.to_pylist()}
        return len(rows) == 1, col[0].as_py()
    return len(pc.unique(col)) == 1, col[0].as_py()


def _constant_arguments(names: list[str], columns: list[pa.Array]) -> dict[str, Any]:
    """The arguments of a call; every series of one query shares them."""
    given = {}
    for name, column in zip(names, columns, strict=True):
        constant, value = _column_values(column)
        if not constant:
            raise ParamError(
                f"{name} must be the same for every series of one query (one value, not a "
                "column); split groups with different settings in separate queries"
            )
        given[name] = value
    return given


def _describe_values(values: np.ndarray, offsets: np.ndarray, i: int) -> str:
    head = values[offsets[i] : min(offsets[i + 1], offsets[i] + 3)]
    shown = ", ".join(f"{v:g}" for v in head)
    more = ", ..." if offsets[i + 1] - offsets[i] > 3 else ""
    return f"[{shown}{more}]"


def _per_row_parts(
    parts: np.ndarray, series_periods: list[tuple[int, ...]], offsets: np.ndarray
) -> pa.Array:
    """One list of (period, seasonal part) per output row, as a list per series."""
    lengths = np.diff(offsets)
    width = parts.shape[0]
    table = np.zeros((len(series_periods), width), dtype=np.int64)
    kept = np.array([len(p) for p in series_periods], dtype=np.int64)
    for s, periods in enumerate(series_periods):
        table[s, : len(periods)] = periods
    if kept.size and (kept == width).all() and (table == table[0]).all():
        # every series split with the same periods (the common case): each row holds them
        # all, in order, so the items are the parts point by point, with no mask
        points = parts.shape[1]
        items = pa.StructArray.from_arrays(
            [
                arrow_lists.fixed_array(np.tile(table[0], points), pa.int64()),
                arrow_lists.fixed_array(np.ascontiguousarray(parts.T).ravel(), pa.float64()),
            ],
            names=["period", "seasonal"],
        )
        row_offsets = np.arange(points + 1, dtype=np.int64) * width
        return arrow_lists.list_array(offsets, arrow_lists.list_array(row_offsets, items))
    row_kept = np.repeat(kept, lengths)
    used = np.arange(width)[None, :] < row_kept[:, None]  # rows x periods
    items = pa.StructArray.from_arrays(
        [
            arrow_lists.fixed_array(np.repeat(table, lengths, axis=0)[used], pa.int64()),
            # a NaN part stays NaN here (not NULL)
            arrow_lists.fixed_array(parts.T[used], pa.float64()),
        ],
        names=["period", "seasonal"],
    )
    row_offsets = np.concatenate(([0], np.cumsum(row_kept)))
    rows = arrow_lists.list_array(row_offsets, items)
    return arrow_lists.list_array(offsets, rows)


@dataclass
class _Call:
    """One UDF call, decoded: the series, their times and the split arguments."""

    values: np.ndarray
    offsets: np.ndarray
    null_rows: np.ndarray
    codes: np.ndarray | None
    kind: str
    zone: str | None
    params: SplitParams
    on_error: str
    fill_gaps: bool
    status: list[str]
    label: Any
    settings: dict[str, Any]  # every argument of the function, defaults filled in
    order: np.ndarray | None = None  # input row of each time-sorted row, when not sorted
    outside: np.ndarray | None = None  # rows x outside columns, time-sorted as values

    def split(self, fill_gaps: bool | None = None) -> RowsResult:
        """Split the time-sorted rows; rows come back in input order, or, on the grid
        (``fill_gaps``), with ``source`` naming input rows."""
        fill = self.fill_gaps if fill_gaps is None else fill_gaps
        result = split_rows(
            self.values,
            self.offsets,
            self.params,
            codes=self.codes,
            kind=self.kind,
            time_zone=self.zone,
            label=self.label,
            status=self.status,
            on_error=self.on_error,
            parallel=self.values.size >= PARALLEL_POINTS,
            fill_gaps=fill,
            effects=effects_front.request(self.settings),
            outside=self.outside,
        )
        if self.order is None:
            return result
        if result.source is not None:
            seen = result.source >= 0
            result.source[seen] = self.order[result.source[seen]]
            return result
        # each array once: without effects, calendar_effect and outside_effect are one
        # array and adjusted_season_only is adjusted; inserted is all false (no fill_gaps)
        # and so the same in any order
        moved_by_id: dict[int, np.ndarray] = {}
        for name in COMPONENTS:
            array = getattr(result, name)
            if id(array) not in moved_by_id:
                moved_by_id[id(array)] = np.empty_like(array)
                grid.place(self.order, array, moved_by_id[id(array)])
            setattr(result, name, moved_by_id[id(array)])
        if result.seasonal_parts is not None:
            parts = np.empty_like(result.seasonal_parts)
            for k in range(parts.shape[0]):
                grid.place(self.order, result.seasonal_parts[k], parts[k])
            result.seasonal_parts = parts
        return result

    def at_input_rows(self, result: RowsResult, grid_values: np.ndarray) -> np.ndarray:
        """Grid values (``fill_gaps`` result) placed at their input rows."""
        seen = result.source >= 0
        out = np.empty(self.values.size, dtype=grid_values.dtype)
        out[result.source[seen]] = grid_values[seen]
        return out


# The SQL types an outside column may hold: numbers, and true/false (as 1 and 0).
_OUTSIDE_TYPE = re.compile(sql_build.NUMBER_TYPES + "|BOOLEAN")


def _field_types(struct_type: str) -> list[str]:
    """The field types of a ``STRUCT(name TYPE, ...)`` type as DuckDB writes it, in order.

    >>> _field_types('STRUCT(v DOUBLE, "a, b" DECIMAL(9,2), p BOOLEAN)')
    ['DOUBLE', 'DECIMAL(9,2)', 'BOOLEAN']
    """
    inner = struct_type[struct_type.index("(") + 1 : struct_type.rindex(")")]
    fields, depth, quoted, start = [], 0, False, 0
    for i, char in enumerate(inner + ","):
        if char == '"':
            quoted = not quoted  # a doubled quote inside a name flips twice
        elif not quoted and char in "()":
            depth += 1 if char == "(" else -1
        elif not quoted and depth == 0 and char == ",":
            fields.append(inner[start:i].strip())
            start = i + 1
    types = []
    for item in fields:
        if item.startswith('"'):
            end = 1
            while True:  # the closing quote is one not doubled
                end = item.index('"', end)
                if item[end + 1 : end + 2] != '"':
                    break
                end += 2
            types.append(item[end + 1 :].strip())
        else:
            types.append(item.split(" ", 1)[1].strip())
    return types


def _outside_values(
    columns: dict[str, pa.Array], names: tuple[str, ...], rows: int, offsets: np.ndarray
) -> np.ndarray:
    """The outside columns per row (rows x columns, NaN for NULL) from the lists the macro
    built (each row: the value, then the outside values); a column of another type than
    numbers or true/false is refused by name."""
    kinds = columns["outside_types"]
    found = kinds[0].as_py() if len(kinds) else None
    if found is not None:
        for name, kind in zip(names, _field_types(found)[1:], strict=True):
            if not _OUTSIDE_TYPE.fullmatch(kind):
                raise ParamError(
                    f"the outside column {name!r} holds {kind}; give numbers or true/false"
                )
    lists = columns["outside_rows"]
    width = len(names) + 1
    if lists.null_count == len(lists) or rows == 0:
        return np.full((rows, len(names)), np.nan)
    row_offsets, row_lists, _ = arrow_lists.list_layout(lists)
    if not np.array_equal(row_offsets, offsets):
        raise ValueError(f"{UDF_NAME}: outside rows and values differ in length")
    item_offsets, items, _ = arrow_lists.list_layout(row_lists)
    if not np.all(np.diff(item_offsets) == width):
        raise ValueError(f"{UDF_NAME}: each outside row must hold {width} values")
    return arrow_lists.float_values(items).reshape(rows, width)[:, 1:]


def _decode(udf: str, columns: dict[str, pa.Array]) -> _Call:
    labels = columns["label"]
    offsets, child, null_rows = arrow_lists.list_layout(columns["values"])
    flat = arrow_lists.float_values(child)
    status = [OK] * len(null_rows)
    for i in np.flatnonzero(null_rows):
        status[i] = "the list of values is NULL"
    time_lists = columns["time_codes"]
    codes = None
    if time_lists.null_count < len(time_lists):
        time_offsets, time_child, _ = arrow_lists.list_layout(time_lists)
        if not np.array_equal(time_offsets, offsets):
            raise ValueError(f"{UDF_NAME}: times and values differ in length")
        codes, time_nulls = arrow_lists.int_values(time_child)
        nulls_per_series = segment_counts(time_nulls, offsets) if time_nulls.any() else []
        for i in np.flatnonzero(nulls_per_series):
            if status[i] == OK:
                status[i] = "a time is NULL"
    order = None
    # DuckDB's list() keeps no order; the lists of one group share one, so we sort here,
    # once, instead of asking for four sorted aggregates
    if codes is not None and codes.size > 1 and not grid.sorted_within(codes, offsets):
        order, codes, flat = grid.sort_within(codes, flat, offsets)
    kinds, zones = columns["time_kind"], columns["time_zone"]
    kind = calendar.time_kind(kinds[0].as_py() if len(kinds) else None)
    zone = zones[0].as_py() if len(zones) else None

    names = [a.name for a in sql_build.udf_arguments(udf)]
    given = _constant_arguments(names, [columns[n] for n in names])
    functions = sql_build.UDFS[udf]
    # the split UDF serves one period and several; a list of periods says which
    function = (
        arguments.SPLIT_MULTI
        if udf == UDF_NAME and given.get("periods") is not None
        else functions[0]
    )
    taken = {a.name for a in arguments.of(function)}
    settings = arguments.accept(
        function, {k: v for k, v in given.items() if v is not None and k in taken}
    )

    outside = None
    if settings.get("outside_columns"):
        outside = _outside_values(columns, settings["outside_columns"], flat.size, offsets)
        if order is not None:
            outside = outside[order]

    def label(i: int) -> str:
        text = labels[i].as_py() if len(labels) else None
        return text if text is not None else _describe_values(flat, offsets, i)

    return _Call(
        flat,
        offsets,
        null_rows,
        codes,
        kind,
        zone,
        SplitParams.from_settings(settings),
        settings["on_error"],
        bool(settings.get("fill_gaps")),
        status,
        label,
        settings,
        order,
        outside,
    )


def _lists(values: np.ndarray, offsets: np.ndarray, arrow_type: pa.DataType) -> pa.Array:
    if arrow_type == pa.float64():
        child = arrow_lists.float_array(values)
    elif arrow_type == pa.int64():
        child = arrow_lists.fixed_array(values, arrow_type)
    elif arrow_type == pa.bool_():
        child = arrow_lists.bool_array(values)
    else:
        child = pa.array(values, type=arrow_type, from_pandas=True)
    return arrow_lists.list_array(offsets, child)


def _split_handler(call: _Call) -> pa.Array:
    result = call.split()
    count = len(call.null_rows)
    out_offsets = result.offsets
    nulls = call.null_rows if call.null_rows.any() else None
    # without effects, their columns travel as NULL lists and the macro fills them in
    # (0, or adjusted): each list of a point per row costs as much to build and unnest as
    # any component, for numbers the macro knows already
    plain = result.batch.coefficients is None
    fields = {
        part: pa.nulls(count, pa.list_(pa.float64()))
        if plain and part in EFFECT_PARTS
        else arrow_lists.float_lists(getattr(result, part), out_offsets, nulls)
        for part in COMPONENTS
    }
    if result.seasonal_parts is not None:
        fields["seasonal_by_period"] = _per_row_parts(
            result.seasonal_parts, result.batch.series_periods, out_offsets
        )
    else:
        fields["seasonal_by_period"] = pa.nulls(count, PART_ARROW_TYPE)
    if call.fill_gaps:
        fields["inserted"] = _lists(result.inserted, out_offsets, pa.bool_())
    else:
        # every row is an input row: the macro reads NULL as false, and no list is built
        fields["inserted"] = pa.nulls(count, pa.list_(pa.bool_()))
    if call.fill_gaps and result.codes is not None:
        fields["time_codes"] = _lists(result.codes, out_offsets, pa.int64())
        # the macro picks each grid row's input row from its series' own list
        own = result.source - np.repeat(call.offsets[:-1], np.diff(out_offsets))
        fields["source"] = _lists(np.where(result.source >= 0, own, -1), out_offsets, pa.int64())
    else:
        fields["time_codes"] = pa.nulls(count, pa.list_(pa.int64()))
        fields["source"] = pa.nulls(count, pa.list_(pa.int64()))
    series = _series_fields(result)
    fields["period"], fields["periods"] = series.pop("period"), series.pop("periods")
    fields.update(_span_fields(result))
    fields.update(series)
    return pa.StructArray.from_arrays(list(fields.values()), names=list(fields))


def _series_fields(result: RowsResult) -> dict[str, pa.Array]:
    """Per-series fields every function returns: period(s), lambda, status."""
    used = result.batch.periods
    if result.batch.series_periods is None:
        kept = (used > 0).astype(np.int64)
        flat = used[used > 0]
    else:
        kept = np.array([len(p) for p in result.batch.series_periods], dtype=np.int64)
        flat = np.array([p for ps in result.batch.series_periods for p in ps], dtype=np.int64)
    period_offsets = np.concatenate(([0], np.cumsum(kept))).astype(np.int64)
    # through buffers (arrow_lists), as every column of the split: pa.array imports pandas
    return {
        "period": arrow_lists.fixed_array(used, pa.int64(), used == 0),
        # NULL for a series left unsplit, as period is
        "periods": arrow_lists.list_array(
            period_offsets, arrow_lists.fixed_array(flat, pa.int64()), used == 0
        ),
        "boxcox_lambda": arrow_lists.float_array(np.asarray(result.batch.lambdas, np.float64)),
        "status": arrow_lists.string_array(list(result.status)),
    }


def _span_fields(result: RowsResult) -> dict[str, pa.Array]:
    """The season and trend span each series was split with (NULL where it was not)."""
    return {
        name: arrow_lists.fixed_array(used, pa.int64(), used < 0)
        for name, used in (
            ("season_span", result.batch.season_spans),
            ("trend_span", result.batch.trend_spans),
        )
    }


_EFFECT_TYPE = pa.list_(
    pa.struct(
        [
            ("name", pa.string()),
            ("coefficient", pa.float64()),
            ("std_error", pa.float64()),
            ("t_value", pa.float64()),
        ]
    )
)


def _effect_lists(
    coefficients: list[list[tuple[str, float, float, float]] | None] | None, count: int
) -> pa.Array:
    """Each series' coefficients as a list of structs (NULL without effects)."""
    if coefficients is None:
        return pa.nulls(count, _EFFECT_TYPE)
    keys = ("name", "coefficient", "std_error", "t_value")
    rows = [
        None if found is None else [dict(zip(keys, row, strict=True)) for row in found]
        for found in coefficients
    ]
    return pa.array(rows, _EFFECT_TYPE, from_pandas=True)


def _profile_handler(call: _Call) -> pa.Array:
    from . import series_profile

    result = call.split(fill_gaps=True)
    found = series_profile.profile(result, call.kind)
    fields: dict[str, pa.Array] = {
        "points": pa.array(found.points, pa.int64()),
        "missing": pa.array(found.missing, pa.int64()),
        "time_step": pa.array(found.step, pa.string()),
    }
    for k, name in enumerate(series_profile.PROFILE_COLUMNS):
        fields[name] = pa.array(found.values[:, k], pa.float64(), from_pandas=True)
    fields["strength_by_period"] = pa.array(
        [
            None if d is None else list(d.items())
            for d in (found.strength_by_period or [None] * len(found.points))
        ],
        pa.map_(pa.int64(), pa.float64()),
    )
    fields["peak_position"] = pa.array(found.peak, pa.int64(), mask=found.peak < 0)
    fields["peak_label"] = pa.array(found.peak_label, pa.string())
    fields["trough_position"] = pa.array(found.trough, pa.int64(), mask=found.trough < 0)
    fields["trough_label"] = pa.array(found.trough_label, pa.string())
    fields["effects"] = _effect_lists(result.batch.coefficients, len(found.points))
    series = _series_fields(result)
    fields["period"], fields["periods"] = series.pop("period"), series.pop("periods")
    fields.update(_span_fields(result))
    fields.update(series)
    return pa.StructArray.from_arrays(list(fields.values()), names=list(fields))


def _audit_handler(call: _Call) -> pa.Array:
    from .crosscheck import audit

    result = call.split(fill_gaps=True)
    found = audit(result, call.params)
    fields = {
        "reference": pa.array(found.reference, pa.string()),
        "points_compared": pa.array(found.compared, pa.int64()),
        "trend_gap": pa.array(found.gaps[:, 0], pa.float64(), from_pandas=True),
        "seasonal_gap": pa.array(found.gaps[:, 1], pa.float64(), from_pandas=True),
        "remainder_gap": pa.array(found.gaps[:, 2], pa.float64(), from_pandas=True),
        "status": pa.array(found.status, pa.string()),
    }
    return pa.StructArray.from_arrays(list(fields.values()), names=list(fields))


def _outlier_handler(call: _Call) -> pa.Array:
    from . import unusual

    result = call.split(fill_gaps=True)
    found = unusual.unusual_points(
        result,
        call.settings["rule"],
        call.settings["threshold"],
        call.settings["significance"],
        call.params,
        parallel=False,
    )
    # back to the input rows (the grid's inserted times have no value to judge)
    offsets = call.offsets
    direction = np.array(found.direction, dtype=object)
    fields = {
        "remainder": _lists(call.at_input_rows(result, found.remainder), offsets, pa.float64()),
        "expected": _lists(call.at_input_rows(result, found.expected), offsets, pa.float64()),
        "score": _lists(call.at_input_rows(result, found.score), offsets, pa.float64()),
        "is_outlier": _lists(call.at_input_rows(result, found.flagged), offsets, pa.bool_()),
        "direction": _lists(call.at_input_rows(result, direction), offsets, pa.string()),
        "weight": _lists(call.at_input_rows(result, result.weight), offsets, pa.float64()),
    }
    fields.update(_series_fields(result))
    return pa.StructArray.from_arrays(list(fields.values()), names=list(fields))


def _forecast_handler(call: _Call) -> pa.Array:
    from . import forecast_ahead

    horizon, level, method = forecast_ahead.forecast_arguments(
        call.settings["steps_ahead"], call.settings["coverage"], call.settings["trend_model"]
    )
    result = call.split(fill_gaps=True)
    ahead = forecast_ahead.forecast(
        result, call.kind, call.zone, horizon, level, method, parallel=False, params=call.params,
        effects=effects_front.request(call.settings),
    )  # fmt: skip
    ok = forecast_ahead.settle_forecast(result, ahead, call.on_error, call.label)
    # steps_ahead rows per series; one row of NULLs beside the status of a series left unsplit
    counts = np.where(ok, horizon, 1)
    offsets = np.concatenate(([0], np.cumsum(counts))).astype(np.int64)
    present = np.repeat(ok, counts)

    def rows(values: np.ndarray | None, arrow_type: pa.DataType) -> pa.Array:
        if values is None:
            return pa.nulls(len(ok), pa.list_(arrow_type))
        out = np.zeros(present.size, dtype=values.dtype)
        out[present] = values
        missing = ~present | np.isnan(out) if out.dtype.kind == "f" else ~present
        child = pa.array(out, arrow_type, mask=missing)
        return pa.ListArray.from_arrays(pa.array(offsets.astype(np.int32)), child)

    fields = {
        "steps_ahead": rows(ahead.step, pa.int64()),
        "time_codes": rows(ahead.codes, pa.int64()),
        "forecast": rows(ahead.point, pa.float64()),
        "low": rows(ahead.lower, pa.float64()),
        "high": rows(ahead.upper, pa.float64()),
    }
    fields.update(_series_fields(result))
    return pa.StructArray.from_arrays(list(fields.values()), names=list(fields))


_SERIES_TYPES = "period BIGINT, periods BIGINT[], boxcox_lambda DOUBLE, status VARCHAR"
UDFS: dict[str, tuple[Any, str]] = {
    UDF_NAME: (_split_handler, RESULT_TYPE),
    "__tide_profile_series": (_profile_handler, answers.struct_type(answers.PROFILE_COLUMNS)),
    "__tide_outlier_series": (
        _outlier_handler,
        "STRUCT(remainder DOUBLE[], expected DOUBLE[], score DOUBLE[], is_outlier BOOLEAN[], "
        f"direction VARCHAR[], weight DOUBLE[], {_SERIES_TYPES})",
    ),
    "__tide_audit_series": (_audit_handler, answers.struct_type(answers.AUDIT_COLUMNS)),
    "__tide_forecast_series": (
        _forecast_handler,
        "STRUCT(steps_ahead BIGINT[], time_codes BIGINT[], forecast DOUBLE[], low DOUBLE[], "
        f"high DOUBLE[], {_SERIES_TYPES})",
    ),
}


def _as_udf(udf: str, handler: Any) -> Any:
    """A Python function of one positional argument per SQL parameter, for DuckDB."""
    names = [n for n, _ in udf_types(udf)]

    def call(*columns: Any) -> pa.Array:
        decoded = _decode(
            udf, {n: arrow_lists.as_array(c) for n, c in zip(names, columns, strict=True)}
        )
        return handler(decoded)

    call.__signature__ = udf_signature(names)  # type: ignore[attr-defined]
    return call


def udf_signature(names: list[str]) -> inspect.Signature:
    """One positional parameter per SQL argument: DuckDB checks a UDF's arity by it."""
    return inspect.Signature(
        [inspect.Parameter(n, inspect.Parameter.POSITIONAL_ONLY) for n in names]
    )


def macro_sql() -> str:
    """The SQL file shipped with the package (written by ``sql_build``)."""
    return resources.files("tidesplit.sql").joinpath("tidesplit.sql").read_text()


def _registered(con: duckdb.DuckDBPyConnection) -> set[str]:
    """Which of our UDFs this connection has already."""
    found = con.execute(
        "SELECT DISTINCT function_name FROM duckdb_functions() WHERE function_name IN "
        f"({', '.join('?' * len(UDFS))})",
        list(UDFS),
    ).fetchall()
    return {row[0] for row in found}


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
    return _register(con, replace=replace, registered=_registered(con))


def _register(
    con: duckdb.DuckDBPyConnection, *, replace: bool, registered: set[str]
) -> duckdb.DuckDBPyConnection:
    for name, (handler, result_type) in UDFS.items():
        present = name in registered
        if present and replace:
            con.remove_function(name)
        if replace or not present:
            con.create_function(
                name,
                _as_udf(name, handler),
                [t for _, t in udf_types(name)],
                result_type,
                type="arrow",
                null_handling="special",
                side_effects=False,
            )
    con.execute(macro_sql())
    return con


def connect(database: str | None = None, **kwargs: Any) -> duckdb.DuckDBPyConnection:
    """A DuckDB connection (in memory unless ``database`` names a file) with tidesplit registered.

    >>> con = connect()
    >>> con.sql("SELECT 1").fetchall()
    [(1,)]
    """
    con = duckdb.connect(database if database is not None else ":memory:", **kwargs)
    if database is None or database == ":memory:":
        # a new in-memory database has none of our UDFs: no need to ask the catalog (a scan
        # of every function, 15 ms). A file may be open on another connection of this
        # process, which shares its UDFs.
        return _register(con, replace=False, registered=set())
    return register(con)
