-- On the log scale the parts add up to the value: trend + seasonal + remainder = ln(units),
-- and the adjusted units are the units without their seasonal part: units / exp(seasonal).
-- Fails with the rows where either is off by more than rounding.
select shop, product, week, units, trend, seasonal, remainder, adjusted
from {{ ref('weekly_units_split') }}
where units is not null
  and (abs(trend + seasonal + remainder - ln(units)) > 1e-9
       or abs(adjusted - units / exp(seasonal)) > 1e-9 * units)
