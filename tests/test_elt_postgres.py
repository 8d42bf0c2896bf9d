"""PostgreSQL as source and target of the ELT commands, against a real server."""

from __future__ import annotations

import json

import adbc_driver_postgresql.dbapi as postgres
import duckdb
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from elt_data import KEYS, NEGATIVE, SHORT, monthly_sales
from elt_postgres import postgres_server
from test_elt import COLUMNS, _assert_same, _sql_answer
from test_elt_kill import KILLS, fingerprint_sql, kill_at_random_moments

from tidesplit import cli, elt


@pytest.fixture(scope="module")
def server():
    try:
        with postgres_server() as address:
            yield address
    except LookupError as missing:
        pytest.skip(str(missing))


@pytest.fixture(scope="module")
def sales_in_postgres(server) -> pa.Table:
    table = monthly_sales()
    with postgres.connect(server) as connection, connection.cursor() as cursor:
        cursor.adbc_ingest("sales", table, mode="replace")
        connection.commit()
    return table


def _read(server: str, sql: str) -> pa.Table:
    with postgres.connect(server) as connection, connection.cursor() as cursor:
        cursor.execute(sql)
        return cursor.fetch_arrow_table()


def test_postgres_to_postgres_gives_the_numbers_of_sql(server, sales_in_postgres, tmp_path):
    """2,600 keys from a PostgreSQL table, in batches, into a PostgreSQL table, twice
    (the second run replaces the first's table); the same as tide_split."""
    report = tmp_path / "report.json"
    for _ in range(2):
        code = cli.main([
            "split", "--from", server, "--from-table", "sales", "--to", server,
            "--to-table", "sales_split", *COLUMNS, "--period", "12", "--transform", "log",
            "--on-error", "keep", "--batch-rows", "25000", "--quiet", "--report", str(report),
        ])  # fmt: skip
        assert code == elt.EXIT_KEPT
    expected = _sql_answer(
        sales_in_postgres, "split", ", period := 12, transform := 'log', on_error := 'keep'"
    )
    ours = _read(server, "SELECT * FROM sales_split")
    ours = ours.cast(expected.schema)  # PostgreSQL's date and timestamp types
    _assert_same(ours, expected, ["store", "sku", "month"])
    done = json.loads(report.read_text())
    assert (done["keys"], done["keys_kept"], done["batches"]) == (KEYS, 2, 4)
    assert {(b["key"]["store"], b["key"]["sku"]) for b in done["bad_series"]} == {NEGATIVE, SHORT}
    tables = _read(server, "SELECT tablename FROM pg_tables WHERE schemaname = 'public'")
    assert sorted(tables["tablename"].to_pylist()) == ["sales", "sales_split"]


def test_a_query_source_and_nested_columns_as_json(server, sales_in_postgres, tmp_path):
    """A query as source; several periods into PostgreSQL, the parts per period as JSON."""
    code = cli.main([
        "split", "--from", server, "--from-query", "SELECT * FROM sales WHERE sku < 100",
        "--to", server, "--to-table", "multi", *COLUMNS, "--periods", "4,12", "--quiet",
    ])  # fmt: skip
    assert code == elt.EXIT_OK
    row = _read(server, "SELECT count(*) AS n, min(seasonal_by_period) AS parts FROM multi")
    assert (
        row["n"][0].as_py()
        == sales_in_postgres.filter(pa.compute.less(sales_in_postgres["sku"], 100)).num_rows
    )
    parts = json.loads(row["parts"][0].as_py())
    assert [p["period"] for p in parts] in ([4, 12], [4])


def test_postgres_raise_leaves_the_target_and_parquet_in(server, sales_in_postgres, tmp_path):
    source = tmp_path / "sales.parquet"
    pq.write_table(sales_in_postgres, source)
    args = ["split", "--from", str(source), "--to", server, "--to-table", "kept_safe",
            *COLUMNS, "--period", "12", "--quiet"]  # fmt: skip
    assert cli.main([*args, "--on-error", "keep"]) == elt.EXIT_KEPT
    before = _read(server, "SELECT count(*) AS n, sum(trend) AS total FROM kept_safe")
    assert cli.main([*args, "--robust"]) == elt.EXIT_BAD_SERIES  # the short series
    after = _read(server, "SELECT count(*) AS n, sum(trend) AS total FROM kept_safe")
    assert before.equals(after)
    stages = _read(server, "SELECT count(*) AS n FROM pg_tables WHERE tablename LIKE 'tide_%'")
    assert stages["n"][0].as_py() == 0


def test_hostile_postgres_names_inject_nothing(server, tmp_path):
    key, when, value = 'k"; DROP TABLE guard; --', "t'); DROP TABLE guard; --", 'v" ,"x'
    rows = monthly_sales(keys=4, months=24).drop(["store"])
    rows = rows.rename_columns([key, when, value])
    table = 'in"; DROP TABLE guard; --'
    with postgres.connect(server) as connection, connection.cursor() as cursor:
        cursor.execute("CREATE TABLE guard AS SELECT 1 AS one")
        cursor.adbc_ingest(table, rows, mode="replace")
        connection.commit()
    out = 'out"; DROP TABLE guard; --'
    code = cli.main([
        "split", "--from", server, "--from-table", table, "--to", server, "--to-table", out,
        "--key", key, "--time", when, "--value", value, "--period", "12", "--quiet",
    ])  # fmt: skip
    assert code == elt.EXIT_OK
    names = _read(server, "SELECT tablename FROM pg_tables WHERE schemaname = 'public'")
    assert {table, out, "guard"} <= set(names["tablename"].to_pylist())
    quoted = '"' + out.replace('"', '""') + '"'
    assert _read(server, f"SELECT count(*) AS n FROM {quoted}")["n"][0].as_py() == rows.num_rows
    assert _read(server, "SELECT count(*) AS n FROM guard")["n"][0].as_py() == 1


def test_kill_a_run_into_postgres(server, tmp_path):
    """Runs into a PostgreSQL table killed at random moments leave the previous table
    whole; the next run writes the complete table and leaves no stage table."""
    source = tmp_path / "sales.parquet"
    pq.write_table(monthly_sales(keys=1_200), source)

    def fingerprint() -> tuple:
        con = duckdb.connect()
        con.register("killed_split", _read(server, "SELECT * FROM killed_split"))
        return con.sql(fingerprint_sql("killed_split")).fetchall()[0]

    def leftovers() -> list[str]:
        names = _read(server, "SELECT tablename FROM pg_tables WHERE tablename LIKE 'tide_%'")
        return names["tablename"].to_pylist()

    fell = kill_at_random_moments(
        ["split", "--from", str(source), "--to", server, "--to-table", "killed_split",
         *COLUMNS, "--batch-rows", "5000"],
        fingerprint,
        leftovers,
        41,
    )  # fmt: skip
    assert sum(fell.values()) == KILLS
