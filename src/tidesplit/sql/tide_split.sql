-- Table macros of tidesplit. Loaded by tidesplit.register(); the {split_args} and
-- {split_pass} placeholders stand for every decomposition argument (see params.py), so the
-- list is written once.

-- Turns any time column into a sortable BIGINT: integers as they are, dates and timestamps as
-- microseconds since 1970-01-01 (UTC for TIMESTAMPTZ).
CREATE OR REPLACE TEMP MACRO __tide_time_code(t BIGINT) AS t,
    (t TIMESTAMP) AS epoch_us(t),
    (t TIMESTAMPTZ) AS epoch_us(t),
    (t DATE) AS epoch_us(t);

-- The components of one series held as a list, for those who write their own GROUP BY.
CREATE OR REPLACE TEMP MACRO tide_split_list(values, period := NULL, {split_args}) AS
    __tide_split_series(NULL, NULL, values, period, {split_pass});

CREATE OR REPLACE TEMP MACRO __tide_split_keys(tbl, keys, time, value, period := NULL, {split_args}) AS TABLE
WITH __src AS (
    SELECT struct_pack(*COLUMNS(keys)) AS __key,
           struct_pack(COLUMNS([time])) AS __time_row,
           __tide_time_code(COLUMNS([time])) AS __time_code,
           struct_pack(COLUMNS([value])) AS __value_row,
           CAST(COLUMNS([value]) AS DOUBLE) AS __value
    FROM query_table(tbl)
), __grouped AS (
    SELECT __key,
           list(__time_row ORDER BY __time_code, __value) AS __time_rows,
           list(__value_row ORDER BY __time_code, __value) AS __value_rows,
           list(__time_code ORDER BY __time_code, __value) AS __time_codes,
           list(__value ORDER BY __time_code, __value) AS __values
    FROM __src
    GROUP BY __key
), __split AS (
    SELECT __key, __time_rows, __value_rows,
           __tide_split_series(CAST(__key AS VARCHAR), __time_codes, __values, period, {split_pass}) AS __parts
    FROM __grouped
)
SELECT unnest(__key),
       unnest(__time_rows, recursive := true),
       unnest(__value_rows, recursive := true),
       unnest(__parts.trend) AS trend,
       unnest(__parts.seasonal) AS seasonal,
       unnest(__parts.remainder) AS remainder,
       unnest(__parts.adjusted) AS adjusted,
       unnest(__parts.weight) AS weight,
       __parts.status AS status
FROM __split;

-- One key column by name, or a list of them (exact names, not patterns).
CREATE OR REPLACE TEMP MACRO tide_split(tbl, key VARCHAR, time VARCHAR, value VARCHAR, period := NULL, {split_args}) AS TABLE
    (SELECT * FROM __tide_split_keys(tbl, [key], time, value, period := period, {split_named})),
    (tbl, key VARCHAR[], time VARCHAR, value VARCHAR, period := NULL, {split_args}) AS TABLE
    (SELECT * FROM __tide_split_keys(tbl, key, time, value, period := period, {split_named}));
