"""Sources for the refresh tests: a first state and a later one in which some keys changed,
some grew, some vanished and some are new, the rest as they were."""

from __future__ import annotations

import duckdb
import pyarrow as pa
from elt_data import monthly_sales

KEYS = 300
CHANGED = range(20, 30)  # values of the last six months revised upwards
GROWN = range(30, 40)  # three more months
VANISHED = range(40, 45)
NEW = range(1000, 1008)
UNTOUCHED = KEYS - len(CHANGED) - len(GROWN) - len(VANISHED)


def first_state() -> pa.Table:
    return monthly_sales(keys=KEYS)


def later_state() -> pa.Table:
    """The first state after the changes above (sku 11, short, and sku 7, with a negative
    value, stay as they were)."""
    longer = monthly_sales(keys=1008, months=39)
    con = duckdb.connect()
    con.register("longer", longer)
    return con.sql(
        f"""
        SELECT store, sku, month,
               CASE WHEN sku BETWEEN {CHANGED.start} AND {CHANGED.stop - 1}
                         AND month >= DATE '2021-07-01' THEN units * 1.05
                    ELSE units END AS units
        FROM longer
        WHERE (sku < {KEYS} OR sku BETWEEN {NEW.start} AND {NEW.stop - 1})
          AND sku NOT BETWEEN {VANISHED.start} AND {VANISHED.stop - 1}
          AND (month < DATE '2022-01-01' OR sku BETWEEN {GROWN.start} AND {GROWN.stop - 1}
               OR sku >= {NEW.start})
        ORDER BY sku DESC, month
        """
    ).to_arrow_table()
