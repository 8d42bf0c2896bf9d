-- Table macros of tidesplit. Loaded by tidesplit.register(). Placeholders in braces stand
-- for lists written from the argument lists in duckdb_ext.py, so each list is written once:
-- {split_args} every decomposition argument with its default, {split_pass} the same names
-- in the order the UDF takes them, {split_named} as name := name; {answer_*} the same
-- without fill_gaps (the answers always work on the regular grid); {multi_*} the arguments
-- of several periods; {*_checks} one type check per argument (see __tide_refuse).

-- Any time column as a sortable BIGINT: integers as they are, dates and timestamps as
-- microseconds since 1970-01-01 (UTC for TIMESTAMPTZ).
CREATE OR REPLACE TEMP MACRO __tide_time_code(t BIGINT) AS t,
    (t TIMESTAMP) AS epoch_us(t),
    (t TIMESTAMPTZ) AS epoch_us(t),
    (t DATE) AS epoch_us(t);

-- A time code back to the type of a sample time (for rows inserted into gaps).
CREATE OR REPLACE TEMP MACRO __tide_time_from_code(c, sample BIGINT) AS c,
    (c, sample TIMESTAMP) AS make_timestamp(c),
    (c, sample TIMESTAMPTZ) AS timezone('UTC', make_timestamp(c)),
    (c, sample DATE) AS CAST(make_timestamp(c) AS DATE);

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

-- The components of one series held as a list, for those who write their own GROUP BY.
CREATE OR REPLACE TEMP MACRO tide_split_list(values, period := NULL, {split_args}) AS
    CASE WHEN __tide_refuse([{split_checks}])
         THEN __tide_split_series(NULL, NULL, NULL, NULL, values, TRY_CAST(period AS DOUBLE), {split_pass}, NULL, NULL, NULL)
    END;

-- Every series of a table as lists, one row per key.
CREATE OR REPLACE TEMP MACRO __tide_grouped(tbl, keys, time, value) AS TABLE
WITH __src AS (
    SELECT struct_pack(*COLUMNS(keys)) AS __key,
           struct_pack(COLUMNS([time])) AS __time_row,
           __tide_time_code(COLUMNS([time])) AS __time_code,
           struct_pack(COLUMNS([value])) AS __value_row,
           CAST(COLUMNS([value]) AS DOUBLE) AS __value
    FROM query_table(tbl)
)
-- No ORDER BY: the lists of one group share one order, and the UDF sorts by time itself,
-- which is several times cheaper than four sorted aggregates.
SELECT __key,
       list(__time_row) AS __time_rows,
       list(__value_row) AS __value_rows,
       list(__time_code) AS __time_codes,
       list(__value) AS __values
FROM __src
GROUP BY __key;

-- Future time codes back to time rows shaped like the input's (name and type).
CREATE OR REPLACE TEMP MACRO __tide_time_rows(codes, time_rows) AS
    list_transform(codes, lambda c:
        CASE WHEN false THEN time_rows[1]
             ELSE row(__tide_time_from_code(c, struct_extract_at(time_rows[1], 1))) END);

-- The rows of the regular grid: an input row (source, counted from 0 within the series) as it
-- came in, an inserted time (source -1) rebuilt from its code.
CREATE OR REPLACE TEMP MACRO __tide_grid_time_rows(source, codes, time_rows) AS
    list_transform(source, lambda i, j:
        CASE WHEN i >= 0 THEN time_rows[i + 1]
             ELSE row(__tide_time_from_code(codes[j], struct_extract_at(time_rows[1], 1))) END);

CREATE OR REPLACE TEMP MACRO __tide_grid_value_rows(source, value_rows) AS
    list_transform(source, lambda i:
        CASE WHEN i >= 0 THEN value_rows[i + 1]
             ELSE (CASE WHEN false THEN value_rows[1] ELSE row(NULL) END) END);

-- The argument after the value column, or a clear error if one was given by position.
CREATE OR REPLACE TEMP MACRO __tide_by_name(by_name_only, argument) AS
    CASE WHEN by_name_only IS NULL THEN argument
         ELSE error('give every argument after the value column by name, as in period := 12; got '
                    || CAST(by_name_only AS VARCHAR) || ' by position') END;

