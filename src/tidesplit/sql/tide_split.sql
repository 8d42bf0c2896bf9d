-- Table macros of tidesplit. Loaded by tidesplit.register(); {split_args}, {split_pass} and
-- {split_named} (and the {multi_*} ones) stand for every decomposition argument (see
-- duckdb_ext.py), so the list is written once.

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

-- The components of one series held as a list, for those who write their own GROUP BY.
CREATE OR REPLACE TEMP MACRO tide_split_list(values, period := NULL, {split_args}) AS
    __tide_split_series(NULL, NULL, NULL, NULL, values, period, {split_pass}, NULL, NULL, NULL);

-- Every series of a table as ordered lists, one row per key.
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

-- A grid time code back to a time row shaped like the input's (name and type).
CREATE OR REPLACE TEMP MACRO __tide_time_rows(codes, time_rows) AS
    list_transform(codes, lambda c:
        CASE WHEN false THEN time_rows[1]
             ELSE row(__tide_time_from_code(c, struct_extract_at(time_rows[1], 1))) END);

-- A grid row's input value (NULL for an inserted time), shaped like the input's.
CREATE OR REPLACE TEMP MACRO __tide_value_rows(source, value_rows) AS
    list_transform(source, lambda i:
        CASE WHEN i >= 0 THEN value_rows[i + 1]
             ELSE (CASE WHEN false THEN value_rows[1] ELSE row(NULL) END) END);

CREATE OR REPLACE TEMP MACRO __tide_split_keys(tbl, keys, time, value, period := NULL, {split_args}, {multi_args}) AS TABLE
-- With fill_gaps the rows are those of the regular grid, times rebuilt from their codes and
-- values picked by their input row; without, the input rows as they came. fill_gaps is a
-- constant, so DuckDB folds the CASE and keeps one branch (no second pass, no copy).
SELECT unnest(__key),
       unnest(CASE WHEN coalesce(fill_gaps, false)
                   THEN __tide_time_rows(__parts.time_codes, __time_rows)
                   ELSE __time_rows END, recursive := true),
       unnest(CASE WHEN coalesce(fill_gaps, false)
                   THEN __tide_value_rows(__parts.source, __value_rows)
                   ELSE __value_rows END, recursive := true),
       unnest(__parts.trend) AS trend,
       unnest(__parts.seasonal) AS seasonal,
       unnest(__parts.seasonal_by_period) AS seasonal_by_period,
       unnest(__parts.remainder) AS remainder,
       unnest(__parts.adjusted) AS adjusted,
       unnest(__parts.weight) AS weight,
       coalesce(unnest(__parts.inserted), false) AS inserted,
       __parts.period AS period,
       __parts.periods AS periods,
       __parts.status AS status
FROM (SELECT __key, __time_rows, __value_rows,
             __tide_split_series(CAST(__key AS VARCHAR), __time_codes,
                                 typeof(struct_extract_at(__time_rows[1], 1)),
                                 current_setting('TimeZone'),
                                 __values, period, {split_pass}, {multi_pass}) AS __parts
      FROM __tide_grouped(tbl, keys, time, value));

-- One key column by name, or a list of them (exact names, not patterns).
CREATE OR REPLACE TEMP MACRO tide_split(tbl, key VARCHAR, time VARCHAR, value VARCHAR, period := NULL, {split_args}) AS TABLE
    (SELECT * EXCLUDE (seasonal_by_period, periods) FROM __tide_split_keys(tbl, [key], time, value, period := period, {split_named})),
    (tbl, key VARCHAR[], time VARCHAR, value VARCHAR, period := NULL, {split_args}) AS TABLE
    (SELECT * EXCLUDE (seasonal_by_period, periods) FROM __tide_split_keys(tbl, key, time, value, period := period, {split_named}));

-- Per-series answers, one row per key.
CREATE OR REPLACE TEMP MACRO __tide_profile_keys(tbl, keys, time, value, period := NULL, {split_args}, {multi_args}) AS TABLE
SELECT unnest(__key), unnest(__p)
FROM (SELECT __key,
             __tide_profile_series(CAST(__key AS VARCHAR), __time_codes,
                                   typeof(struct_extract_at(__time_rows[1], 1)),
                                   current_setting('TimeZone'), __values, period,
                                   {split_pass}, {multi_pass}) AS __p
      FROM __tide_grouped(tbl, keys, time, value));

CREATE OR REPLACE TEMP MACRO tide_profile(tbl, key VARCHAR, time VARCHAR, value VARCHAR, period := NULL, {split_args}, {multi_args}) AS TABLE
    (SELECT * FROM __tide_profile_keys(tbl, [key], time, value, period := period, {split_named}, {multi_named})),
    (tbl, key VARCHAR[], time VARCHAR, value VARCHAR, period := NULL, {split_args}, {multi_args}) AS TABLE
    (SELECT * FROM __tide_profile_keys(tbl, key, time, value, period := period, {split_named}, {multi_named}));

