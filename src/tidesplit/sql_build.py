"""Writes the SQL macros from the argument registry and the answers' columns.

What ships is plain SQL (``sql/tidesplit.sql`` at the top of the repository, package data
``tidesplit/sql/tidesplit.sql``), which a reader can read and run; this module is the one
place it is written from, so that an argument or a column is added in one place. A test
keeps the shipped file equal to ``render()``; after changing either, run::

    python -m tidesplit.sql_build > sql/tidesplit.sql
"""

from __future__ import annotations

from . import answers
from .arguments import (
    AUDIT,
    DAY_LIST,
    FLAG,
    FORECAST,
    NAME_LIST,
    NUMBER,
    NUMBER_LIST,
    OUTLIERS,
    PROFILE,
    REGISTRY,
    SPLIT,
    SPLIT_LIST,
    SPLIT_MULTI,
    SQL_TYPES,
    TEXT,
    WHOLE,
    WHOLE_LIST,
    Argument,
    of,
)
from .calendar import INFINITE_TIME_CODE

# What every UDF takes before the named arguments: the key as text (for messages), the
# times as codes, the time column's type, the session's time zone and the values.
LEAD = (
    ("label", "VARCHAR"),
    ("time_codes", "BIGINT[]"),
    ("time_kind", "VARCHAR"),
    ("time_zone", "VARCHAR"),
    ("values", "DOUBLE[]"),
    # with outside_columns: per row the value and then each outside column, as DOUBLE
    # (NULL without), and the type of the columns as they were, for the UDF to check
    ("outside_rows", "DOUBLE[][]"),
    ("outside_types", "VARCHAR"),
)
# Each UDF and the functions it serves.
UDFS = {
    "__tide_split_series": (SPLIT, SPLIT_MULTI, SPLIT_LIST),
    "__tide_profile_series": (PROFILE,),
    "__tide_outlier_series": (OUTLIERS,),
    "__tide_forecast_series": (FORECAST,),
    "__tide_audit_series": (AUDIT,),
}
UDF_OF = {f: udf for udf, functions in UDFS.items() for f in functions}

# The macro that checks an argument of each kind by DuckDB's typeof(): the UDF's declared
# types would otherwise cast 'yes' to true or '12' to 12 without a word.
_CHECK_MACRO = {
    WHOLE: "__tide_check_number",
    NUMBER: "__tide_check_number",
    FLAG: "__tide_check_flag",
    TEXT: "__tide_check_text",
    WHOLE_LIST: "__tide_check_numbers",
    NUMBER_LIST: "__tide_check_numbers",
    NAME_LIST: "__tide_check_names",
    DAY_LIST: "__tide_check_days",
}
NUMBER_TYPES = r"U?(TINYINT|SMALLINT|INTEGER|BIGINT|HUGEINT)|FLOAT|DOUBLE|DECIMAL\(\d+,\d+\)"
_KIND_CHECKS = "\n".join(
    f"CREATE OR REPLACE TEMP MACRO {macro}(name, x) AS\n"
    f"    CASE WHEN NOT regexp_full_match(typeof(x), '{pattern}')\n"
    f"         THEN name || ' must be {wanted}, got ' || typeof(x) || ' ' || CAST(x AS VARCHAR) END;"
    for macro, pattern, wanted in (
        ("__tide_check_number", f'^({NUMBER_TYPES}|"NULL")$', "a number"),
        ("__tide_check_flag", '^(BOOLEAN|"NULL")$', "true or false"),
        ("__tide_check_text", '^(VARCHAR|"NULL")$', "text"),
        (
            "__tide_check_numbers",
            f'^((({NUMBER_TYPES})|"NULL")\\[\\]|"NULL")$',
            "a list of numbers",
        ),
        ("__tide_check_names", '^((VARCHAR|"NULL")\\[\\]|"NULL")$', "a list of column names"),
        (
            "__tide_check_days",
            '^(STRUCT\\("day" DATE, "name" VARCHAR\\)\\[\\]|"NULL"\\[\\]|"NULL")$',
            "a list of {day DATE, name VARCHAR}",
        ),
    )
)


