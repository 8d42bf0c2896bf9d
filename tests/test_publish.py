"""Publish: tables and plain-SQL views in a DuckDB file, read by a process that imports
only duckdb; raw rows that arrive before the next refresh adjusted by the projected
factors; the refresh that follows."""

from __future__ import annotations

import json
import subprocess
import sys
import textwrap
from pathlib import Path

import duckdb
import numpy as np
import pytest
from scipy.special import boxcox, inv_boxcox
from test_elt import _assert_same
from tidesplit.examples.retail_chain import weekly_units

import tidesplit
from tidesplit import cli, elt, publish

WEEKS = 200  # published first; the raw table then gets weeks 200 to 203 for some shops
COLUMNS = ["--key", "shop", "--key", "product", "--time", "week", "--value", "units"]

# A process that knows nothing of tidesplit: duckdb alone opens the file and reads every
# view whole (a view that called one of our Python functions would fail here).
PLAIN_READER = textwrap.dedent(
    """
    import json, sys
    import duckdb
    con = duckdb.connect(sys.argv[1], read_only=True)
    counts = {}
    for view in sys.argv[2:]:
        rows = con.sql(f"SELECT * FROM {view}").fetchall()
        counts[view] = len(rows)
    assert not [m for m in sys.modules if m.startswith("tidesplit")]
    print(json.dumps(counts))
    """
)


def _plain_read(path: Path) -> dict[str, int]:
    done = subprocess.run(
        [sys.executable, "-c", PLAIN_READER, str(path), *publish.VIEWS],
        capture_output=True, text=True, check=True, cwd=path.parent,
    )  # fmt: skip
    return json.loads(done.stdout)


def _publish(path: Path, *more: str, expect: int = elt.EXIT_OK) -> dict:
    report = path.with_suffix(".json")
    code = cli.main(["publish", "--from", f"{path}:weekly_units", "--to", str(path), *COLUMNS,
                     "--period", "52", "--quiet", "--report", str(report), *more])  # fmt: skip
    done = json.loads(report.read_text())
    assert code == done["exit_code"] == expect, done["message"]
    return done


@pytest.fixture(scope="module")
def shops():
    return weekly_units(shops=6, products=10, years=4)


