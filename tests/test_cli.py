"""The command line, run as a user would."""

from __future__ import annotations

import duckdb

from tidesplit import cli


def test_demo_prints_a_summary_and_keeps_the_tables(tmp_path, capsys):
    database = tmp_path / "demo.duckdb"
    assert cli.main(["demo", "--database", str(database), "--shops", "4", "--products", "3"]) == 0
    printed = capsys.readouterr().out
    assert "4 shops x 3 products" in printed
    assert "12 series, 3,744 rows back (one per input row)" in printed
    assert "Missing weeks are data" in printed
    con = duckdb.connect(str(database))
    rows_in = con.sql("SELECT count(*) FROM weekly_units").fetchall()[0][0]
    rows_out = con.sql("SELECT count(*) FROM weekly_split").fetchall()[0][0]
    assert rows_in == rows_out == 4 * 3 * 52 * 6
    # the closed week is missing in the input and has a trend but no remainder in the output
    closed = con.sql(
        "SELECT count(*), count(trend), count(remainder) FROM weekly_split WHERE units IS NULL"
    ).fetchall()[0]
    assert closed == (3, 3, 0)


def test_demo_finds_the_data_entry_slip(tmp_path):
    database = tmp_path / "demo.duckdb"
    cli.main(["demo", "--database", str(database)])  # the demo as README runs it
    con = duckdb.connect(str(database))
    shop, week, weight = con.sql(
        "SELECT shop, week, weight FROM weekly_split WHERE units IS NOT NULL "
        "ORDER BY abs(remainder) DESC LIMIT 1"
    ).fetchall()[0]
    from tidesplit.examples import retail_chain

    assert (shop, week) == (retail_chain.SHOP_NAMES[retail_chain.SLIP_SHOP], retail_chain.SLIP_WEEK)
    assert weight == 0.0
