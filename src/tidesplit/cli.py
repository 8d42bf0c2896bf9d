"""The ``tidesplit`` command line."""

from __future__ import annotations

import argparse
import sys
import time
from collections.abc import Sequence

DEMO_SQL = """
CREATE OR REPLACE TABLE weekly_split AS
SELECT * FROM tide_split(weekly_units, ['shop', 'product'], 'week', 'units',
                         period := 52, robust := true, transform := 'log')
""".strip()

STRENGTH_SQL = """
SELECT product,
       round(avg(strength_of_season), 2) AS strength_of_season,
       round(avg(strength_of_trend), 2) AS strength_of_trend
FROM tide_profile(weekly_units, ['shop', 'product'], 'week', 'units',
                  period := 52, robust := true, transform := 'log')
GROUP BY product ORDER BY strength_of_season DESC
""".strip()


def _print_rows(title: str, rows: list[tuple], header: Sequence[str]) -> None:
    print(f"\n{title}")
    widths = [max(len(str(h)), *(len(str(r[i])) for r in rows)) for i, h in enumerate(header)]
    print("  " + "  ".join(str(h).ljust(w) for h, w in zip(header, widths, strict=True)))
    for row in rows:
        print("  " + "  ".join(str(v).ljust(w) for v, w in zip(row, widths, strict=True)))


def _ends(rows: list[tuple], each: int = 3) -> list[tuple]:
    """The first and last few rows of a ranking."""
    return rows if len(rows) <= 2 * each else rows[:each] + rows[-each:]


def run_demo(database: str | None, shops: int, products: int, years: int) -> None:
    """Build the invented shop-sales table, split every series in one query, summarise."""
    import tidesplit
    from tidesplit.examples.retail_chain import weekly_units

    table = weekly_units(shops=shops, products=products, years=years)
    con = tidesplit.connect(database)
    con.register("__demo_units", table)
    con.execute("CREATE OR REPLACE TABLE weekly_units AS SELECT * FROM __demo_units")
    con.unregister("__demo_units")
    series = shops * products
    print(
        f"Lantern Lane Grocers (invented): {shops} shops x {products} products, "
        f"{years} years of weekly units = {table.num_rows:,} rows in table weekly_units."
    )
    print("\nSplitting every series in one query (the first run compiles the kernel):\n")
    print("  " + DEMO_SQL.replace("\n", "\n  "))
    started = time.perf_counter()
    con.execute(DEMO_SQL)
    elapsed = time.perf_counter() - started
    rows_out = con.sql("SELECT count(*) FROM weekly_split").fetchall()[0][0]
    print(f"\n{series:,} series, {rows_out:,} rows back (one per input row) in {elapsed:.2f} s.")

    _print_rows(
        "Most and least seasonal products (tide_profile's strengths, 0..1, mean over shops):",
        _ends(con.sql(STRENGTH_SQL).fetchall()),
        ("product", "seasonal", "trend"),
    )
    slips = con.sql(
        "SELECT shop, product, week, units, round(exp(trend + seasonal)) AS expected, "
        "round(weight, 3) AS weight FROM weekly_split "
        "WHERE units IS NOT NULL ORDER BY abs(remainder) DESC LIMIT 3"
    ).fetchall()
    _print_rows(
        "Largest remainders (the robust fit gives a data-entry slip weight 0):",
        slips,
        ("shop", "product", "week", "units", "expected", "weight"),
    )
    closed = con.sql(
        "SELECT shop, week, count(*) AS rows, count(trend) AS with_trend, "
        "count(remainder) AS with_remainder FROM weekly_split "
        "WHERE units IS NULL GROUP BY ALL ORDER BY ALL"
    ).fetchall()
    _print_rows(
        "Missing weeks are data, not errors: trend and seasonal are still there:",
        closed,
        ("shop", "week", "rows", "with trend", "with remainder"),
    )
    _hourly_demo(con)
    where = database or "an in-memory database"
    print(f"\nTables weekly_units, weekly_split, hourly_loads and hourly_split are in {where}.")


HOURLY_SQL = """
CREATE OR REPLACE TABLE hourly_split AS
SELECT * FROM tide_split_multi(hourly_loads, 'meter', 'reading_at', 'kwh', fill_gaps := true)
""".strip()


def _hourly_demo(con: object) -> None:
    """Two cycles and gaps: hourly meter loads through tide_split_multi."""
    from tidesplit.examples.meter_loads import hourly_loads

    table = hourly_loads()
    con.register("__demo_loads", table)
    con.execute("CREATE OR REPLACE TABLE hourly_loads AS SELECT * FROM __demo_loads")
    con.unregister("__demo_loads")
    print(
        f"\nBrackwater Energy Cooperative (invented): {table.num_rows:,} hourly readings "
        "with holes. Two cycles (day and week) are implied by the hourly step:\n"
    )
    print("  " + HOURLY_SQL.replace("\n", "\n  "))
    started = time.perf_counter()
    con.execute(HOURLY_SQL)
    elapsed = time.perf_counter() - started
    rows = con.sql(
        "SELECT meter, count(*) FILTER (WHERE inserted) AS hours_inserted, "
        "round(max(tide_part(seasonal_by_period, 24)) "
        "- min(tide_part(seasonal_by_period, 24)), 1) AS day_swing, "
        "round(max(tide_part(seasonal_by_period, 168)) "
        "- min(tide_part(seasonal_by_period, 168)), 1) AS week_swing "
        "FROM hourly_split GROUP BY meter ORDER BY meter"
    ).fetchall()
    _print_rows(
        f"Split in {elapsed:.2f} s; the gaps came back as inserted hours (kWh swing per cycle):",
        rows,
        ("meter", "hours inserted", "daily swing", "weekly swing"),
    )


COMMANDS = ("demo",)


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``tidesplit`` command."""
    parser = argparse.ArgumentParser(
        prog="tidesplit", description="Seasonal-trend decomposition of keyed series in DuckDB."
    )
    commands = parser.add_subparsers(dest="command", required=True)
    demo = commands.add_parser(
        "demo",
        help="split an invented shop-sales table and print a summary",
        description="Build an invented table of weekly unit sales, split every series with "
        "one tide_split query, and print what came out.",
    )
    demo.add_argument("--database", help="DuckDB file to keep the tables in (default: memory)")
    demo.add_argument("--shops", type=int, default=12, help="number of shops (default 12)")
    demo.add_argument("--products", type=int, default=20, help="products per shop (default 20)")
    demo.add_argument("--years", type=int, default=6, help="years of weekly data (default 6)")
    args = parser.parse_args(argv)
    if args.command == "demo":
        run_demo(args.database, args.shops, args.products, args.years)
    return 0


if __name__ == "__main__":
    sys.exit(main())
