-- One row per shop and product: how seasonal and how trending the series is, and when in
-- the year it peaks; the same arguments as the split, so the two agree.
{{ config(materialized='table') }}

select *
from tide_profile({{ ref('weekly_units') }}, ['shop', 'product'], 'week', 'units',
                  period := 52, robust := true, transform := 'log')