def test_publish_refresh_cycle_in_duckdb(tmp_path, shops):
    path = tmp_path / "mart.duckdb"
    with duckdb.connect(str(path)) as con:
        con.register("shops", shops)
        con.execute(f"CREATE TABLE weekly_units AS SELECT * FROM shops WHERE week < {WEEKS}")
    first = _publish(path, "--robust", "--transform", "log")
    assert (first["keys_new"], first["rows_out"]) == (60, 60 * WEEKS)
    counts = _plain_read(path)
    assert counts == {"adjusted_series": 60 * WEEKS, "seasonal_factors": 60 * 52,
                      "projected_factors": 60 * 52, "provisional_adjusted": 0,
                      "last_refresh": 60}  # fmt: skip

    # new raw rows arrive for three of the six shops, one for a key never published, one
    # far past the next cycle and one without a value
    with duckdb.connect(str(path)) as con:
        con.register("shops", shops)
        con.execute(
            f"INSERT INTO weekly_units SELECT * FROM shops WHERE week BETWEEN {WEEKS} AND "
            f"{WEEKS + 3} AND shop IN ('Quayside', 'Millbrook', 'Old Market')"
        )
        con.execute(
            "INSERT INTO weekly_units VALUES ('Fenwick', 'new jam', 199, 40), "
            f"('Fenwick', 'oat loaf', {WEEKS + 60}, 50), ('Fenwick', 'rye loaf', {WEEKS}, NULL)"
        )
    arrived = 3 * 10 * 4 + 3
    with duckdb.connect(str(path), read_only=True) as con:
        notes = dict(con.sql(
            "SELECT note, count(*) FROM provisional_adjusted GROUP BY ALL").fetchall())  # fmt: skip
        assert notes == {"adjusted by the projected factor": 120, "no value": 1,
                         "a key not yet published: split at the next refresh": 1,
                         "no projected factor for this time (past the next cycle, off the "
                         "grid, or none for the key)": 1}  # fmt: skip
        assert sum(notes.values()) == arrived  # every new raw row, once
        # log: the value divided by exp(seasonal), the seasonal part of the same cycle
        # position one cycle back
        rows = con.sql(
            "SELECT p.units, p.adjusted, f.seasonal, s.cycle_position, f.cycle_position "
            "FROM provisional_adjusted AS p "
            "JOIN projected_factors AS f USING (shop, product, week) "
            "JOIN seasonal_factors AS s ON s.shop = p.shop AND s.product = p.product "
            "AND s.week = p.week - 52 WHERE p.adjusted IS NOT NULL"
        ).fetchall()
        assert len(rows) == 120
        for units, adjusted, seasonal, back, ahead in rows:
            assert adjusted == pytest.approx(units / np.exp(seasonal), rel=1e-12)
            assert back == ahead
        latest = con.sql(
            "SELECT bool_and(latest_cycle = (week >= 148)) FROM adjusted_series"
        ).fetchall()
        assert latest == [(True,)]
        arguments = con.sql("SELECT DISTINCT arguments FROM last_refresh").fetchall()
        assert [json.loads(a)["arguments"] for (a,) in arguments] == [
            {"period": 52, "robust": True, "transform": "log"}
        ]
        provisional = con.sql(
            "SELECT shop, product, week, adjusted FROM provisional_adjusted "
            "WHERE adjusted IS NOT NULL").fetchall()  # fmt: skip

    # the new key's one row cannot be split: kept with its status, so the rest goes on
    second = _publish(
        path, "--robust", "--transform", "log", "--on-error", "keep", expect=elt.EXIT_KEPT
    )
    assert (second["keys_recomputed"], second["keys_new"], second["keys_reused"],
            second["keys_dropped"]) == (33, 1, 28, 0)  # fmt: skip
    assert second["rows_in"] == second["rows_out"] == 60 * WEEKS + arrived
    assert second["revisions"]["keys_revised"] == 32  # the recomputed keys published before
    assert _plain_read(path)["provisional_adjusted"] == 0
    with duckdb.connect(str(path), read_only=True) as con:
        con.register("provisional", duckdb.sql(
            "SELECT * FROM (VALUES " + ", ".join(str(r) for r in provisional) + ") "
            "AS t(shop, product, week, adjusted)").to_arrow_table())  # fmt: skip
        moved = con.sql(
            "SELECT max(abs(a.adjusted - p.adjusted) / a.adjusted) FROM provisional AS p "
            "JOIN adjusted_series AS a USING (shop, product, week)"
        ).fetchall()[0][0]
        assert moved > 0  # provisional values move when split with the rest
        revised = con.sql(
            "SELECT count(*) FROM components_revisions WHERE scope = 'key'"
        ).fetchall()
        assert revised == [(32,)]
        con.unregister("provisional")
        tables = {t for (t,) in con.sql("SHOW TABLES").fetchall()}
    assert tables == {*publish.TABLES, *publish.VIEWS, "weekly_units",
                      "components_refresh_keys", "components_revisions"}  # fmt: skip
    # after the refresh, the published tables hold what the SQL macros give over the
    # whole raw table, the reused keys' rows as much as the recomputed ones
    with duckdb.connect(str(path), read_only=True) as con:
        raw = con.sql("SELECT * FROM weekly_units").to_arrow_table()
        components = con.sql("SELECT * FROM components").to_arrow_table()
        profiles = con.sql("SELECT * FROM profiles").to_arrow_table()
    sql = tidesplit.connect()
    sql.register("weekly_units", raw)
    named = "period := 52, robust := true, transform := 'log', on_error := 'keep'"
    for table, function, by in ((components, "split", ["shop", "product", "week"]),
                                (profiles, "profile", ["shop", "product"])):  # fmt: skip
        expected = sql.sql(
            f"SELECT * FROM tide_{function}(weekly_units, ['shop', 'product'], 'week', "
            f"'units', {named})"
        ).to_arrow_table()
        _assert_same(table, expected, by)


