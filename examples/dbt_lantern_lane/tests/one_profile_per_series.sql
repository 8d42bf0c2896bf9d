-- Every series of the sales has one profile, which counts its observed and missing weeks
-- as the sales hold them. Fails with the series that differ.
with sales as (
    select shop, product, count(units) as points, count(*) - count(units) as missing
    from {{ ref('weekly_units') }}
    group by shop, product
)
select coalesce(s.shop, p.shop) as shop, coalesce(s.product, p.product) as product,
       s.points as sales_points, p.points as profile_points,
       s.missing as sales_missing, p.missing as profile_missing
from sales as s
full outer join {{ ref('series_profile') }} as p
  on s.shop = p.shop and s.product = p.product
where s.shop is null or p.shop is null
   or s.points != p.points or s.missing != p.missing
