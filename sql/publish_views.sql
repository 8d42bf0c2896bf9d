-- The views that `tidesplit publish` makes beside its tables, for BI tools and plain SQL.
-- Plain SQL that DuckDB and PostgreSQL both run; nothing here calls Python.
--
-- The publish step fills in the names in braces, each quoted as an identifier:
--   {keys}        the key columns, comma-separated ("shop", "product")
--   {time}        the time column; {value} the value column
--   {raw}         the table new raw rows land in
--   {components}, {latest_cycle}, {next_cycle}, {refresh_keys}: the published tables,
--   and each view's own name, all in the publish schema.
--
-- The tables: components (one row per input row: trend, seasonal, remainder, adjusted, ...,
-- as tide_split gives them), profiles (one row per key, as tide_profile gives them),
-- latest_cycle (the seasonal part of each key's last full cycle of its regular grid, with
-- the cycle position), next_cycle (the times of the next cycle with the seasonal part
-- carried forward from the latest cycle), components_refresh_keys (each key's fingerprint,
-- when it was last computed and with which arguments) and components_revisions (how far
-- the published adjusted values moved at each refresh).
--
-- How a seasonal part adjusts a value, by the transform the series was split under
-- (boxcox_lambda NULL: none; 0: log; otherwise Box-Cox with that lambda):
--   none     adjusted = value - seasonal                     (an additive factor)
--   log      adjusted = value / exp(seasonal)                (a multiplicative factor)
--   Box-Cox  adjusted = (lambda * (b - seasonal) + 1) ^ (1 / lambda),
--            b = (value ^ lambda - 1) / lambda                (no single factor: the value
--            goes to the transformed scale, loses its seasonal part, and comes back)
-- These are the rules tide_split's own `adjusted` column follows.

-- The seasonally adjusted series, as published; `latest_cycle` marks the values of each
-- key's last cycle, the ones the next refresh is most likely to revise.
CREATE VIEW {adjusted_series} AS
SELECT {keys}, {time}, {value}, adjusted, trend, seasonal, remainder, status,
       COALESCE({time} >= cycle_start, false) AS latest_cycle
FROM {components}
LEFT JOIN (SELECT {keys}, min({time}) AS cycle_start FROM {latest_cycle} GROUP BY {keys})
    AS cycles USING ({keys});

-- The seasonal factor of each key and cycle position, from the latest cycle.
CREATE VIEW {seasonal_factors} AS
SELECT {keys}, cycle_position, {time}, period, seasonal,
       CASE WHEN boxcox_lambda IS NULL THEN 'subtract'
            WHEN boxcox_lambda = 0 THEN 'divide'
            ELSE 'box-cox' END AS adjust_by,
       CASE WHEN boxcox_lambda IS NULL THEN seasonal
            WHEN boxcox_lambda = 0 THEN exp(seasonal) END AS factor,
       boxcox_lambda
FROM {latest_cycle};

-- The factors projected for the next cycle: the latest cycle's, carried forward one cycle
-- (the seasonal naive projection of the seasonal part), at the times they will fall on.
CREATE VIEW {projected_factors} AS
SELECT {keys}, {time}, steps_ahead, cycle_position, period, seasonal,
       CASE WHEN boxcox_lambda IS NULL THEN 'subtract'
            WHEN boxcox_lambda = 0 THEN 'divide'
            ELSE 'box-cox' END AS adjust_by,
       CASE WHEN boxcox_lambda IS NULL THEN seasonal
            WHEN boxcox_lambda = 0 THEN exp(seasonal) END AS factor,
       boxcox_lambda
FROM {next_cycle};

-- Raw rows newer than their key's last refresh, adjusted with the projected factors in
-- plain SQL. Every such row is here: one without an adjusted value says why in `note`.
-- They are provisional: the next refresh splits them with the rest and may move them.
CREATE VIEW {provisional_adjusted} AS
SELECT {keys}, {time}, {value},
       CASE WHEN p.seasonal IS NULL OR {value} IS NULL THEN NULL
            WHEN p.boxcox_lambda IS NULL THEN {value} - p.seasonal
            WHEN {value} <= 0 THEN NULL
            WHEN p.boxcox_lambda = 0 THEN {value} / exp(p.seasonal)
            WHEN p.boxcox_lambda * ((power({value}, p.boxcox_lambda) - 1) / p.boxcox_lambda
                                    - p.seasonal) + 1 <= 0 THEN NULL
            ELSE power(p.boxcox_lambda * ((power({value}, p.boxcox_lambda) - 1)
                                          / p.boxcox_lambda - p.seasonal) + 1,
                       1 / p.boxcox_lambda)
       END AS adjusted,
       p.seasonal, p.steps_ahead, true AS provisional,
       CASE WHEN k.last_time IS NULL THEN 'a key not yet published: split at the next refresh'
            WHEN p.seasonal IS NULL THEN 'no projected factor for this time (past the next '
                                         || 'cycle, off the grid, or none for the key)'
            WHEN {value} IS NULL THEN 'no value'
            WHEN p.boxcox_lambda IS NOT NULL AND {value} <= 0
                THEN 'not positive: no log or Box-Cox'
            WHEN p.boxcox_lambda IS NOT NULL AND p.boxcox_lambda <> 0
                 AND p.boxcox_lambda * ((power({value}, p.boxcox_lambda) - 1)
                                        / p.boxcox_lambda - p.seasonal) + 1 <= 0
                THEN 'outside the range Box-Cox can bring back'
            ELSE 'adjusted by the projected factor' END AS note
FROM {raw} AS r
LEFT JOIN {refresh_keys} AS k USING ({keys})
LEFT JOIN {next_cycle} AS p USING ({keys}, {time})
WHERE k.last_time IS NULL OR {time} > k.last_time;

-- When each key was last computed, from which rows, and with which arguments (JSON).
CREATE VIEW {last_refresh} AS
SELECT {keys}, refreshed_at, refresh_id, rows_in, first_time, last_time, status, arguments
FROM {refresh_keys};
