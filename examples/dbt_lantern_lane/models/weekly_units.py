"""The input: invented weekly unit sales per shop and product (columns shop, product, week,
units), drawn by tidesplit's own generator; its size comes from the project's vars."""

from tidesplit.examples.retail_chain import weekly_units


def model(dbt, session):
    size = dbt.config.get("meta")
    return weekly_units(
        shops=int(size["shops"]), products=int(size["products"]), years=int(size["years"])
    )
