"""The input: invented weekly unit sales per shop and product (columns shop, product, week,
units), drawn by tidesplit's own generator; its size comes from the project's vars."""

from tidesplit.examples.retail_chain import weekly_units


def model(dbt, session):
    return weekly_units(
        shops=int(dbt.config.get("shops")),
        products=int(dbt.config.get("products")),
        years=int(dbt.config.get("years")),
    )