-- Internal names (__*) for the columns the public macros drop or rename, so that a user's
-- column of the same name is never the one dropped.
CREATE OR REPLACE TEMP MACRO __tide_split_keys(tbl, keys, time, value, answer, period := NULL, {split_args}, {multi_args}) AS TABLE
-- With fill_gaps the rows are those of the regular grid, input rows picked by their source
-- and inserted times rebuilt from their codes; without, the input rows as they came.
-- fill_gaps is a constant, so DuckDB folds the CASE and keeps one branch.
SELECT unnest(__key),
       unnest(CASE WHEN coalesce(fill_gaps, false)
                   THEN __tide_grid_time_rows(__parts.source, __parts.time_codes, __time_rows)
                   ELSE __time_rows END, recursive := true),
       unnest(CASE WHEN coalesce(fill_gaps, false)
                   THEN __tide_grid_value_rows(__parts.source, __value_rows)
                   ELSE __value_rows END, recursive := true),
       unnest(__parts.trend) AS trend,
       unnest(__parts.seasonal) AS seasonal,
       unnest(__parts.seasonal_by_period) AS __seasonal_by_period,
       unnest(__parts.remainder) AS remainder,
       unnest(__parts.adjusted) AS adjusted,
       unnest(__parts.weight) AS weight,
       coalesce(unnest(__parts.inserted), false) AS inserted,
       __parts.period AS __period,
       __parts.periods AS __periods,
       __parts.status AS status
FROM (SELECT __key, __time_rows, __value_rows,
             __tide_split_series(CAST(__key AS VARCHAR), __time_codes,
                                 typeof(struct_extract_at(__time_rows[1], 1)),
                                 current_setting('TimeZone'),
                                 __values, TRY_CAST(period AS DOUBLE), {split_pass}, {multi_pass}) AS __parts
      FROM __tide_grouped(tbl, keys, time, value),
           (SELECT __tide_refuse(__tide_name_clashes(keys, time, value, answer)
                          || [{split_checks}, {multi_checks}]) AS __ok) AS __checked
      WHERE __checked.__ok);

-- One key column by name, or a list of them (exact names, not patterns). Arguments after
-- the value column are taken by name only: by_name_only catches a stray positional one.
CREATE OR REPLACE TEMP MACRO tide_split(tbl, key VARCHAR, time VARCHAR, value VARCHAR, by_name_only := NULL, period := NULL, {split_args}) AS TABLE
    (SELECT * EXCLUDE (__seasonal_by_period, __periods) RENAME (__period AS period)
     FROM __tide_split_keys(tbl, [key], time, value, {split_columns}, period := __tide_by_name(by_name_only, period), {split_named})),
    (tbl, key VARCHAR[], time VARCHAR, value VARCHAR, by_name_only := NULL, period := NULL, {split_args}) AS TABLE
    (SELECT * EXCLUDE (__seasonal_by_period, __periods) RENAME (__period AS period)
     FROM __tide_split_keys(tbl, key, time, value, {split_columns}, period := __tide_by_name(by_name_only, period), {split_named}));

-- Several seasonal periods (MSTL); periods := NULL takes those the time step implies.
CREATE OR REPLACE TEMP MACRO tide_split_multi(tbl, key VARCHAR, time VARCHAR, value VARCHAR, by_name_only := NULL, {split_args}, {multi_args}) AS TABLE
    (SELECT * EXCLUDE (__period) RENAME (__periods AS periods, __seasonal_by_period AS seasonal_by_period)
     FROM __tide_split_keys(tbl, [key], time, value, {multi_columns}, {split_named}, periods := coalesce(__tide_by_name(by_name_only, periods), []), season_spans := season_spans, iterations := iterations)),
    (tbl, key VARCHAR[], time VARCHAR, value VARCHAR, by_name_only := NULL, {split_args}, {multi_args}) AS TABLE
    (SELECT * EXCLUDE (__period) RENAME (__periods AS periods, __seasonal_by_period AS seasonal_by_period)
     FROM __tide_split_keys(tbl, key, time, value, {multi_columns}, {split_named}, periods := coalesce(__tide_by_name(by_name_only, periods), []), season_spans := season_spans, iterations := iterations));

-- Per-series answers, one row per key.
CREATE OR REPLACE TEMP MACRO __tide_profile_keys(tbl, keys, time, value, period := NULL, {answer_args}, {multi_args}) AS TABLE
SELECT unnest(__key), unnest(__p)
FROM (SELECT __key,
             __tide_profile_series(CAST(__key AS VARCHAR), __time_codes,
                                   typeof(struct_extract_at(__time_rows[1], 1)),
                                   current_setting('TimeZone'), __values, TRY_CAST(period AS DOUBLE),
                                   {answer_pass}, {multi_pass}) AS __p
      FROM __tide_grouped(tbl, keys, time, value),
           (SELECT __tide_refuse(__tide_name_clashes(keys, time, value, {profile_columns})
                          || [{answer_checks}, {multi_checks}]) AS __ok) AS __checked
      WHERE __checked.__ok);

CREATE OR REPLACE TEMP MACRO tide_profile(tbl, key VARCHAR, time VARCHAR, value VARCHAR, by_name_only := NULL, period := NULL, {answer_args}, {multi_args}) AS TABLE
    (SELECT * FROM __tide_profile_keys(tbl, [key], time, value, period := __tide_by_name(by_name_only, period), {answer_named}, {multi_named})),
    (tbl, key VARCHAR[], time VARCHAR, value VARCHAR, by_name_only := NULL, period := NULL, {answer_args}, {multi_args}) AS TABLE
    (SELECT * FROM __tide_profile_keys(tbl, key, time, value, period := __tide_by_name(by_name_only, period), {answer_named}, {multi_named}));