# Time column types refused, each with a message that names what to give instead.
_TIME_REFUSALS = (
    ("VARCHAR", "the time column holds text; give integers, DATE, TIMESTAMP or TIMESTAMPTZ "
     "(CAST it first)"),
    ("DOUBLE", "the time column holds fractional numbers; give integers, DATE, TIMESTAMP or "
     "TIMESTAMPTZ"),
    ("HUGEINT", "the time column holds integers wider than BIGINT; give BIGINT, DATE, "
     "TIMESTAMP or TIMESTAMPTZ"),
    ("TIME", "the time column holds times of day without a date; give DATE, TIMESTAMP or "
     "TIMESTAMPTZ"),
    ("INTERVAL", "the time column holds intervals; give integers, DATE, TIMESTAMP or "
     "TIMESTAMPTZ"),
    ("BOOLEAN", "the time column holds true/false; give integers, DATE, TIMESTAMP or "
     "TIMESTAMPTZ"),
)  # fmt: skip


def _time_refusals(lead: str, named: bool) -> str:
    """One overload per refused type; with ``named``, the message names the column."""
    overloads = []
    for sql_type, message in _TIME_REFUSALS:
        text = (
            "'" + message.replace("the time column", "the time column \"' || name || '\"") + "'"
            if named
            else f"'{message}'"
        )
        overloads.append(
            f"    ({lead} {sql_type}, {'name' if named else ''}".rstrip(", ")
            + f") AS error({text})"
        )
    return ",\n".join(overloads)


def udf_arguments(udf: str) -> tuple[Argument, ...]:
    """The named arguments a UDF takes after ``LEAD``: those of every function it serves,
    in the registry's order."""
    return tuple(a for a in REGISTRY if any(f in a.functions for f in UDFS[udf]))


def _literal(value: object) -> str:
    if value is None:
        return "NULL"
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return f"'{value}'"
    return repr(value)


def _signature(function: str) -> str:
    return ", ".join(f"{a.name} := {_literal(a.default_in(function))}" for a in of(function))


def _named(function: str) -> str:
    return ", ".join(f"{a.name} := {a.name}" for a in of(function))


def _udf_call(lead: str, *functions: str) -> str:
    """The UDF of ``functions`` called with ``lead`` and every named argument, cast to the
    UDF's declared type (so that a wrongly typed one reaches the type checks, which name
    it, rather than DuckDB's binder), NULL for those the functions do not take."""
    udf = UDF_OF[functions[0]]
    taken = {a.name for f in functions for a in of(f)}
    passed = [
        f"TRY_CAST({a.name} AS {SQL_TYPES[a.kind]})" if a.name in taken else "NULL"
        for a in udf_arguments(udf)
    ]
    return f"{udf}({lead},\n        " + ",\n        ".join(passed) + ")"


def _checks(function: str) -> str:
    """One check per argument: NULL, or why its type is refused."""
    checks = [f"{_CHECK_MACRO[a.kind]}('{a.name}', {a.name})" for a in of(function)]
    lines, line = [], ""
    for check in checks:  # a few to a line, for a reader
        if line and len(line) + len(check) > 84:
            lines.append(line)
            line = ""
        line += ("" if not line else " ") + check + ","
    lines.append(line.rstrip(","))
    return "[" + "\n             ".join(lines) + "]"


def _columns(names: tuple[str, ...]) -> str:
    return "[" + ", ".join(f"'{n}'" for n in names) + "]"


def _outside(function: str) -> str:
    """The outside columns a function's grouping carries (NULL where it takes none)."""
    return "outside_columns" if "outside_columns" in {a.name for a in of(function)} else "NULL"


def _refusals(function: str, answer: tuple[str, ...]) -> str:
    outside = _outside(function)
    return (
        f"(SELECT __tide_refuse(__tide_name_clashes(keys, time, value, {_columns(answer)})\n"
        f"          || __tide_outside_clashes(keys, time, value, {outside})\n"
        f"          || {_checks(function)}) AS __ok) AS __checked"
    )


