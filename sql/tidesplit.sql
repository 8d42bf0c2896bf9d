-- The SQL functions of tidesplit, loaded by tidesplit.register().
-- Written by tidesplit/sql_build.py from the argument registry; do not edit by hand.

-- Any time column as a sortable BIGINT: integers as they are, dates and timestamps as
-- microseconds since 1970-01-01 (UTC for TIMESTAMPTZ); an infinite one as the smallest
-- BIGINT, which no finite time takes and the UDF refuses. Other types are refused by name.
CREATE OR REPLACE TEMP MACRO __tide_time_code(t BIGINT, name) AS t,
    (t TIMESTAMP, name) AS CASE WHEN isinf(t) THEN (-9223372036854775807 - 1)::BIGINT ELSE epoch_us(t) END,
    (t TIMESTAMPTZ, name) AS CASE WHEN isinf(t) THEN (-9223372036854775807 - 1)::BIGINT ELSE epoch_us(t) END,
    (t DATE, name) AS CASE WHEN isinf(t) THEN (-9223372036854775807 - 1)::BIGINT ELSE epoch_us(t) END,
    (t VARCHAR, name) AS error('the time column "' || name || '" holds text; give integers, DATE, TIMESTAMP or TIMESTAMPTZ (CAST it first)'),
    (t DOUBLE, name) AS error('the time column "' || name || '" holds fractional numbers; give integers, DATE, TIMESTAMP or TIMESTAMPTZ'),
    (t HUGEINT, name) AS error('the time column "' || name || '" holds integers wider than BIGINT; give BIGINT, DATE, TIMESTAMP or TIMESTAMPTZ'),
    (t TIME, name) AS error('the time column "' || name || '" holds times of day without a date; give DATE, TIMESTAMP or TIMESTAMPTZ'),
    (t INTERVAL, name) AS error('the time column "' || name || '" holds intervals; give integers, DATE, TIMESTAMP or TIMESTAMPTZ'),
    (t BOOLEAN, name) AS error('the time column "' || name || '" holds true/false; give integers, DATE, TIMESTAMP or TIMESTAMPTZ');

-- A time code back to the type of a sample time (for rows inserted into gaps).
CREATE OR REPLACE TEMP MACRO __tide_time_from_code(c, sample BIGINT) AS c,
    (c, sample TIMESTAMP) AS make_timestamp(c),
    (c, sample TIMESTAMPTZ) AS timezone('UTC', make_timestamp(c)),
    (c, sample DATE) AS CAST(make_timestamp(c) AS DATE),
    (c, sample VARCHAR) AS error('the time column holds text; give integers, DATE, TIMESTAMP or TIMESTAMPTZ (CAST it first)'),
    (c, sample DOUBLE) AS error('the time column holds fractional numbers; give integers, DATE, TIMESTAMP or TIMESTAMPTZ'),
    (c, sample HUGEINT) AS error('the time column holds integers wider than BIGINT; give BIGINT, DATE, TIMESTAMP or TIMESTAMPTZ'),
    (c, sample TIME) AS error('the time column holds times of day without a date; give DATE, TIMESTAMP or TIMESTAMPTZ'),
    (c, sample INTERVAL) AS error('the time column holds intervals; give integers, DATE, TIMESTAMP or TIMESTAMPTZ'),
    (c, sample BOOLEAN) AS error('the time column holds true/false; give integers, DATE, TIMESTAMP or TIMESTAMPTZ');

-- Why an argument's type is refused (NULL when it is fine), one macro per kind.
CREATE OR REPLACE TEMP MACRO __tide_check_number(name, x) AS
    CASE WHEN NOT regexp_full_match(typeof(x), '^(U?(TINYINT|SMALLINT|INTEGER|BIGINT|HUGEINT)|FLOAT|DOUBLE|DECIMAL\(\d+,\d+\)|"NULL")$')
         THEN name || ' must be a number, got ' || typeof(x) || ' ' || CAST(x AS VARCHAR) END;
CREATE OR REPLACE TEMP MACRO __tide_check_flag(name, x) AS
    CASE WHEN NOT regexp_full_match(typeof(x), '^(BOOLEAN|"NULL")$')
         THEN name || ' must be true or false, got ' || typeof(x) || ' ' || CAST(x AS VARCHAR) END;
CREATE OR REPLACE TEMP MACRO __tide_check_text(name, x) AS
    CASE WHEN NOT regexp_full_match(typeof(x), '^(VARCHAR|"NULL")$')
         THEN name || ' must be text, got ' || typeof(x) || ' ' || CAST(x AS VARCHAR) END;
CREATE OR REPLACE TEMP MACRO __tide_check_numbers(name, x) AS
    CASE WHEN NOT regexp_full_match(typeof(x), '^(((U?(TINYINT|SMALLINT|INTEGER|BIGINT|HUGEINT)|FLOAT|DOUBLE|DECIMAL\(\d+,\d+\))|"NULL")\[\]|"NULL")$')
         THEN name || ' must be a list of numbers, got ' || typeof(x) || ' ' || CAST(x AS VARCHAR) END;
CREATE OR REPLACE TEMP MACRO __tide_check_names(name, x) AS
    CASE WHEN NOT regexp_full_match(typeof(x), '^((VARCHAR|"NULL")\[\]|"NULL")$')
         THEN name || ' must be a list of column names, got ' || typeof(x) || ' ' || CAST(x AS VARCHAR) END;
CREATE OR REPLACE TEMP MACRO __tide_check_days(name, x) AS
    CASE WHEN NOT regexp_full_match(typeof(x), '^(STRUCT\("day" DATE, "name" VARCHAR\)\[\]|"NULL"\[\]|"NULL")$')
         THEN name || ' must be a list of {day DATE, name VARCHAR}, got ' || typeof(x) || ' ' || CAST(x AS VARCHAR) END;

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

-- The public fields of the split UDF's result (DuckDB calls the UDF once for all of them).
CREATE OR REPLACE TEMP MACRO __tide_list_parts(parts) AS struct_pack(trend := parts.trend, seasonal := parts.seasonal, remainder := parts.remainder, adjusted := parts.adjusted, weight := parts.weight, calendar_effect := parts.calendar_effect, outside_effect := parts.outside_effect, adjusted_season_only := parts.adjusted_season_only, period := parts.period, season_span := parts.season_span, trend_span := parts.trend_span, boxcox_lambda := parts.boxcox_lambda, status := parts.status);

