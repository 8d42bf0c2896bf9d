"""Invented monthly series for the command-line job tests, with bad keys mixed in."""

from __future__ import annotations

import duckdb
import pyarrow as pa

KEYS = 2_600  # more than the 2,048 series of one UDF call
MONTHS = 36
# (store, sku) of the bad series: a negative value (bad under the log transform) and a
# series of 10 points (shorter than two periods of 12)
NEGATIVE = ("south", 7)
SHORT = ("south", 11)


def monthly_sales(keys: int = KEYS, months: int = MONTHS) -> pa.Table:
    """``store`` (text), ``sku`` (integer), ``month`` (DATE), ``units`` (positive, with a
    yearly cycle, a trend and hashed noise), with the two bad series above."""
    return duckdb.sql(
        f"""
        SELECT CASE WHEN s % 2 = 0 THEN 'north' ELSE 'south' END AS store, s AS sku,
               (DATE '2019-01-01' + INTERVAL (m) MONTH)::DATE AS month,
               CASE WHEN s = {NEGATIVE[1]} AND m = 20 THEN -3.0
                    ELSE 50 + s % 17 + 8 * sin(m * pi() / 6 + s % 5) + 0.2 * m
                         + (hash(s, m) % 1000) / 250.0 END AS units
        FROM range({keys}) a(s), range({months}) b(m)
        WHERE NOT (s = {SHORT[1]} AND m >= 10)
        """
    ).to_arrow_table()
