"""The command line, run as a user would."""

from __future__ import annotations

import duckdb
import numpy as np
import pytest

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


@pytest.fixture(scope="module")
def demo_database(tmp_path_factory):
    database = tmp_path_factory.mktemp("demo") / "demo.duckdb"
    cli.main(["demo", "--database", str(database)])  # the demo as README runs it
    return database


def test_demo_finds_the_data_entry_slip(demo_database):
    con = duckdb.connect(str(demo_database))
    shop, week, weight = con.sql(
        "SELECT shop, week, weight FROM weekly_split WHERE units IS NOT NULL "
        "ORDER BY abs(remainder) DESC LIMIT 1"
    ).fetchall()[0]
    from tidesplit.examples import retail_chain

    assert (shop, week) == (retail_chain.SHOP_NAMES[retail_chain.SLIP_SHOP], retail_chain.SLIP_WEEK)
    assert weight == 0.0


@pytest.mark.parametrize(
    ("source", "split", "key", "time", "value"),
    [
        ("weekly_units", "weekly_split", "shop, product", "week", "units"),
        ("hourly_loads", "hourly_split", "meter", "reading_at", "kwh"),
    ],
)
def test_demo_tables_account_for_every_row(demo_database, source, split, key, time, value):
    """Each saved table gives back every input row unchanged in its own row, and only
    the missing times as inserted rows; every series was split and its parts add up."""
    con = duckdb.connect(str(demo_database))
    columns = f"{key}, {time}, {value}"
    inserted = "inserted" if split == "hourly_split" else "false"
    unchanged = con.sql(
        f"SELECT count(*) FROM ((SELECT {columns} FROM {source} EXCEPT ALL "
        f"SELECT {columns} FROM {split} WHERE NOT {inserted}) UNION ALL "
        f"(SELECT {columns} FROM {split} WHERE NOT {inserted} EXCEPT ALL "
        f"SELECT {columns} FROM {source}))"
    ).fetchall()[0][0]
    assert unchanged == 0
    # inserted rows are exactly the hours missing between each meter's first and last
    expected_gaps = (
        con.sql(
            f"SELECT coalesce(sum(date_diff('hour', first, last) + 1 - rows), 0) FROM "
            f"(SELECT min({time}) AS first, max({time}) AS last, count(*) AS rows FROM {source} "
            f"GROUP BY {key})"
        ).fetchall()[0][0]
        if split == "hourly_split"
        else 0
    )
    assert con.sql(f"SELECT count(*) FILTER (WHERE {inserted}) FROM {split}").fetchall() == [
        (expected_gaps,)
    ]
    statuses = con.sql(f"SELECT DISTINCT status FROM {split}").fetchall()
    assert all(s.startswith("ok") for (s,) in statuses)
    parts = con.sql(
        f"SELECT {value}, trend, seasonal, remainder FROM {split} WHERE {value} IS NOT NULL"
    ).fetchnumpy()
    scale = np.log if split == "weekly_split" else (lambda v: v)  # weekly is split on logs
    np.testing.assert_allclose(
        parts["trend"] + parts["seasonal"] + parts["remainder"], scale(parts[value]), rtol=1e-9
    )


@pytest.mark.parametrize(
    ("args", "words"),
    [
        (["--shops", "0"], "argument --shops: 0 is not between 1 and 1000"),
        (["--years", "1"], "argument --years: 1 is not between 3 and 50"),
        (["--products", "x"], "argument --products: 'x' is not a whole number"),
    ],
)
def test_demo_refuses_sizes_it_cannot_show(args, words, capsys):
    with pytest.raises(SystemExit) as stopped:
        cli.main(["demo", *args])
    assert stopped.value.code == 2 and words in capsys.readouterr().err


def test_demo_asks_before_replacing_and_needs_a_folder(tmp_path, capsys):
    existing = tmp_path / "mine.duckdb"
    duckdb.connect(str(existing)).execute("CREATE TABLE weekly_units AS SELECT 1 AS kept")
    assert cli.main(["demo", "--database", str(existing)]) == 2
    assert "exists; the demo would replace its tables" in capsys.readouterr().err
    con = duckdb.connect(str(existing))
    assert con.sql("SELECT * FROM weekly_units").fetchall() == [(1,)]  # untouched
    con.close()
    assert cli.main(["demo", "--database", str(tmp_path / "no" / "such.duckdb")]) == 2
    assert "cannot write in" in capsys.readouterr().err


def test_a_small_demo_prints_every_section(tmp_path, capsys):
    assert cli.main(["demo", "--shops", "2", "--products", "2", "--years", "3"]) == 0
    printed = capsys.readouterr().out
    assert "Largest remainders" in printed and "Missing weeks are data" in printed
