"""Refresh and publish into PostgreSQL, on a real server: psql (no Python at all) reads
every view of the published schema."""

from __future__ import annotations

import json
import shutil
import subprocess

import adbc_driver_postgresql.dbapi as postgres
import pyarrow as pa
import pytest
from elt_postgres import postgres_server
from refresh_data import CHANGED, GROWN, KEYS, NEW, UNTOUCHED, VANISHED, first_state, later_state
from test_elt import COLUMNS, _assert_same, _sql_answer
from tidesplit.examples.retail_chain import weekly_units

from tidesplit import cli, elt, publish


@pytest.fixture(scope="module")
def server():
    try:
        with postgres_server() as address:
            yield address
    except LookupError as missing:
        pytest.skip(str(missing))


def _ingest(server: str, name: str, table: pa.Table, mode: str = "replace") -> None:
    with postgres.connect(server) as connection, connection.cursor() as cursor:
        cursor.adbc_ingest(name, table, mode=mode)
        connection.commit()


def _read(server: str, sql: str) -> pa.Table:
    with postgres.connect(server) as connection, connection.cursor() as cursor:
        cursor.execute(sql)
        return cursor.fetch_arrow_table()


def _psql(server: str, sql: str) -> list[str]:
    """Rows as psql prints them unaligned, one per line."""
    psql = shutil.which("psql")
    if psql is None:
        pytest.skip("no psql on this machine")
    done = subprocess.run([psql, "-X", "-A", "-t", "-v", "ON_ERROR_STOP=1", "-d", server,
                           "-c", sql], capture_output=True, text=True, check=True)  # fmt: skip
    return [line for line in done.stdout.splitlines() if line]


def test_split_refresh_into_a_postgres_table(server, tmp_path):
    report = tmp_path / "report.json"

    def run(table: pa.Table) -> dict:
        _ingest(server, "sales_now", table)
        code = cli.main([
            "split", "--from", server, "--from-table", "sales_now", "--to", server,
            "--to-table", "sales_split", *COLUMNS, "--period", "12", "--on-error", "keep",
            "--batch-rows", "4000", "--quiet", "--refresh", "--report", str(report),
        ])  # fmt: skip
        done = json.loads(report.read_text())
        assert code == done["exit_code"] == elt.EXIT_KEPT, done["message"]
        return done

    run(first_state())
    after = later_state()
    done = run(after)
    counts = (done["keys_recomputed"], done["keys_new"], done["keys_reused"], done["keys_dropped"])
    assert counts == (len(CHANGED) + len(GROWN) + len(NEW), len(NEW), UNTOUCHED, len(VANISHED))
    assert done["rows_in"] == done["rows_out"] == after.num_rows
    ours = _read(server, "SELECT * FROM sales_split")
    expected = _sql_answer(after, "split", ", period := 12, on_error := 'keep'")
    _assert_same(ours.cast(expected.schema), expected, ["store", "sku", "month"])
    revised = _read(server, "SELECT count(*) AS n FROM sales_split_revisions WHERE scope = 'key'")
    assert revised["n"][0].as_py() == len(CHANGED) + len(GROWN)
    keys = _read(server, "SELECT count(*) AS n FROM sales_split_refresh_keys")
    assert keys["n"][0].as_py() == KEYS - len(VANISHED) + len(NEW)
    stages = _read(server, "SELECT count(*) AS n FROM pg_tables WHERE tablename LIKE 'tide_%'")
    assert stages["n"][0].as_py() == 0


def test_publish_into_a_postgres_schema_read_by_psql(server, tmp_path):
    shops = weekly_units(shops=4, products=10, years=4)
    first = shops.filter(pa.compute.less(shops["week"], 200))
    _ingest(server, "weekly_units", first)
    args = ["publish", "--from", server, "--from-table", "weekly_units", "--to", server,
            "--schema", "mart", "--key", "shop", "--key", "product", "--time", "week",
            "--value", "units", "--period", "52", "--robust", "--transform", "log",
            "--quiet", "--report", str(tmp_path / "report.json")]  # fmt: skip
    assert cli.main(args) == elt.EXIT_OK
    counts = {v: int(_psql(server, f"SELECT count(*) FROM mart.{v}")[0]) for v in publish.VIEWS}
    assert counts == {"adjusted_series": 40 * 200, "seasonal_factors": 40 * 52,
                      "projected_factors": 40 * 52, "provisional_adjusted": 0,
                      "last_refresh": 40}  # fmt: skip
    for view in publish.VIEWS:  # every row of every view, as text
        assert len(_psql(server, f"SELECT * FROM mart.{view}")) == counts[view]

    # two shops' next four weeks arrive in the raw table before the refresh
    newer = shops.filter(
        pa.compute.and_(
            pa.compute.greater_equal(shops["week"], 200), pa.compute.less(shops["week"], 204)
        )
    )
    newer = newer.filter(pa.compute.is_in(newer["shop"], pa.array(["Quayside", "Millbrook"])))
    _ingest(server, "weekly_units", newer, mode="append")
    rows = _psql(server, "SELECT note, count(*) FROM mart.provisional_adjusted GROUP BY note")
    assert rows == ["adjusted by the projected factor|80"]
    checked = _psql(server, "SELECT max(abs(p.adjusted - p.units / f.factor)) FROM "
                    "mart.provisional_adjusted p JOIN mart.projected_factors f "
                    "USING (shop, product, week)")  # fmt: skip
    assert float(checked[0]) < 1e-9

    assert cli.main(args) == elt.EXIT_OK
    done = json.loads((tmp_path / "report.json").read_text())
    assert (done["keys_recomputed"], done["keys_reused"], done["keys_dropped"]) == (20, 20, 0)
    assert done["rows_out"] == first.num_rows + newer.num_rows
    assert _psql(server, "SELECT count(*) FROM mart.provisional_adjusted") == ["0"]
    revised = _psql(server, "SELECT count(*), max(largest_share) > 0 FROM "
                    "mart.components_revisions WHERE scope = 'key'")  # fmt: skip
    assert revised == ["20|t"]
    when = _psql(server, "SELECT count(DISTINCT refresh_id) FROM mart.last_refresh")
    assert when == ["2"]  # the reused keys keep the refresh that computed them
