-- Nothing lost, nothing added: every sales row comes back once with its units, and the split
-- has no row the sales lack. Fails with the rows that differ.
select coalesce(s.shop, p.shop) as shop, coalesce(s.product, p.product) as product,
       coalesce(s.week, p.week) as week, s.units as sales_units, p.units as split_units
from {{ ref('weekly_units') }} as s
full outer join {{ ref('weekly_units_split') }} as p
  on s.shop = p.shop and s.product = p.product and s.week = p.week
where s.week is null or p.week is null or s.units is distinct from p.units