-- The components of one series held as a list, for those who write their own GROUP BY.
CREATE OR REPLACE TEMP MACRO tide_split_list(values, period := NULL, season_span := NULL, trend_span := NULL, lowpass_span := NULL, season_degree := NULL, trend_degree := NULL, lowpass_degree := NULL, season_jump := NULL, trend_jump := NULL, lowpass_jump := NULL, robust := false, inner_loops := NULL, outer_loops := NULL, transform := 'none', boxcox_lambda := NULL, boxcox_bounds := NULL, choose_spans := false, on_error := 'raise') AS
    CASE WHEN __tide_refuse([__tide_check_number('period', period),
             __tide_check_number('season_span', season_span),
             __tide_check_number('trend_span', trend_span),
             __tide_check_number('lowpass_span', lowpass_span),
             __tide_check_number('season_degree', season_degree),
             __tide_check_number('trend_degree', trend_degree),
             __tide_check_number('lowpass_degree', lowpass_degree),
             __tide_check_number('season_jump', season_jump),
             __tide_check_number('trend_jump', trend_jump),
             __tide_check_number('lowpass_jump', lowpass_jump),
             __tide_check_flag('robust', robust), __tide_check_number('inner_loops', inner_loops),
             __tide_check_number('outer_loops', outer_loops),
             __tide_check_text('transform', transform),
             __tide_check_number('boxcox_lambda', boxcox_lambda),
             __tide_check_numbers('boxcox_bounds', boxcox_bounds),
             __tide_check_flag('choose_spans', choose_spans),
             __tide_check_text('on_error', on_error)])
    THEN __tide_list_parts(__tide_split_series(NULL, NULL, NULL, NULL, values, NULL, NULL,
        TRY_CAST(period AS DOUBLE),
        NULL,
        TRY_CAST(season_span AS DOUBLE),
        NULL,
        TRY_CAST(trend_span AS DOUBLE),
        TRY_CAST(lowpass_span AS DOUBLE),
        TRY_CAST(season_degree AS DOUBLE),
        TRY_CAST(trend_degree AS DOUBLE),
        TRY_CAST(lowpass_degree AS DOUBLE),
        TRY_CAST(season_jump AS DOUBLE),
        TRY_CAST(trend_jump AS DOUBLE),
        TRY_CAST(lowpass_jump AS DOUBLE),
        TRY_CAST(robust AS BOOLEAN),
        TRY_CAST(inner_loops AS DOUBLE),
        TRY_CAST(outer_loops AS DOUBLE),
        NULL,
        TRY_CAST(transform AS VARCHAR),
        TRY_CAST(boxcox_lambda AS DOUBLE),
        TRY_CAST(boxcox_bounds AS DOUBLE[]),
        TRY_CAST(choose_spans AS BOOLEAN),
        NULL,
        NULL,
        NULL,
        NULL,
        NULL,
        TRY_CAST(on_error AS VARCHAR)))
    END;

-- With fill_gaps the rows are those of the regular grid, input rows picked by their source
-- and inserted times rebuilt from their codes; without, the input rows as they came.
-- fill_gaps is a constant, so DuckDB folds the CASE and keeps one branch.
CREATE OR REPLACE TEMP MACRO __tide_split_keys(tbl, keys, time, value, answer, checks, period := NULL, periods := NULL, season_span := NULL, season_spans := NULL, trend_span := NULL, lowpass_span := NULL, season_degree := NULL, trend_degree := NULL, lowpass_degree := NULL, season_jump := NULL, trend_jump := NULL, lowpass_jump := NULL, robust := NULL, inner_loops := NULL, outer_loops := NULL, iterations := NULL, transform := NULL, boxcox_lambda := NULL, boxcox_bounds := NULL, choose_spans := NULL, calendar_effects := NULL, easter_days := NULL, special_days := NULL, outside_columns := NULL, fill_gaps := NULL, on_error := NULL) AS TABLE
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
             __tide_split_series(CAST(__key AS VARCHAR), __time_codes, typeof(struct_extract_at(__time_shape, 1)),
        current_setting('TimeZone'), __values, __outside_rows, __outside_types,
        TRY_CAST(period AS DOUBLE),
        TRY_CAST(periods AS DOUBLE[]),
        TRY_CAST(season_span AS DOUBLE),
        TRY_CAST(season_spans AS DOUBLE[]),
        TRY_CAST(trend_span AS DOUBLE),
        TRY_CAST(lowpass_span AS DOUBLE),
        TRY_CAST(season_degree AS DOUBLE),
        TRY_CAST(trend_degree AS DOUBLE),
        TRY_CAST(lowpass_degree AS DOUBLE),
        TRY_CAST(season_jump AS DOUBLE),
        TRY_CAST(trend_jump AS DOUBLE),
        TRY_CAST(lowpass_jump AS DOUBLE),
        TRY_CAST(robust AS BOOLEAN),
        TRY_CAST(inner_loops AS DOUBLE),
        TRY_CAST(outer_loops AS DOUBLE),
        TRY_CAST(iterations AS DOUBLE),
        TRY_CAST(transform AS VARCHAR),
        TRY_CAST(boxcox_lambda AS DOUBLE),
        TRY_CAST(boxcox_bounds AS DOUBLE[]),
        TRY_CAST(choose_spans AS BOOLEAN),
        TRY_CAST(calendar_effects AS VARCHAR),
        TRY_CAST(easter_days AS DOUBLE),
        TRY_CAST(special_days AS STRUCT(day DATE, name VARCHAR)[]),
        TRY_CAST(outside_columns AS VARCHAR[]),
        TRY_CAST(fill_gaps AS BOOLEAN),
        TRY_CAST(on_error AS VARCHAR)) AS __parts
      FROM __tide_grouped(tbl, keys, time, value, outside := outside_columns),
           (SELECT __tide_refuse(__tide_name_clashes(keys, time, value, answer)
                                 || __tide_outside_clashes(keys, time, value, outside_columns)
                                 || checks) AS __ok) AS __checked
      WHERE __checked.__ok));

