-- Every sales row with its trend, seasonal part, remainder and seasonally adjusted units.
-- Sales are multiplicative (a product sells a share more in its season), so the split is on
-- the log scale; robust, so the data-entry slip is set aside rather than bending the trend.
{{ config(materialized='table') }}

select *
from tide_split({{ ref('weekly_units') }}, ['shop', 'product'], 'week', 'units',
                period := 52, robust := true, transform := 'log')
