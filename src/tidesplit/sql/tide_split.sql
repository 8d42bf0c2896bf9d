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

CREATE OR REPLACE TEMP MACRO __tide_split_keys(tbl, keys, time, value, period := NULL, {split_args}, {multi_args}) AS TABLE
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
), __split AS MATERIALIZED (
    SELECT __key, __time_rows, __value_rows,
           __tide_split_series(CAST(__key AS VARCHAR), __time_codes,
                               typeof(struct_extract_at(__time_rows[1], 1)), current_setting('TimeZone'),
                               __values, period, {split_pass}, {multi_pass}) AS __parts
    FROM __grouped
)
-- the input rows as they came
SELECT unnest(__key),
       unnest(__time_rows, recursive := true),
       unnest(__value_rows, recursive := true),
       unnest(__parts.trend) AS trend,
       unnest(__parts.seasonal) AS seasonal,
       unnest(__parts.seasonal_by_period) AS seasonal_by_period,
       unnest(__parts.remainder) AS remainder,
       unnest(__parts.adjusted) AS adjusted,
       unnest(__parts.weight) AS weight,
       unnest(__parts.inserted) AS inserted,
       __parts.period AS period,
       __parts.periods AS periods,
       __parts.status AS status
FROM __split
WHERE NOT coalesce(fill_gaps, false)
UNION ALL
-- with fill_gaps: every point of the regular grid, the inserted ones marked
SELECT unnest(__key),
       unnest(list_transform(__parts.time_codes, lambda c:
           CASE WHEN false THEN __time_rows[1]
                ELSE row(__tide_time_from_code(c, struct_extract_at(__time_rows[1], 1))) END),
           recursive := true),
       unnest(list_transform(__parts.source, lambda i:
           CASE WHEN i >= 0 THEN __value_rows[i + 1]
                ELSE (CASE WHEN false THEN __value_rows[1] ELSE row(NULL) END) END),
           recursive := true),
       unnest(__parts.trend) AS trend,
       unnest(__parts.seasonal) AS seasonal,
       unnest(__parts.seasonal_by_period) AS seasonal_by_period,
       unnest(__parts.remainder) AS remainder,
       unnest(__parts.adjusted) AS adjusted,
       unnest(__parts.weight) AS weight,
       unnest(__parts.inserted) AS inserted,
       __parts.period AS period,
       __parts.periods AS periods,
       __parts.status AS status
FROM __split
WHERE coalesce(fill_gaps, false);

-- One key column by name, or a list of them (exact names, not patterns).
CREATE OR REPLACE TEMP MACRO tide_split(tbl, key VARCHAR, time VARCHAR, value VARCHAR, period := NULL, {split_args}) AS TABLE
    (SELECT * EXCLUDE (seasonal_by_period, periods) FROM __tide_split_keys(tbl, [key], time, value, period := period, {split_named})),
    (tbl, key VARCHAR[], time VARCHAR, value VARCHAR, period := NULL, {split_args}) AS TABLE
    (SELECT * EXCLUDE (seasonal_by_period, periods) FROM __tide_split_keys(tbl, key, time, value, period := period, {split_named}));

-- Several seasonal periods (MSTL); periods := NULL takes those the time step implies.
CREATE OR REPLACE TEMP MACRO tide_split_multi(tbl, key VARCHAR, time VARCHAR, value VARCHAR, {split_args}, {multi_args}) AS TABLE
    (SELECT * EXCLUDE (period) FROM __tide_split_keys(tbl, [key], time, value, {split_named}, periods := coalesce(periods, []), season_spans := season_spans, iterations := iterations)),
    (tbl, key VARCHAR[], time VARCHAR, value VARCHAR, {split_args}, {multi_args}) AS TABLE
    (SELECT * EXCLUDE (period) FROM __tide_split_keys(tbl, key, time, value, {split_named}, periods := coalesce(periods, []), season_spans := season_spans, iterations := iterations));