-- One key column by name, or a list of them (exact names, not patterns). Arguments
-- after the value column are taken by name only: by_name_only catches a stray
-- positional one.
CREATE OR REPLACE TEMP MACRO tide_split(tbl, key VARCHAR, time VARCHAR, value VARCHAR, by_name_only := NULL, period := NULL, season_span := NULL, trend_span := NULL, lowpass_span := NULL, season_degree := NULL, trend_degree := NULL, lowpass_degree := NULL, season_jump := NULL, trend_jump := NULL, lowpass_jump := NULL, robust := false, inner_loops := NULL, outer_loops := NULL, transform := 'none', boxcox_lambda := NULL, boxcox_bounds := NULL, choose_spans := false, calendar_effects := 'none', easter_days := NULL, special_days := NULL, outside_columns := NULL, fill_gaps := false, on_error := 'raise') AS TABLE
    (SELECT * EXCLUDE (__seasonal_by_period, __periods)
     RENAME (__period AS period, __season_span AS season_span, __trend_span AS trend_span)
     FROM __tide_split_keys(tbl, [key], time, value, ['trend', 'seasonal', 'remainder', 'adjusted', 'weight', 'calendar_effect', 'outside_effect', 'adjusted_season_only', 'inserted', 'period', 'season_span', 'trend_span', 'boxcox_lambda', 'status'],
         [__tide_check_number('period', period),
             __tide_check_number('season_span', season_span),
             __tide_check_number('trend_span', trend_span),
             __tide_check_number('lowpass_span', lowpass_span),
             __tide_check_number('season_degree', season_degree),
             __tide_check_number('trend_degree', trend_degree),
             __tide_check_number('lowpass_degree', lowpass_degree),
             __tide_check_number('season_jump', season_jump),
             __tide_check_number('trend_jump', trend_jump),
             __tide_check_number('lowpass_jump', lowpass_jump),
             __tide_check_flag('robust', robust), __tide_check_number('inner_loops', inner_loops),
             __tide_check_number('outer_loops', outer_loops),
             __tide_check_text('transform', transform),
             __tide_check_number('boxcox_lambda', boxcox_lambda),
             __tide_check_numbers('boxcox_bounds', boxcox_bounds),
             __tide_check_flag('choose_spans', choose_spans),
             __tide_check_text('calendar_effects', calendar_effects),
             __tide_check_number('easter_days', easter_days),
             __tide_check_days('special_days', special_days),
             __tide_check_names('outside_columns', outside_columns),
             __tide_check_flag('fill_gaps', fill_gaps), __tide_check_text('on_error', on_error)],
         period := __tide_by_name(by_name_only, period), season_span := season_span, trend_span := trend_span, lowpass_span := lowpass_span, season_degree := season_degree, trend_degree := trend_degree, lowpass_degree := lowpass_degree, season_jump := season_jump, trend_jump := trend_jump, lowpass_jump := lowpass_jump, robust := robust, inner_loops := inner_loops, outer_loops := outer_loops, transform := transform, boxcox_lambda := boxcox_lambda, boxcox_bounds := boxcox_bounds, choose_spans := choose_spans, calendar_effects := calendar_effects, easter_days := easter_days, special_days := special_days, outside_columns := outside_columns, fill_gaps := fill_gaps, on_error := on_error)),
    (tbl, key VARCHAR[], time VARCHAR, value VARCHAR, by_name_only := NULL, period := NULL, season_span := NULL, trend_span := NULL, lowpass_span := NULL, season_degree := NULL, trend_degree := NULL, lowpass_degree := NULL, season_jump := NULL, trend_jump := NULL, lowpass_jump := NULL, robust := false, inner_loops := NULL, outer_loops := NULL, transform := 'none', boxcox_lambda := NULL, boxcox_bounds := NULL, choose_spans := false, calendar_effects := 'none', easter_days := NULL, special_days := NULL, outside_columns := NULL, fill_gaps := false, on_error := 'raise') AS TABLE
    (SELECT * EXCLUDE (__seasonal_by_period, __periods)
     RENAME (__period AS period, __season_span AS season_span, __trend_span AS trend_span)
     FROM __tide_split_keys(tbl, key, time, value, ['trend', 'seasonal', 'remainder', 'adjusted', 'weight', 'calendar_effect', 'outside_effect', 'adjusted_season_only', 'inserted', 'period', 'season_span', 'trend_span', 'boxcox_lambda', 'status'],
         [__tide_check_number('period', period),
             __tide_check_number('season_span', season_span),
             __tide_check_number('trend_span', trend_span),
             __tide_check_number('lowpass_span', lowpass_span),
             __tide_check_number('season_degree', season_degree),
             __tide_check_number('trend_degree', trend_degree),
             __tide_check_number('lowpass_degree', lowpass_degree),
             __tide_check_number('season_jump', season_jump),
             __tide_check_number('trend_jump', trend_jump),
             __tide_check_number('lowpass_jump', lowpass_jump),
             __tide_check_flag('robust', robust), __tide_check_number('inner_loops', inner_loops),
             __tide_check_number('outer_loops', outer_loops),
             __tide_check_text('transform', transform),
             __tide_check_number('boxcox_lambda', boxcox_lambda),
             __tide_check_numbers('boxcox_bounds', boxcox_bounds),
             __tide_check_flag('choose_spans', choose_spans),
             __tide_check_text('calendar_effects', calendar_effects),
             __tide_check_number('easter_days', easter_days),
             __tide_check_days('special_days', special_days),
             __tide_check_names('outside_columns', outside_columns),
             __tide_check_flag('fill_gaps', fill_gaps), __tide_check_text('on_error', on_error)],
         period := __tide_by_name(by_name_only, period), season_span := season_span, trend_span := trend_span, lowpass_span := lowpass_span, season_degree := season_degree, trend_degree := trend_degree, lowpass_degree := lowpass_degree, season_jump := season_jump, trend_jump := trend_jump, lowpass_jump := lowpass_jump, robust := robust, inner_loops := inner_loops, outer_loops := outer_loops, transform := transform, boxcox_lambda := boxcox_lambda, boxcox_bounds := boxcox_bounds, choose_spans := choose_spans, calendar_effects := calendar_effects, easter_days := easter_days, special_days := special_days, outside_columns := outside_columns, fill_gaps := fill_gaps, on_error := on_error));