-- Points whose remainder lies outside the fences (all rows with all_rows := true).
CREATE OR REPLACE TEMP MACRO __tide_outlier_keys(tbl, keys, time, value, period := NULL, {split_args}, {multi_args}, method := NULL, threshold := NULL, significance := NULL, all_rows := false) AS TABLE
SELECT * FROM (
    SELECT unnest(__key),
           unnest(__time_rows, recursive := true),
           unnest(__value_rows, recursive := true),
           unnest(__o.expected) AS expected,
           unnest(__o.remainder) AS remainder,
           unnest(__o.score) AS score,
           unnest(__o.direction) AS direction,
           unnest(__o.weight) AS weight,
           unnest(__o.is_outlier) AS is_outlier,
           __o.status AS status
    FROM (SELECT __key, __time_rows, __value_rows,
                 __tide_outlier_series(CAST(__key AS VARCHAR), __time_codes,
                                       typeof(struct_extract_at(__time_rows[1], 1)),
                                       current_setting('TimeZone'), __values, period,
                                       {split_pass}, {multi_pass}, method, threshold, significance) AS __o
          FROM __tide_grouped(tbl, keys, time, value)))
WHERE is_outlier OR coalesce(all_rows, false) OR NOT starts_with(status, 'ok');

CREATE OR REPLACE TEMP MACRO tide_outliers(tbl, key VARCHAR, time VARCHAR, value VARCHAR, period := NULL, {outlier_args}, {multi_args}, method := NULL, threshold := NULL, significance := NULL, all_rows := false) AS TABLE
    (SELECT * FROM __tide_outlier_keys(tbl, [key], time, value, period := period, {split_named}, {multi_named}, method := method, threshold := threshold, significance := significance, all_rows := all_rows)),
    (tbl, key VARCHAR[], time VARCHAR, value VARCHAR, period := NULL, {outlier_args}, {multi_args}, method := NULL, threshold := NULL, significance := NULL, all_rows := false) AS TABLE
    (SELECT * FROM __tide_outlier_keys(tbl, key, time, value, period := period, {split_named}, {multi_named}, method := method, threshold := threshold, significance := significance, all_rows := all_rows));

-- Future rows per key up to a horizon, with prediction intervals.
CREATE OR REPLACE TEMP MACRO __tide_forecast_keys(tbl, keys, time, value, period := NULL, {split_args}, {multi_args}, horizon := NULL, level := NULL, method := NULL) AS TABLE
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
                                    current_setting('TimeZone'), __values, period,
                                    {split_pass}, {multi_pass}, horizon, level, method) AS __f
      FROM __tide_grouped(tbl, keys, time, value));

CREATE OR REPLACE TEMP MACRO tide_forecast(tbl, key VARCHAR, time VARCHAR, value VARCHAR, period := NULL, {split_args}, {multi_args}, horizon := NULL, level := NULL, method := NULL) AS TABLE
    (SELECT * FROM __tide_forecast_keys(tbl, [key], time, value, period := period, {split_named}, {multi_named}, horizon := horizon, level := level, method := method)),
    (tbl, key VARCHAR[], time VARCHAR, value VARCHAR, period := NULL, {split_args}, {multi_args}, horizon := NULL, level := NULL, method := NULL) AS TABLE
    (SELECT * FROM __tide_forecast_keys(tbl, key, time, value, period := period, {split_named}, {multi_named}, horizon := horizon, level := level, method := method));

-- Several seasonal periods (MSTL); periods := NULL takes those the time step implies.
CREATE OR REPLACE TEMP MACRO tide_split_multi(tbl, key VARCHAR, time VARCHAR, value VARCHAR, {split_args}, {multi_args}) AS TABLE
    (SELECT * EXCLUDE (period) FROM __tide_split_keys(tbl, [key], time, value, {split_named}, periods := coalesce(periods, []), season_spans := season_spans, iterations := iterations)),
    (tbl, key VARCHAR[], time VARCHAR, value VARCHAR, {split_args}, {multi_args}) AS TABLE
    (SELECT * EXCLUDE (period) FROM __tide_split_keys(tbl, key, time, value, {split_named}, periods := coalesce(periods, []), season_spans := season_spans, iterations := iterations));

-- The seasonal part of one period from a row's seasonal_by_period (NULL if that period was
-- not used for the series): tide_part(seasonal_by_period, 168).
CREATE OR REPLACE TEMP MACRO tide_part(parts, period) AS
    list_filter(parts, lambda part: part.period = period)[1].seasonal;