_LEAD_CALL = (
    "CAST(__key AS VARCHAR), __time_codes, typeof(struct_extract_at(__time_shape, 1)),\n"
    "        current_setting('TimeZone'), __values, __outside_rows, __outside_types"
)

HELPERS = """\
-- Any time column as a sortable BIGINT: integers as they are, dates and timestamps as
-- microseconds since 1970-01-01 (UTC for TIMESTAMPTZ); an infinite one as the smallest
-- BIGINT, which no finite time takes and the UDF refuses. Other types are refused by name.
CREATE OR REPLACE TEMP MACRO __tide_time_code(t BIGINT, name) AS t,
    (t TIMESTAMP, name) AS CASE WHEN isinf(t) THEN {infinite} ELSE epoch_us(t) END,
    (t TIMESTAMPTZ, name) AS CASE WHEN isinf(t) THEN {infinite} ELSE epoch_us(t) END,
    (t DATE, name) AS CASE WHEN isinf(t) THEN {infinite} ELSE epoch_us(t) END,
{time_refusals};

-- A time code back to the type of a sample time (for rows inserted into gaps).
CREATE OR REPLACE TEMP MACRO __tide_time_from_code(c, sample BIGINT) AS c,
    (c, sample TIMESTAMP) AS make_timestamp(c),
    (c, sample TIMESTAMPTZ) AS timezone('UTC', make_timestamp(c)),
    (c, sample DATE) AS CAST(make_timestamp(c) AS DATE),
{time_refusals_from};

-- Why an argument's type is refused (NULL when it is fine), one macro per kind.
{kind_checks}

-- Fails the query with every reason given (NULLs are no reason); true otherwise. The
-- arguments are constants of the query, so this runs once, whether or not the table has rows.
CREATE OR REPLACE TEMP MACRO __tide_refuse(reasons) AS
    CASE WHEN len(list_filter(reasons, lambda r: r IS NOT NULL)) > 0
         THEN error(array_to_string(list_filter(reasons, lambda r: r IS NOT NULL), '; '))
         ELSE true END;

-- Reasons to refuse the column names: a key, time or value column named like a column of
-- the answer (DuckDB would rename one of the two silently), or one column in two roles.
CREATE OR REPLACE TEMP MACRO __tide_name_clashes(keys, time, value, answer) AS
    list_transform(
        list_filter(list_concat(keys, [time, value]), lambda c: list_contains(answer, lower(c))),
        lambda c: 'the input column "' || c || '" has the name of an output column; '
                  || 'rename it in the input (SELECT ' || c || ' AS ' || c || '_in, ...)')
    || CASE WHEN len(list_distinct(list_transform(list_concat(keys, [time, value]), lambda c: lower(c))))
                 < len(keys) + 2
            THEN ['key, time and value must be different columns'] ELSE [] END;

-- The argument after the value column, or a clear error if one was given by position.
CREATE OR REPLACE TEMP MACRO __tide_by_name(by_name_only, argument) AS
    CASE WHEN by_name_only IS NULL THEN argument
         ELSE error('give every argument after the value column by name, as in period := 12; got '
                    || CAST(by_name_only AS VARCHAR) || ' by position') END;

-- Reasons to refuse the outside columns: one that is also the key, time or value column, or
-- named like a column these queries make on the way (__key, ...). TRY_CAST here and in the
-- grouping: an argument of another type must bind, so that its check can name it.
CREATE OR REPLACE TEMP MACRO __tide_outside_clashes(keys, time, value, outside) AS
    list_transform(
        list_filter(coalesce(TRY_CAST(outside AS VARCHAR[]), []), lambda c:
            list_contains(list_transform(list_concat(keys, [time, value]), lambda k: lower(k)), lower(c))
            OR list_contains(['__key', '__time_row', '__time_code', '__value_row', '__value',
                              '__outside_struct'], lower(c))),
        lambda c: 'the outside column "' || c || '" is also the key, time or value column, or has '
                  || 'a name these queries use; give another column (SELECT ' || c || ' AS '
                  || c || '_x, ...)');

-- Every series of a table as lists, one row per key. With outside columns, each row's value
-- and outside values as one list of DOUBLE (the value first: COLUMNS needs at least one
-- column), and the columns' types as they were; without, neither is built (the CASE folds
-- away). The list goes through JSON, which keeps every double's bits: the columns' own
-- names never appear beside the names made here, whatever they are.
CREATE OR REPLACE TEMP MACRO __tide_grouped(tbl, keys, time, value, outside := NULL) AS TABLE
WITH __src AS (
    SELECT struct_pack(*COLUMNS(keys)) AS __key,
           struct_pack(COLUMNS([time])) AS __time_row,
           __tide_time_code(COLUMNS([time]), time) AS __time_code,
           struct_pack(COLUMNS([value])) AS __value_row,
           CAST(COLUMNS([value]) AS DOUBLE) AS __value,
           struct_pack(*COLUMNS(list_concat([value], coalesce(TRY_CAST(outside AS VARCHAR[]), []))))
               AS __outside_struct
    FROM query_table(tbl)
), __rows AS (
    SELECT __key, __time_row, __time_code, __value_row, __value, __outside_struct,
           TRY_CAST(to_json(struct_values(__outside_struct)) AS DOUBLE[]) AS __outside_row
    FROM __src
)
-- No ORDER BY: the lists of one group share one order, and the UDF sorts by time itself,
-- which is several times cheaper than four sorted aggregates. The input's times and values
-- are offered two ways: as lists of one-field structs (rows that carry the column's name
-- and type), and as plain lists with one such struct per series (its shape), from which the
-- rows are made again after unnest. DuckDB builds only what a macro uses; the plain lists
-- cost it a fifth less in a whole split (see __tide_split_keys).
SELECT __key,
       list(__time_row) AS __time_rows,
       list(__value_row) AS __value_rows,
       list(struct_extract_at(__time_row, 1)) AS __time_list,
       any_value(__time_row) AS __time_shape,
       list(struct_extract_at(__value_row, 1)) AS __value_list,
       any_value(__value_row) AS __value_shape,
       list(__time_code) AS __time_codes,
       list(__value) AS __values,
       CASE WHEN outside IS NULL THEN NULL ELSE list(__outside_row) END AS __outside_rows,
       CASE WHEN outside IS NULL THEN NULL ELSE typeof(any_value(__outside_struct)) END
           AS __outside_types
FROM __rows
GROUP BY __key;

-- Future time codes back to time rows shaped like the input's (name and type).
CREATE OR REPLACE TEMP MACRO __tide_time_rows(codes, time_rows) AS
    list_transform(codes, lambda c:
        CASE WHEN false THEN time_rows[1]
             ELSE row(__tide_time_from_code(c, struct_extract_at(time_rows[1], 1))) END);

-- The times and values of the regular grid: an input row's (source, counted from 0 within
-- the series) as it came in, an inserted time (source -1) rebuilt from its code, with no
-- value.
CREATE OR REPLACE TEMP MACRO __tide_grid_times(source, codes, times) AS
    list_transform(source, lambda i, j:
        CASE WHEN i >= 0 THEN times[i + 1] ELSE __tide_time_from_code(codes[j], times[1]) END);

CREATE OR REPLACE TEMP MACRO __tide_grid_values(source, values_) AS
    list_transform(source, lambda i: CASE WHEN i >= 0 THEN values_[i + 1] END);

-- A plain time or value back as a one-field struct of the input's column (its name and
-- type, from the series' shape), for unnest to name the column as the input does.
CREATE OR REPLACE TEMP MACRO __tide_as_row(shape, x) AS CASE WHEN false THEN shape ELSE row(x) END;

-- The seasonal part of one period from a row's seasonal_by_period (NULL if that period was
-- not used for the series): tide_part(seasonal_by_period, 168).
CREATE OR REPLACE TEMP MACRO tide_part(parts, period) AS
    list_filter(parts, lambda part: part.period = period)[1].seasonal;
"""