-- Points whose remainder lies outside the fences (all rows with all_rows := true); every row
-- of a series that could not be split, with its status.
CREATE OR REPLACE TEMP MACRO __tide_outlier_keys(tbl, keys, time, value, period := NULL, {answer_args}, {multi_args}, method := NULL, threshold := NULL, all_rows := false) AS TABLE
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
                 __tide_outlier_series(CAST(__key AS VARCHAR), __time_codes,
                                       typeof(struct_extract_at(__time_rows[1], 1)),
                                       current_setting('TimeZone'), __values, TRY_CAST(period AS DOUBLE),
                                       {answer_pass}, {multi_pass}, method, threshold) AS __o
          FROM __tide_grouped(tbl, keys, time, value),
               (SELECT __tide_refuse(__tide_name_clashes(keys, time, value, {outlier_columns})
                              || [{answer_checks}, {multi_checks}, {outlier_checks}]) AS __ok) AS __checked
          WHERE __checked.__ok))
WHERE __is_outlier OR coalesce(all_rows, false) OR NOT starts_with(__status, 'ok');

CREATE OR REPLACE TEMP MACRO tide_outliers(tbl, key VARCHAR, time VARCHAR, value VARCHAR, by_name_only := NULL, period := NULL, {outlier_args}, {multi_args}, method := NULL, threshold := NULL, all_rows := false) AS TABLE
    (SELECT * RENAME (__is_outlier AS is_outlier, __status AS status)
     FROM __tide_outlier_keys(tbl, [key], time, value, period := __tide_by_name(by_name_only, period), {answer_named}, {multi_named}, method := method, threshold := threshold, all_rows := all_rows)),
    (tbl, key VARCHAR[], time VARCHAR, value VARCHAR, by_name_only := NULL, period := NULL, {outlier_args}, {multi_args}, method := NULL, threshold := NULL, all_rows := false) AS TABLE
    (SELECT * RENAME (__is_outlier AS is_outlier, __status AS status)
     FROM __tide_outlier_keys(tbl, key, time, value, period := __tide_by_name(by_name_only, period), {answer_named}, {multi_named}, method := method, threshold := threshold, all_rows := all_rows));

-- Future rows per key up to a horizon, with prediction intervals; a series that could not
-- be split (on_error := 'keep') gives one row with its status and NULL forecasts.
CREATE OR REPLACE TEMP MACRO __tide_forecast_keys(tbl, keys, time, value, period := NULL, {answer_args}, {multi_args}, horizon := NULL, level := NULL, method := NULL) AS TABLE
SELECT unnest(__key),
       unnest(__tide_time_rows(__f.time_codes, __time_rows), recursive := true),
       unnest(__f.step) AS step,
       unnest(__f.forecast) AS forecast,
       unnest(__f.lower) AS lower,
       unnest(__f.upper) AS upper,
       __f.status AS status
FROM (SELECT __key, __time_rows,
             __tide_forecast_series(CAST(__key AS VARCHAR), __time_codes,
                                    typeof(struct_extract_at(__time_rows[1], 1)),
                                    current_setting('TimeZone'), __values, TRY_CAST(period AS DOUBLE),
                                    {answer_pass}, {multi_pass}, horizon, level, method) AS __f
      FROM __tide_grouped(tbl, keys, time, value),
           (SELECT __tide_refuse(__tide_name_clashes(keys, time, value, {forecast_columns})
                          || [{answer_checks}, {multi_checks}, {forecast_checks}]) AS __ok) AS __checked
      WHERE __checked.__ok);

CREATE OR REPLACE TEMP MACRO tide_forecast(tbl, key VARCHAR, time VARCHAR, value VARCHAR, by_name_only := NULL, period := NULL, {answer_args}, {multi_args}, horizon := NULL, level := NULL, method := NULL) AS TABLE
    (SELECT * FROM __tide_forecast_keys(tbl, [key], time, value, period := __tide_by_name(by_name_only, period), {answer_named}, {multi_named}, horizon := horizon, level := level, method := method)),
    (tbl, key VARCHAR[], time VARCHAR, value VARCHAR, by_name_only := NULL, period := NULL, {answer_args}, {multi_args}, horizon := NULL, level := NULL, method := NULL) AS TABLE
    (SELECT * FROM __tide_forecast_keys(tbl, key, time, value, period := __tide_by_name(by_name_only, period), {answer_named}, {multi_named}, horizon := horizon, level := level, method := method));

-- The seasonal part of one period from a row's seasonal_by_period (NULL if that period was
-- not used for the series): tide_part(seasonal_by_period, 168).
CREATE OR REPLACE TEMP MACRO tide_part(parts, period) AS
    list_filter(parts, lambda part: part.period = period)[1].seasonal;