-- Several seasonal periods (MSTL); periods := NULL takes those the time step implies.
CREATE OR REPLACE TEMP MACRO tide_split_multi(tbl, key VARCHAR, time VARCHAR, value VARCHAR, by_name_only := NULL, periods := NULL, season_span := NULL, season_spans := NULL, trend_span := NULL, lowpass_span := NULL, season_degree := NULL, trend_degree := NULL, lowpass_degree := NULL, season_jump := NULL, trend_jump := NULL, lowpass_jump := NULL, robust := false, inner_loops := NULL, outer_loops := NULL, iterations := NULL, transform := 'none', boxcox_lambda := NULL, boxcox_bounds := NULL, calendar_effects := 'none', easter_days := NULL, special_days := NULL, outside_columns := NULL, fill_gaps := false, on_error := 'raise') AS TABLE
    (SELECT * EXCLUDE (__period, __season_span, __trend_span) RENAME (__periods AS periods, __seasonal_by_period AS seasonal_by_period)
     FROM __tide_split_keys(tbl, [key], time, value, ['trend', 'seasonal', 'remainder', 'adjusted', 'weight', 'calendar_effect', 'outside_effect', 'adjusted_season_only', 'inserted', 'periods', 'seasonal_by_period', 'boxcox_lambda', 'status'],
         [__tide_check_numbers('periods', periods),
             __tide_check_number('season_span', season_span),
             __tide_check_numbers('season_spans', season_spans),
             __tide_check_number('trend_span', trend_span),
             __tide_check_number('lowpass_span', lowpass_span),
             __tide_check_number('season_degree', season_degree),
             __tide_check_number('trend_degree', trend_degree),
             __tide_check_number('lowpass_degree', lowpass_degree),
             __tide_check_number('season_jump', season_jump),
             __tide_check_number('trend_jump', trend_jump),
             __tide_check_number('lowpass_jump', lowpass_jump),
             __tide_check_flag('robust', robust), __tide_check_number('inner_loops', inner_loops),
             __tide_check_number('outer_loops', outer_loops),
             __tide_check_number('iterations', iterations),
             __tide_check_text('transform', transform),
             __tide_check_number('boxcox_lambda', boxcox_lambda),
             __tide_check_numbers('boxcox_bounds', boxcox_bounds),
             __tide_check_text('calendar_effects', calendar_effects),
             __tide_check_number('easter_days', easter_days),
             __tide_check_days('special_days', special_days),
             __tide_check_names('outside_columns', outside_columns),
             __tide_check_flag('fill_gaps', fill_gaps), __tide_check_text('on_error', on_error)],
         periods := coalesce(__tide_by_name(by_name_only, periods), []), season_span := season_span, season_spans := season_spans, trend_span := trend_span, lowpass_span := lowpass_span, season_degree := season_degree, trend_degree := trend_degree, lowpass_degree := lowpass_degree, season_jump := season_jump, trend_jump := trend_jump, lowpass_jump := lowpass_jump, robust := robust, inner_loops := inner_loops, outer_loops := outer_loops, iterations := iterations, transform := transform, boxcox_lambda := boxcox_lambda, boxcox_bounds := boxcox_bounds, calendar_effects := calendar_effects, easter_days := easter_days, special_days := special_days, outside_columns := outside_columns, fill_gaps := fill_gaps, on_error := on_error)),
    (tbl, key VARCHAR[], time VARCHAR, value VARCHAR, by_name_only := NULL, periods := NULL, season_span := NULL, season_spans := NULL, trend_span := NULL, lowpass_span := NULL, season_degree := NULL, trend_degree := NULL, lowpass_degree := NULL, season_jump := NULL, trend_jump := NULL, lowpass_jump := NULL, robust := false, inner_loops := NULL, outer_loops := NULL, iterations := NULL, transform := 'none', boxcox_lambda := NULL, boxcox_bounds := NULL, calendar_effects := 'none', easter_days := NULL, special_days := NULL, outside_columns := NULL, fill_gaps := false, on_error := 'raise') AS TABLE
    (SELECT * EXCLUDE (__period, __season_span, __trend_span) RENAME (__periods AS periods, __seasonal_by_period AS seasonal_by_period)
     FROM __tide_split_keys(tbl, key, time, value, ['trend', 'seasonal', 'remainder', 'adjusted', 'weight', 'calendar_effect', 'outside_effect', 'adjusted_season_only', 'inserted', 'periods', 'seasonal_by_period', 'boxcox_lambda', 'status'],
         [__tide_check_numbers('periods', periods),
             __tide_check_number('season_span', season_span),
             __tide_check_numbers('season_spans', season_spans),
             __tide_check_number('trend_span', trend_span),
             __tide_check_number('lowpass_span', lowpass_span),
             __tide_check_number('season_degree', season_degree),
             __tide_check_number('trend_degree', trend_degree),
             __tide_check_number('lowpass_degree', lowpass_degree),
             __tide_check_number('season_jump', season_jump),
             __tide_check_number('trend_jump', trend_jump),
             __tide_check_number('lowpass_jump', lowpass_jump),
             __tide_check_flag('robust', robust), __tide_check_number('inner_loops', inner_loops),
             __tide_check_number('outer_loops', outer_loops),
             __tide_check_number('iterations', iterations),
             __tide_check_text('transform', transform),
             __tide_check_number('boxcox_lambda', boxcox_lambda),
             __tide_check_numbers('boxcox_bounds', boxcox_bounds),
             __tide_check_text('calendar_effects', calendar_effects),
             __tide_check_number('easter_days', easter_days),
             __tide_check_days('special_days', special_days),
             __tide_check_names('outside_columns', outside_columns),
             __tide_check_flag('fill_gaps', fill_gaps), __tide_check_text('on_error', on_error)],
         periods := coalesce(__tide_by_name(by_name_only, periods), []), season_span := season_span, season_spans := season_spans, trend_span := trend_span, lowpass_span := lowpass_span, season_degree := season_degree, trend_degree := trend_degree, lowpass_degree := lowpass_degree, season_jump := season_jump, trend_jump := trend_jump, lowpass_jump := lowpass_jump, robust := robust, inner_loops := inner_loops, outer_loops := outer_loops, iterations := iterations, transform := transform, boxcox_lambda := boxcox_lambda, boxcox_bounds := boxcox_bounds, calendar_effects := calendar_effects, easter_days := easter_days, special_days := special_days, outside_columns := outside_columns, fill_gaps := fill_gaps, on_error := on_error));

-- Per-series answers, one row per key.
CREATE OR REPLACE TEMP MACRO __tide_profile_keys(tbl, keys, time, value, period := NULL, periods := NULL, season_span := NULL, season_spans := NULL, trend_span := NULL, lowpass_span := NULL, season_degree := NULL, trend_degree := NULL, lowpass_degree := NULL, season_jump := NULL, trend_jump := NULL, lowpass_jump := NULL, robust := NULL, inner_loops := NULL, outer_loops := NULL, iterations := NULL, transform := NULL, boxcox_lambda := NULL, boxcox_bounds := NULL, choose_spans := NULL, calendar_effects := NULL, easter_days := NULL, special_days := NULL, outside_columns := NULL, on_error := NULL) AS TABLE
SELECT unnest(__key), unnest(__p)
FROM (SELECT __key,
             __tide_profile_series(CAST(__key AS VARCHAR), __time_codes, typeof(struct_extract_at(__time_shape, 1)),
        current_setting('TimeZone'), __values, __outside_rows, __outside_types,
        TRY_CAST(period AS DOUBLE),
        TRY_CAST(periods AS DOUBLE[]),
        TRY_CAST(season_span AS DOUBLE),
        TRY_CAST(season_spans AS DOUBLE[]),
        TRY_CAST(trend_span AS DOUBLE),
        TRY_CAST(lowpass_span AS DOUBLE),
        TRY_CAST(season_degree AS DOUBLE),
        TRY_CAST(trend_degree AS DOUBLE),
        TRY_CAST(lowpass_degree AS DOUBLE),
        TRY_CAST(season_jump AS DOUBLE),
        TRY_CAST(trend_jump AS DOUBLE),
        TRY_CAST(lowpass_jump AS DOUBLE),
        TRY_CAST(robust AS BOOLEAN),
        TRY_CAST(inner_loops AS DOUBLE),
        TRY_CAST(outer_loops AS DOUBLE),
        TRY_CAST(iterations AS DOUBLE),
        TRY_CAST(transform AS VARCHAR),
        TRY_CAST(boxcox_lambda AS DOUBLE),
        TRY_CAST(boxcox_bounds AS DOUBLE[]),
        TRY_CAST(choose_spans AS BOOLEAN),
        TRY_CAST(calendar_effects AS VARCHAR),
        TRY_CAST(easter_days AS DOUBLE),
        TRY_CAST(special_days AS STRUCT(day DATE, name VARCHAR)[]),
        TRY_CAST(outside_columns AS VARCHAR[]),
        TRY_CAST(on_error AS VARCHAR)) AS __p
      FROM __tide_grouped(tbl, keys, time, value, outside := outside_columns),
           (SELECT __tide_refuse(__tide_name_clashes(keys, time, value, ['points', 'missing', 'time_step', 'strength_of_trend', 'strength_of_season', 'seasonal_amplitude', 'remainder_sd', 'share_down_weighted', 'remainder_acf1', 'strength_by_period', 'peak_position', 'peak_label', 'trough_position', 'trough_label', 'effects', 'period', 'periods', 'season_span', 'trend_span', 'boxcox_lambda', 'status'])
          || __tide_outside_clashes(keys, time, value, outside_columns)
          || [__tide_check_number('period', period), __tide_check_numbers('periods', periods),
             __tide_check_number('season_span', season_span),
             __tide_check_numbers('season_spans', season_spans),
             __tide_check_number('trend_span', trend_span),
             __tide_check_number('lowpass_span', lowpass_span),
             __tide_check_number('season_degree', season_degree),
             __tide_check_number('trend_degree', trend_degree),
             __tide_check_number('lowpass_degree', lowpass_degree),
             __tide_check_number('season_jump', season_jump),
             __tide_check_number('trend_jump', trend_jump),
             __tide_check_number('lowpass_jump', lowpass_jump),
             __tide_check_flag('robust', robust), __tide_check_number('inner_loops', inner_loops),
             __tide_check_number('outer_loops', outer_loops),
             __tide_check_number('iterations', iterations),
             __tide_check_text('transform', transform),
             __tide_check_number('boxcox_lambda', boxcox_lambda),
             __tide_check_numbers('boxcox_bounds', boxcox_bounds),
             __tide_check_flag('choose_spans', choose_spans),
             __tide_check_text('calendar_effects', calendar_effects),
             __tide_check_number('easter_days', easter_days),
             __tide_check_days('special_days', special_days),
             __tide_check_names('outside_columns', outside_columns),
             __tide_check_text('on_error', on_error)]) AS __ok) AS __checked
      WHERE __checked.__ok);