def _split_list() -> str:
    fields = (*answers.COMPONENTS, "period", "season_span", "trend_span", "boxcox_lambda", "status")
    picked = ", ".join(f"{f} := parts.{f}" for f in fields)
    return f"""\
-- The public fields of the split UDF's result (DuckDB calls the UDF once for all of them).
CREATE OR REPLACE TEMP MACRO __tide_list_parts(parts) AS struct_pack({picked});

-- The components of one series held as a list, for those who write their own GROUP BY.
CREATE OR REPLACE TEMP MACRO tide_split_list(values, {_signature(SPLIT_LIST)}) AS
    CASE WHEN __tide_refuse({_checks(SPLIT_LIST)})
    THEN __tide_list_parts({_udf_call("NULL, NULL, NULL, NULL, values, NULL, NULL", SPLIT_LIST)})
    END;
"""


def _split_keys() -> str:
    # one internal macro for one period and several: the public ones drop the columns the
    # other shape has (internal __ names, so that a user's column is never the one dropped)
    args = [a for a in REGISTRY if SPLIT in a.functions or SPLIT_MULTI in a.functions]
    signature = ", ".join(f"{a.name} := NULL" for a in args)
    return f"""\
-- With fill_gaps the rows are those of the regular grid, input rows picked by their source
-- and inserted times rebuilt from their codes; without, the input rows as they came.
-- fill_gaps is a constant, so DuckDB folds the CASE and keeps one branch.
CREATE OR REPLACE TEMP MACRO __tide_split_keys(tbl, keys, time, value, answer, checks, {signature}) AS TABLE
-- Times and values travel as plain lists and become one-field structs of the input's
-- columns only after unnest (a list of such structs cost DuckDB a fifth of a whole split).
-- Without effects the UDF leaves their columns NULL: 0 (NULL where the series was left
-- unsplit, as trend is), and adjusted as it is.
SELECT unnest(__key),
       unnest(__tide_as_row(__time_shape, __time)),
       unnest(__tide_as_row(__value_shape, __value)),
       * EXCLUDE (__key, __time_shape, __value_shape, __time, __value) REPLACE (
    coalesce(calendar_effect, CASE WHEN trend IS NOT NULL THEN 0.0 END) AS calendar_effect,
    coalesce(outside_effect, CASE WHEN trend IS NOT NULL THEN 0.0 END) AS outside_effect,
    coalesce(adjusted_season_only, adjusted) AS adjusted_season_only)
FROM (
SELECT __key, __time_shape, __value_shape,
       unnest(CASE WHEN coalesce(fill_gaps, false)
                   THEN __tide_grid_times(__parts.source, __parts.time_codes, __time_list)
                   ELSE __time_list END) AS __time,
       unnest(CASE WHEN coalesce(fill_gaps, false)
                   THEN __tide_grid_values(__parts.source, __value_list)
                   ELSE __value_list END) AS __value,
       unnest(__parts.trend) AS trend,
       unnest(__parts.seasonal) AS seasonal,
       unnest(__parts.remainder) AS remainder,
       unnest(__parts.adjusted) AS adjusted,
       unnest(__parts.weight) AS weight,
       unnest(__parts.calendar_effect) AS calendar_effect,
       unnest(__parts.outside_effect) AS outside_effect,
       unnest(__parts.adjusted_season_only) AS adjusted_season_only,
       coalesce(unnest(__parts.inserted), false) AS inserted,
       __parts.period AS __period,
       __parts.periods AS __periods,
       unnest(__parts.seasonal_by_period) AS __seasonal_by_period,
       __parts.season_span AS __season_span,
       __parts.trend_span AS __trend_span,
       __parts.boxcox_lambda AS boxcox_lambda,
       __parts.status AS status
FROM (SELECT __key, __time_list, __time_shape, __value_list, __value_shape,
             {_udf_call(_LEAD_CALL, SPLIT, SPLIT_MULTI)} AS __parts
      FROM __tide_grouped(tbl, keys, time, value, outside := outside_columns),
           (SELECT __tide_refuse(__tide_name_clashes(keys, time, value, answer)
                                 || __tide_outside_clashes(keys, time, value, outside_columns)
                                 || checks) AS __ok) AS __checked
      WHERE __checked.__ok));
"""