def test_box_cox_adjusts_raw_rows_as_scipy_does(tmp_path, shops):
    """Box-Cox has no single factor: the view takes the value to the transformed scale,
    removes the projected seasonal part and comes back (checked with scipy's boxcox and
    inv_boxcox); the published split's own adjusted column follows the same rule."""
    path = tmp_path / "boxcox.duckdb"
    few = shops.slice(0, 4 * 208)  # four keys
    with duckdb.connect(str(path)) as con:
        con.register("few", few)
        con.execute(f"CREATE TABLE weekly_units AS SELECT * FROM few WHERE week < {WEEKS}")
    _publish(path, "--transform", "boxcox", "--boxcox-lambda", "0.5")
    with duckdb.connect(str(path)) as con:
        con.register("few", few)
        con.execute(f"INSERT INTO weekly_units SELECT * FROM few WHERE week >= {WEEKS}")
    with duckdb.connect(str(path), read_only=True) as con:
        rows = np.array(con.sql(
            "SELECT units, adjusted, seasonal FROM provisional_adjusted").fetchall())  # fmt: skip
        assert len(rows) == 4 * 8
        np.testing.assert_allclose(rows[:, 1], inv_boxcox(boxcox(rows[:, 0], 0.5) - rows[:, 2],
                                                          0.5), rtol=1e-12)  # fmt: skip
        kinds = con.sql("SELECT DISTINCT adjust_by, factor FROM projected_factors").fetchall()
        assert kinds == [("box-cox", None)]
        split = np.array(con.sql(
            "SELECT units, adjusted, seasonal FROM adjusted_series WHERE units IS NOT NULL"
        ).fetchall())  # fmt: skip
        np.testing.assert_allclose(split[:, 1], inv_boxcox(boxcox(split[:, 0], 0.5) - split[:, 2],
                                                           0.5), rtol=1e-9)  # fmt: skip


def test_the_views_are_plain_sql_files():
    text = publish.view_text()
    assert "tide_" not in publish._without_comments(text)  # calls none of our functions
    for view in publish.VIEWS:
        assert f"CREATE VIEW {{{view}}} AS" in text


def test_publish_needs_a_raw_table(tmp_path, shops, capsys):
    source = tmp_path / "in.parquet"
    duckdb.sql("SELECT * FROM shops").write_parquet(str(source))
    code = cli.main(["publish", "--from", str(source), "--to", str(tmp_path / "m.duckdb"),
                     *COLUMNS, "--quiet"])  # fmt: skip
    assert code == elt.EXIT_BAD_ARGUMENTS
    assert "--raw-table" in capsys.readouterr().err
    assert not (tmp_path / "m.duckdb").exists()


def test_hostile_names_in_publish_inject_nothing(tmp_path, shops):
    """Key, time, value, schema and raw table names full of quotes travel as names into
    the tables and the views."""
    key, when, value = 'k"; DROP TABLE guard; --', "t'); DROP TABLE guard; --", 'v" ,"x'
    schema, raw = 's"; DROP TABLE guard; --', 'raw"; DROP TABLE guard; --'
    path = tmp_path / "odd.duckdb"
    few = shops.slice(0, 3 * 208).rename_columns(["shop", key, when, value]).drop(["shop"])
    with duckdb.connect(str(path)) as con:
        con.execute("CREATE TABLE guard AS SELECT 1 AS one")
        con.register("few", few)
        quoted = '"' + raw.replace('"', '""') + '"'
        con.execute(f"CREATE TABLE {quoted} AS SELECT * FROM few")
    code = cli.main(["publish", "--from", f"{path}:{raw}", "--to", str(path), "--schema", schema,
                     "--key", key, "--time", when, "--value", value, "--period", "52",
                     "--quiet"])  # fmt: skip
    assert code == elt.EXIT_OK
    with duckdb.connect(str(path), read_only=True) as con:
        assert con.sql("SELECT count(*) FROM guard").fetchall() == [(1,)]
        name = '"' + schema.replace('"', '""') + '"'
        for view in publish.VIEWS:
            assert con.sql(f"SELECT count(*) FROM {name}.{view}").fetchall()[0][0] >= 0
        assert con.sql(f"SELECT count(*) FROM {name}.adjusted_series").fetchall() == [(624,)]