CREATE OR REPLACE TEMP MACRO tide_profile(tbl, key VARCHAR, time VARCHAR, value VARCHAR, by_name_only := NULL, period := NULL, periods := NULL, season_span := NULL, season_spans := NULL, trend_span := NULL, lowpass_span := NULL, season_degree := NULL, trend_degree := NULL, lowpass_degree := NULL, season_jump := NULL, trend_jump := NULL, lowpass_jump := NULL, robust := false, inner_loops := NULL, outer_loops := NULL, iterations := NULL, transform := 'none', boxcox_lambda := NULL, boxcox_bounds := NULL, choose_spans := false, calendar_effects := 'none', easter_days := NULL, special_days := NULL, outside_columns := NULL, on_error := 'raise') AS TABLE
    (SELECT * FROM __tide_profile_keys(tbl, [key], time, value, period := __tide_by_name(by_name_only, period), periods := periods, season_span := season_span, season_spans := season_spans, trend_span := trend_span, lowpass_span := lowpass_span, season_degree := season_degree, trend_degree := trend_degree, lowpass_degree := lowpass_degree, season_jump := season_jump, trend_jump := trend_jump, lowpass_jump := lowpass_jump, robust := robust, inner_loops := inner_loops, outer_loops := outer_loops, iterations := iterations, transform := transform, boxcox_lambda := boxcox_lambda, boxcox_bounds := boxcox_bounds, choose_spans := choose_spans, calendar_effects := calendar_effects, easter_days := easter_days, special_days := special_days, outside_columns := outside_columns, on_error := on_error)),
    (tbl, key VARCHAR[], time VARCHAR, value VARCHAR, by_name_only := NULL, period := NULL, periods := NULL, season_span := NULL, season_spans := NULL, trend_span := NULL, lowpass_span := NULL, season_degree := NULL, trend_degree := NULL, lowpass_degree := NULL, season_jump := NULL, trend_jump := NULL, lowpass_jump := NULL, robust := false, inner_loops := NULL, outer_loops := NULL, iterations := NULL, transform := 'none', boxcox_lambda := NULL, boxcox_bounds := NULL, choose_spans := false, calendar_effects := 'none', easter_days := NULL, special_days := NULL, outside_columns := NULL, on_error := 'raise') AS TABLE
    (SELECT * FROM __tide_profile_keys(tbl, key, time, value, period := __tide_by_name(by_name_only, period), periods := periods, season_span := season_span, season_spans := season_spans, trend_span := trend_span, lowpass_span := lowpass_span, season_degree := season_degree, trend_degree := trend_degree, lowpass_degree := lowpass_degree, season_jump := season_jump, trend_jump := trend_jump, lowpass_jump := lowpass_jump, robust := robust, inner_loops := inner_loops, outer_loops := outer_loops, iterations := iterations, transform := transform, boxcox_lambda := boxcox_lambda, boxcox_bounds := boxcox_bounds, choose_spans := choose_spans, calendar_effects := calendar_effects, easter_days := easter_days, special_days := special_days, outside_columns := outside_columns, on_error := on_error));