def _public(function: str, body: str) -> str:
    """Both overloads of a public macro: one key column by name, or a list of them."""
    overloads = []
    for key_type, keys in (("VARCHAR", "[key]"), ("VARCHAR[]", "key")):
        overloads.append(
            f"(tbl, key {key_type}, time VARCHAR, value VARCHAR, by_name_only := NULL, "
            f"{_signature(function)}) AS TABLE\n    ({body.format(keys=keys)})"
        )
    return f"CREATE OR REPLACE TEMP MACRO tide_{function}" + ",\n    ".join(overloads) + ";\n"


def render() -> str:
    """The whole SQL file."""
    first = of(SPLIT)[0].name  # the argument a stray positional one would have filled
    assert first == "period"
    split_named = _named(SPLIT).replace(
        "period := period", "period := __tide_by_name(by_name_only, period)"
    )
    multi_named = _named(SPLIT_MULTI).replace(
        "periods := periods", "periods := coalesce(__tide_by_name(by_name_only, periods), [])"
    )
    parts = [
        "-- The SQL functions of tidesplit, loaded by tidesplit.register().\n"
        "-- Written by tidesplit/sql_build.py from the argument registry; do not edit by hand.\n",
        HELPERS.replace("{kind_checks}", _KIND_CHECKS)
        .replace("{infinite}", f"({INFINITE_TIME_CODE + 1} - 1)::BIGINT")
        .replace("{time_refusals}", _time_refusals("t", named=True))
        .replace("{time_refusals_from}", _time_refusals("c, sample", named=False)),
        _split_list(),
        _split_keys(),
        "-- One key column by name, or a list of them (exact names, not patterns). Arguments\n"
        "-- after the value column are taken by name only: by_name_only catches a stray\n"
        "-- positional one.\n"
        + _public(
            SPLIT,
            "SELECT * EXCLUDE (__seasonal_by_period, __periods)\n"
            "     RENAME (__period AS period, __season_span AS season_span, "
            "__trend_span AS trend_span)\n"
            f"     FROM __tide_split_keys(tbl, {{keys}}, time, value, {_columns(answers.SPLIT)},\n"
            f"         {_checks(SPLIT)},\n         {split_named})",
        ),
        "-- Several seasonal periods (MSTL); periods := NULL takes those the time step implies.\n"
        + _public(
            SPLIT_MULTI,
            "SELECT * EXCLUDE (__period, __season_span, __trend_span) RENAME (__periods AS periods, "
            "__seasonal_by_period AS seasonal_by_period)\n"
            f"     FROM __tide_split_keys(tbl, {{keys}}, time, value, "
            f"{_columns(answers.SPLIT_MULTI)},\n         {_checks(SPLIT_MULTI)},\n"
            f"         {multi_named})",
        ),
        _answer_macros(),
    ]
    return "\n".join(parts)