-- Points too far out to be noise (all rows with all_rows := true); every row
-- of a series that could not be split, with its status.
CREATE OR REPLACE TEMP MACRO __tide_outliers_keys(tbl, keys, time, value, period := NULL, periods := NULL, season_span := NULL, season_spans := NULL, trend_span := NULL, lowpass_span := NULL, season_degree := NULL, trend_degree := NULL, lowpass_degree := NULL, season_jump := NULL, trend_jump := NULL, lowpass_jump := NULL, robust := NULL, inner_loops := NULL, outer_loops := NULL, iterations := NULL, transform := NULL, boxcox_lambda := NULL, boxcox_bounds := NULL, calendar_effects := NULL, easter_days := NULL, special_days := NULL, outside_columns := NULL, on_error := NULL, rule := NULL, significance := NULL, threshold := NULL, all_rows := NULL) AS TABLE
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
                 __tide_outlier_series(CAST(__key AS VARCHAR), __time_codes, typeof(struct_extract_at(__time_shape, 1)),
        current_setting('TimeZone'), __values, __outside_rows, __outside_types,
        TRY_CAST(period AS DOUBLE),
        TRY_CAST(periods AS DOUBLE[]),
        TRY_CAST(season_span AS DOUBLE),
        TRY_CAST(season_spans AS DOUBLE[]),
        TRY_CAST(trend_span AS DOUBLE),
        TRY_CAST(lowpass_span AS DOUBLE),
        TRY_CAST(season_degree AS DOUBLE),
        TRY_CAST(trend_degree AS DOUBLE),
        TRY_CAST(lowpass_degree AS DOUBLE),
        TRY_CAST(season_jump AS DOUBLE),
        TRY_CAST(trend_jump AS DOUBLE),
        TRY_CAST(lowpass_jump AS DOUBLE),
        TRY_CAST(robust AS BOOLEAN),
        TRY_CAST(inner_loops AS DOUBLE),
        TRY_CAST(outer_loops AS DOUBLE),
        TRY_CAST(iterations AS DOUBLE),
        TRY_CAST(transform AS VARCHAR),
        TRY_CAST(boxcox_lambda AS DOUBLE),
        TRY_CAST(boxcox_bounds AS DOUBLE[]),
        TRY_CAST(calendar_effects AS VARCHAR),
        TRY_CAST(easter_days AS DOUBLE),
        TRY_CAST(special_days AS STRUCT(day DATE, name VARCHAR)[]),
        TRY_CAST(outside_columns AS VARCHAR[]),
        TRY_CAST(on_error AS VARCHAR),
        TRY_CAST(rule AS VARCHAR),
        TRY_CAST(significance AS DOUBLE),
        TRY_CAST(threshold AS DOUBLE),
        TRY_CAST(all_rows AS BOOLEAN)) AS __o
          FROM __tide_grouped(tbl, keys, time, value, outside := outside_columns),
               (SELECT __tide_refuse(__tide_name_clashes(keys, time, value, ['expected', 'remainder', 'score', 'direction', 'weight', 'is_outlier', 'status'])
          || __tide_outside_clashes(keys, time, value, outside_columns)
          || [__tide_check_number('period', period), __tide_check_numbers('periods', periods),
             __tide_check_number('season_span', season_span),
             __tide_check_numbers('season_spans', season_spans),
             __tide_check_number('trend_span', trend_span),
             __tide_check_number('lowpass_span', lowpass_span),
             __tide_check_number('season_degree', season_degree),
             __tide_check_number('trend_degree', trend_degree),
             __tide_check_number('lowpass_degree', lowpass_degree),
             __tide_check_number('season_jump', season_jump),
             __tide_check_number('trend_jump', trend_jump),
             __tide_check_number('lowpass_jump', lowpass_jump),
             __tide_check_flag('robust', robust), __tide_check_number('inner_loops', inner_loops),
             __tide_check_number('outer_loops', outer_loops),
             __tide_check_number('iterations', iterations),
             __tide_check_text('transform', transform),
             __tide_check_number('boxcox_lambda', boxcox_lambda),
             __tide_check_numbers('boxcox_bounds', boxcox_bounds),
             __tide_check_text('calendar_effects', calendar_effects),
             __tide_check_number('easter_days', easter_days),
             __tide_check_days('special_days', special_days),
             __tide_check_names('outside_columns', outside_columns),
             __tide_check_text('on_error', on_error), __tide_check_text('rule', rule),
             __tide_check_number('significance', significance),
             __tide_check_number('threshold', threshold), __tide_check_flag('all_rows', all_rows)]) AS __ok) AS __checked
          WHERE __checked.__ok))
WHERE __is_outlier OR coalesce(all_rows, false) OR NOT starts_with(__status, 'ok');

CREATE OR REPLACE TEMP MACRO tide_outliers(tbl, key VARCHAR, time VARCHAR, value VARCHAR, by_name_only := NULL, period := NULL, periods := NULL, season_span := NULL, season_spans := NULL, trend_span := NULL, lowpass_span := NULL, season_degree := NULL, trend_degree := NULL, lowpass_degree := NULL, season_jump := NULL, trend_jump := NULL, lowpass_jump := NULL, robust := true, inner_loops := 2, outer_loops := 1, iterations := NULL, transform := 'none', boxcox_lambda := NULL, boxcox_bounds := NULL, calendar_effects := 'none', easter_days := NULL, special_days := NULL, outside_columns := NULL, on_error := 'raise', rule := 'stepwise', significance := NULL, threshold := NULL, all_rows := false) AS TABLE
    (SELECT * RENAME (__is_outlier AS is_outlier, __status AS status)
     FROM __tide_outliers_keys(tbl, [key], time, value, period := __tide_by_name(by_name_only, period), periods := periods, season_span := season_span, season_spans := season_spans, trend_span := trend_span, lowpass_span := lowpass_span, season_degree := season_degree, trend_degree := trend_degree, lowpass_degree := lowpass_degree, season_jump := season_jump, trend_jump := trend_jump, lowpass_jump := lowpass_jump, robust := robust, inner_loops := inner_loops, outer_loops := outer_loops, iterations := iterations, transform := transform, boxcox_lambda := boxcox_lambda, boxcox_bounds := boxcox_bounds, calendar_effects := calendar_effects, easter_days := easter_days, special_days := special_days, outside_columns := outside_columns, on_error := on_error, rule := rule, significance := significance, threshold := threshold, all_rows := all_rows)),
    (tbl, key VARCHAR[], time VARCHAR, value VARCHAR, by_name_only := NULL, period := NULL, periods := NULL, season_span := NULL, season_spans := NULL, trend_span := NULL, lowpass_span := NULL, season_degree := NULL, trend_degree := NULL, lowpass_degree := NULL, season_jump := NULL, trend_jump := NULL, lowpass_jump := NULL, robust := true, inner_loops := 2, outer_loops := 1, iterations := NULL, transform := 'none', boxcox_lambda := NULL, boxcox_bounds := NULL, calendar_effects := 'none', easter_days := NULL, special_days := NULL, outside_columns := NULL, on_error := 'raise', rule := 'stepwise', significance := NULL, threshold := NULL, all_rows := false) AS TABLE
    (SELECT * RENAME (__is_outlier AS is_outlier, __status AS status)
     FROM __tide_outliers_keys(tbl, key, time, value, period := __tide_by_name(by_name_only, period), periods := periods, season_span := season_span, season_spans := season_spans, trend_span := trend_span, lowpass_span := lowpass_span, season_degree := season_degree, trend_degree := trend_degree, lowpass_degree := lowpass_degree, season_jump := season_jump, trend_jump := trend_jump, lowpass_jump := lowpass_jump, robust := robust, inner_loops := inner_loops, outer_loops := outer_loops, iterations := iterations, transform := transform, boxcox_lambda := boxcox_lambda, boxcox_bounds := boxcox_bounds, calendar_effects := calendar_effects, easter_days := easter_days, special_days := special_days, outside_columns := outside_columns, on_error := on_error, rule := rule, significance := significance, threshold := threshold, all_rows := all_rows));

-- Future rows per key, steps_ahead of them, with prediction intervals; a series that could not
-- be split (on_error := 'keep') gives one row with its status and NULL forecasts.
CREATE OR REPLACE TEMP MACRO __tide_forecast_keys(tbl, keys, time, value, period := NULL, periods := NULL, season_span := NULL, season_spans := NULL, trend_span := NULL, lowpass_span := NULL, season_degree := NULL, trend_degree := NULL, lowpass_degree := NULL, season_jump := NULL, trend_jump := NULL, lowpass_jump := NULL, robust := NULL, inner_loops := NULL, outer_loops := NULL, iterations := NULL, transform := NULL, boxcox_lambda := NULL, boxcox_bounds := NULL, calendar_effects := NULL, easter_days := NULL, special_days := NULL, on_error := NULL, steps_ahead := NULL, coverage := NULL, trend_model := NULL) AS TABLE
SELECT unnest(__key),
       unnest(__tide_time_rows(__f.time_codes, __time_rows), recursive := true),
       unnest(__f.steps_ahead) AS steps_ahead,
       unnest(__f.forecast) AS forecast,
       unnest(__f.low) AS low,
       unnest(__f.high) AS high,
       __f.status AS status
FROM (SELECT __key, __time_rows,
             __tide_forecast_series(CAST(__key AS VARCHAR), __time_codes, typeof(struct_extract_at(__time_shape, 1)),
        current_setting('TimeZone'), __values, __outside_rows, __outside_types,
        TRY_CAST(period AS DOUBLE),
        TRY_CAST(periods AS DOUBLE[]),
        TRY_CAST(season_span AS DOUBLE),
        TRY_CAST(season_spans AS DOUBLE[]),
        TRY_CAST(trend_span AS DOUBLE),
        TRY_CAST(lowpass_span AS DOUBLE),
        TRY_CAST(season_degree AS DOUBLE),
        TRY_CAST(trend_degree AS DOUBLE),
        TRY_CAST(lowpass_degree AS DOUBLE),
        TRY_CAST(season_jump AS DOUBLE),
        TRY_CAST(trend_jump AS DOUBLE),
        TRY_CAST(lowpass_jump AS DOUBLE),
        TRY_CAST(robust AS BOOLEAN),
        TRY_CAST(inner_loops AS DOUBLE),
        TRY_CAST(outer_loops AS DOUBLE),
        TRY_CAST(iterations AS DOUBLE),
        TRY_CAST(transform AS VARCHAR),
        TRY_CAST(boxcox_lambda AS DOUBLE),
        TRY_CAST(boxcox_bounds AS DOUBLE[]),
        TRY_CAST(calendar_effects AS VARCHAR),
        TRY_CAST(easter_days AS DOUBLE),
        TRY_CAST(special_days AS STRUCT(day DATE, name VARCHAR)[]),
        TRY_CAST(on_error AS VARCHAR),
        TRY_CAST(steps_ahead AS DOUBLE),
        TRY_CAST(coverage AS DOUBLE),
        TRY_CAST(trend_model AS VARCHAR)) AS __f
      FROM __tide_grouped(tbl, keys, time, value, outside := NULL),
           (SELECT __tide_refuse(__tide_name_clashes(keys, time, value, ['steps_ahead', 'forecast', 'low', 'high', 'status'])
          || __tide_outside_clashes(keys, time, value, NULL)
          || [__tide_check_number('period', period), __tide_check_numbers('periods', periods),
             __tide_check_number('season_span', season_span),
             __tide_check_numbers('season_spans', season_spans),
             __tide_check_number('trend_span', trend_span),
             __tide_check_number('lowpass_span', lowpass_span),
             __tide_check_number('season_degree', season_degree),
             __tide_check_number('trend_degree', trend_degree),
             __tide_check_number('lowpass_degree', lowpass_degree),
             __tide_check_number('season_jump', season_jump),
             __tide_check_number('trend_jump', trend_jump),
             __tide_check_number('lowpass_jump', lowpass_jump),
             __tide_check_flag('robust', robust), __tide_check_number('inner_loops', inner_loops),
             __tide_check_number('outer_loops', outer_loops),
             __tide_check_number('iterations', iterations),
             __tide_check_text('transform', transform),
             __tide_check_number('boxcox_lambda', boxcox_lambda),
             __tide_check_numbers('boxcox_bounds', boxcox_bounds),
             __tide_check_text('calendar_effects', calendar_effects),
             __tide_check_number('easter_days', easter_days),
             __tide_check_days('special_days', special_days),
             __tide_check_text('on_error', on_error),
             __tide_check_number('steps_ahead', steps_ahead),
             __tide_check_number('coverage', coverage),
             __tide_check_text('trend_model', trend_model)]) AS __ok) AS __checked
      WHERE __checked.__ok);

CREATE OR REPLACE TEMP MACRO tide_forecast(tbl, key VARCHAR, time VARCHAR, value VARCHAR, by_name_only := NULL, period := NULL, periods := NULL, season_span := NULL, season_spans := NULL, trend_span := NULL, lowpass_span := NULL, season_degree := NULL, trend_degree := NULL, lowpass_degree := NULL, season_jump := NULL, trend_jump := NULL, lowpass_jump := NULL, robust := false, inner_loops := NULL, outer_loops := NULL, iterations := NULL, transform := 'none', boxcox_lambda := NULL, boxcox_bounds := NULL, calendar_effects := 'none', easter_days := NULL, special_days := NULL, on_error := 'raise', steps_ahead := 12, coverage := 0.95, trend_model := 'damped') AS TABLE
    (SELECT * FROM __tide_forecast_keys(tbl, [key], time, value, period := __tide_by_name(by_name_only, period), periods := periods, season_span := season_span, season_spans := season_spans, trend_span := trend_span, lowpass_span := lowpass_span, season_degree := season_degree, trend_degree := trend_degree, lowpass_degree := lowpass_degree, season_jump := season_jump, trend_jump := trend_jump, lowpass_jump := lowpass_jump, robust := robust, inner_loops := inner_loops, outer_loops := outer_loops, iterations := iterations, transform := transform, boxcox_lambda := boxcox_lambda, boxcox_bounds := boxcox_bounds, calendar_effects := calendar_effects, easter_days := easter_days, special_days := special_days, on_error := on_error, steps_ahead := steps_ahead, coverage := coverage, trend_model := trend_model)),
    (tbl, key VARCHAR[], time VARCHAR, value VARCHAR, by_name_only := NULL, period := NULL, periods := NULL, season_span := NULL, season_spans := NULL, trend_span := NULL, lowpass_span := NULL, season_degree := NULL, trend_degree := NULL, lowpass_degree := NULL, season_jump := NULL, trend_jump := NULL, lowpass_jump := NULL, robust := false, inner_loops := NULL, outer_loops := NULL, iterations := NULL, transform := 'none', boxcox_lambda := NULL, boxcox_bounds := NULL, calendar_effects := 'none', easter_days := NULL, special_days := NULL, on_error := 'raise', steps_ahead := 12, coverage := 0.95, trend_model := 'damped') AS TABLE
    (SELECT * FROM __tide_forecast_keys(tbl, key, time, value, period := __tide_by_name(by_name_only, period), periods := periods, season_span := season_span, season_spans := season_spans, trend_span := trend_span, lowpass_span := lowpass_span, season_degree := season_degree, trend_degree := trend_degree, lowpass_degree := lowpass_degree, season_jump := season_jump, trend_jump := trend_jump, lowpass_jump := lowpass_jump, robust := robust, inner_loops := inner_loops, outer_loops := outer_loops, iterations := iterations, transform := transform, boxcox_lambda := boxcox_lambda, boxcox_bounds := boxcox_bounds, calendar_effects := calendar_effects, easter_days := easter_days, special_days := special_days, on_error := on_error, steps_ahead := steps_ahead, coverage := coverage, trend_model := trend_model));