def _answer_macros() -> str:
    named = {
        f: _named(f).replace("period := period", "period := __tide_by_name(by_name_only, period)")
        for f in (PROFILE, OUTLIERS, FORECAST, AUDIT)
    }
    inner = {
        f: ", ".join(f"{a.name} := NULL" for a in of(f))
        for f in (PROFILE, OUTLIERS, FORECAST, AUDIT)
    }
    profile = f"""\
-- Per-series answers, one row per key.
CREATE OR REPLACE TEMP MACRO __tide_profile_keys(tbl, keys, time, value, {inner[PROFILE]}) AS TABLE
SELECT unnest(__key), unnest(__p)
FROM (SELECT __key,
             {_udf_call(_LEAD_CALL, PROFILE)} AS __p
      FROM __tide_grouped(tbl, keys, time, value, outside := {_outside(PROFILE)}),
           {_refusals(PROFILE, answers.PROFILE)}
      WHERE __checked.__ok);

""" + _public(
        PROFILE, f"SELECT * FROM __tide_profile_keys(tbl, {{keys}}, time, value, {named[PROFILE]})"
    )
    outliers = f"""\
-- Points too far out to be noise (all rows with all_rows := true); every row
-- of a series that could not be split, with its status.
CREATE OR REPLACE TEMP MACRO __tide_outliers_keys(tbl, keys, time, value, {inner[OUTLIERS]}) AS TABLE
SELECT * FROM (
    SELECT unnest(__key),
           unnest(__time_rows, recursive := true),
           unnest(__value_rows, recursive := true),
           unnest(__o.expected) AS expected,
           unnest(__o.remainder) AS remainder,
           unnest(__o.score) AS score,
           unnest(__o.direction) AS direction,
           unnest(__o.weight) AS weight,
           unnest(__o.is_outlier) AS __is_outlier,
           __o.status AS __status
    FROM (SELECT __key, __time_rows, __value_rows,
                 {_udf_call(_LEAD_CALL, OUTLIERS)} AS __o
          FROM __tide_grouped(tbl, keys, time, value, outside := {_outside(OUTLIERS)}),
               {_refusals(OUTLIERS, answers.OUTLIERS)}
          WHERE __checked.__ok))
WHERE __is_outlier OR coalesce(all_rows, false) OR NOT starts_with(__status, 'ok');

""" + _public(
        OUTLIERS,
        "SELECT * RENAME (__is_outlier AS is_outlier, __status AS status)\n"
        f"     FROM __tide_outliers_keys(tbl, {{keys}}, time, value, {named[OUTLIERS]})",
    )
    forecast = f"""\
-- Future rows per key, steps_ahead of them, with prediction intervals; a series that could not
-- be split (on_error := 'keep') gives one row with its status and NULL forecasts.
CREATE OR REPLACE TEMP MACRO __tide_forecast_keys(tbl, keys, time, value, {inner[FORECAST]}) AS TABLE
SELECT unnest(__key),
       unnest(__tide_time_rows(__f.time_codes, __time_rows), recursive := true),
       unnest(__f.steps_ahead) AS steps_ahead,
       unnest(__f.forecast) AS forecast,
       unnest(__f.low) AS low,
       unnest(__f.high) AS high,
       __f.status AS status
FROM (SELECT __key, __time_rows,
             {_udf_call(_LEAD_CALL, FORECAST)} AS __f
      FROM __tide_grouped(tbl, keys, time, value, outside := {_outside(FORECAST)}),
           {_refusals(FORECAST, answers.FORECAST)}
      WHERE __checked.__ok);

""" + _public(
        FORECAST,
        f"SELECT * FROM __tide_forecast_keys(tbl, {{keys}}, time, value, {named[FORECAST]})",
    )
    audit = f"""\
-- A sample of keys split again by statsmodels under the same settings: the largest
-- difference of each component, or why statsmodels cannot follow.
CREATE OR REPLACE TEMP MACRO __tide_audit_keys(tbl, keys, time, value, {inner[AUDIT]}) AS TABLE
SELECT unnest(__key), unnest(__a)
FROM (SELECT __key,
             {_udf_call(_LEAD_CALL, AUDIT)} AS __a
      FROM (SELECT * FROM __tide_grouped(tbl, keys, time, value)
            ORDER BY hash(CAST(__key AS VARCHAR)) LIMIT sample),
           {_refusals(AUDIT, answers.AUDIT)}
      WHERE __checked.__ok);

""" + _public(AUDIT, f"SELECT * FROM __tide_audit_keys(tbl, {{keys}}, time, value, {named[AUDIT]})")
    return "\n".join([profile, outliers, forecast, audit])


if __name__ == "__main__":
    print(render(), end="")