-- A sample of keys split again by statsmodels under the same settings: the largest
-- difference of each component, or why statsmodels cannot follow.
CREATE OR REPLACE TEMP MACRO __tide_audit_keys(tbl, keys, time, value, period := NULL, periods := NULL, season_span := NULL, season_spans := NULL, trend_span := NULL, lowpass_span := NULL, season_degree := NULL, trend_degree := NULL, lowpass_degree := NULL, season_jump := NULL, trend_jump := NULL, lowpass_jump := NULL, robust := NULL, inner_loops := NULL, outer_loops := NULL, iterations := NULL, transform := NULL, boxcox_lambda := NULL, boxcox_bounds := NULL, on_error := NULL, sample := NULL) AS TABLE
SELECT unnest(__key), unnest(__a)
FROM (SELECT __key,
             __tide_audit_series(CAST(__key AS VARCHAR), __time_codes, typeof(struct_extract_at(__time_shape, 1)),
        current_setting('TimeZone'), __values, __outside_rows, __outside_types,
        TRY_CAST(period AS DOUBLE),
        TRY_CAST(periods AS DOUBLE[]),
        TRY_CAST(season_span AS DOUBLE),
        TRY_CAST(season_spans AS DOUBLE[]),
        TRY_CAST(trend_span AS DOUBLE),
        TRY_CAST(lowpass_span AS DOUBLE),
        TRY_CAST(season_degree AS DOUBLE),
        TRY_CAST(trend_degree AS DOUBLE),
        TRY_CAST(lowpass_degree AS DOUBLE),
        TRY_CAST(season_jump AS DOUBLE),
        TRY_CAST(trend_jump AS DOUBLE),
        TRY_CAST(lowpass_jump AS DOUBLE),
        TRY_CAST(robust AS BOOLEAN),
        TRY_CAST(inner_loops AS DOUBLE),
        TRY_CAST(outer_loops AS DOUBLE),
        TRY_CAST(iterations AS DOUBLE),
        TRY_CAST(transform AS VARCHAR),
        TRY_CAST(boxcox_lambda AS DOUBLE),
        TRY_CAST(boxcox_bounds AS DOUBLE[]),
        TRY_CAST(on_error AS VARCHAR),
        TRY_CAST(sample AS DOUBLE)) AS __a
      FROM (SELECT * FROM __tide_grouped(tbl, keys, time, value)
            ORDER BY hash(CAST(__key AS VARCHAR)) LIMIT sample),
           (SELECT __tide_refuse(__tide_name_clashes(keys, time, value, ['reference', 'points_compared', 'trend_gap', 'seasonal_gap', 'remainder_gap', 'status'])
          || __tide_outside_clashes(keys, time, value, NULL)
          || [__tide_check_number('period', period), __tide_check_numbers('periods', periods),
             __tide_check_number('season_span', season_span),
             __tide_check_numbers('season_spans', season_spans),
             __tide_check_number('trend_span', trend_span),
             __tide_check_number('lowpass_span', lowpass_span),
             __tide_check_number('season_degree', season_degree),
             __tide_check_number('trend_degree', trend_degree),
             __tide_check_number('lowpass_degree', lowpass_degree),
             __tide_check_number('season_jump', season_jump),
             __tide_check_number('trend_jump', trend_jump),
             __tide_check_number('lowpass_jump', lowpass_jump),
             __tide_check_flag('robust', robust), __tide_check_number('inner_loops', inner_loops),
             __tide_check_number('outer_loops', outer_loops),
             __tide_check_number('iterations', iterations),
             __tide_check_text('transform', transform),
             __tide_check_number('boxcox_lambda', boxcox_lambda),
             __tide_check_numbers('boxcox_bounds', boxcox_bounds),
             __tide_check_text('on_error', on_error), __tide_check_number('sample', sample)]) AS __ok) AS __checked
      WHERE __checked.__ok);

CREATE OR REPLACE TEMP MACRO tide_audit(tbl, key VARCHAR, time VARCHAR, value VARCHAR, by_name_only := NULL, period := NULL, periods := NULL, season_span := NULL, season_spans := NULL, trend_span := NULL, lowpass_span := NULL, season_degree := NULL, trend_degree := NULL, lowpass_degree := NULL, season_jump := NULL, trend_jump := NULL, lowpass_jump := NULL, robust := false, inner_loops := NULL, outer_loops := NULL, iterations := NULL, transform := 'none', boxcox_lambda := NULL, boxcox_bounds := NULL, on_error := 'raise', sample := 20) AS TABLE
    (SELECT * FROM __tide_audit_keys(tbl, [key], time, value, period := __tide_by_name(by_name_only, period), periods := periods, season_span := season_span, season_spans := season_spans, trend_span := trend_span, lowpass_span := lowpass_span, season_degree := season_degree, trend_degree := trend_degree, lowpass_degree := lowpass_degree, season_jump := season_jump, trend_jump := trend_jump, lowpass_jump := lowpass_jump, robust := robust, inner_loops := inner_loops, outer_loops := outer_loops, iterations := iterations, transform := transform, boxcox_lambda := boxcox_lambda, boxcox_bounds := boxcox_bounds, on_error := on_error, sample := sample)),
    (tbl, key VARCHAR[], time VARCHAR, value VARCHAR, by_name_only := NULL, period := NULL, periods := NULL, season_span := NULL, season_spans := NULL, trend_span := NULL, lowpass_span := NULL, season_degree := NULL, trend_degree := NULL, lowpass_degree := NULL, season_jump := NULL, trend_jump := NULL, lowpass_jump := NULL, robust := false, inner_loops := NULL, outer_loops := NULL, iterations := NULL, transform := 'none', boxcox_lambda := NULL, boxcox_bounds := NULL, on_error := 'raise', sample := 20) AS TABLE
    (SELECT * FROM __tide_audit_keys(tbl, key, time, value, period := __tide_by_name(by_name_only, period), periods := periods, season_span := season_span, season_spans := season_spans, trend_span := trend_span, lowpass_span := lowpass_span, season_degree := season_degree, trend_degree := trend_degree, lowpass_degree := lowpass_degree, season_jump := season_jump, trend_jump := trend_jump, lowpass_jump := lowpass_jump, robust := robust, inner_loops := inner_loops, outer_loops := outer_loops, iterations := iterations, transform := transform, boxcox_lambda := boxcox_lambda, boxcox_bounds := boxcox_bounds, on_error := on_error, sample := sample));
