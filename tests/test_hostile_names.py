"""Names full of SQL, quotes and odd characters travel as names through every front.

Each hostile name is used for the table and for the key, time and value columns, through the
SQL macros, the Python functions and the command line's job on DuckDB. The answers must equal
those of the same data under plain names, and nothing else in the database may change: the
same tables and views, with the same contents, before and after. The Spark front (column
names only: it reads DataFrames, not tables) uses the session of tests/test_spark.py.
"""

from __future__ import annotations

import duckdb
import numpy as np
import pandas as pd
import pytest

import tidesplit
from tidesplit import cli, elt

HOSTILE = [
    'a"b',
    "a'b",
    "two words",
    "x; DROP TABLE guard; --",
    "'); DROP TABLE guard; --",
    '"); DROP TABLE guard; --',
    "select",
    "group",
    "a.b",
    "schema.table.column",
    "ünïcødé 名前 🌊",
    r".*+?[](){}|^$\1",
    "%s %d {0}",
    "/* note */",
    "$1",
    "tab\there",
    "''",
    '""',
]
PERIOD = 4


def ident(name: str) -> str:
    """A name quoted as a DuckDB identifier."""
    return '"' + name.replace('"', '""') + '"'


def text(value: str) -> str:
    """A DuckDB string literal."""
    return "'" + value.replace("'", "''") + "'"


def plain_frame() -> pd.DataFrame:
    rng = np.random.default_rng(5)
    rows = []
    for k in range(3):
        t = np.arange(6 * PERIOD)
        v = 10 * (k + 1) + 0.1 * t + np.sin(2 * np.pi * t / PERIOD) + rng.normal(0, 0.2, t.size)
        rows += [(f"s{k}", int(i), float(x)) for i, x in zip(t, v, strict=True)]
    return pd.DataFrame(rows, columns=["k", "t", "v"])


def snapshot(con: duckdb.DuckDBPyConnection) -> dict:
    """Every table and view with its rows: what an injected statement would change."""
    found = {}
    for schema, name, kind in con.sql(
        "SELECT schema_name, table_name, 'table' FROM duckdb_tables() "
        "UNION ALL SELECT schema_name, view_name, 'view' FROM duckdb_views() WHERE NOT internal"
    ).fetchall():
        rows = con.sql(f"SELECT * FROM {ident(schema)}.{ident(name)}").fetchall()
        found[(schema, name, kind)] = sorted(map(repr, rows))
    return found


def _sorted_numbers(frame: pd.DataFrame, columns: list[str]) -> np.ndarray:
    return frame.sort_values(list(frame.columns[:2]))[columns].to_numpy(dtype=float)


MACROS = {
    "split": ("trend", "seasonal", "remainder"),
    "split_multi": ("trend", "seasonal", "remainder"),
    "profile": ("strength_of_season", "strength_of_trend"),
    "outliers": ("expected", "remainder", "score"),
    "forecast": ("forecast", "low", "high"),
}


def _macro_sql(macro: str, table: str, k: str, t: str, v: str) -> str:
    period = f"periods := [2, {PERIOD}]" if macro == "split_multi" else f"period := {PERIOD}"
    extra = ", all_rows := true" if macro == "outliers" else ""
    return f"SELECT * FROM tide_{macro}({table}, {text(k)}, {text(t)}, {text(v)}, {period}{extra})"


@pytest.fixture(scope="module")
def plain_answers():
    con = tidesplit.connect()
    con.register("frame", plain_frame())
    con.execute("CREATE TABLE plain AS SELECT * FROM frame")
    answers = {m: con.sql(_macro_sql(m, "plain", "k", "t", "v")).df() for m in MACROS}
    con.close()
    return answers


@pytest.mark.parametrize("name", HOSTILE)
def test_sql_macros_take_any_name(name, plain_answers):
    con = tidesplit.connect()
    con.execute("CREATE TABLE guard AS SELECT 1 AS kept")
    con.register("frame", plain_frame())
    k, t, v = name, name + " t", name + " v"
    con.execute(f"CREATE TABLE {ident(name)} AS SELECT k AS {ident(k)}, t AS {ident(t)}, "
                f"v AS {ident(v)} FROM frame")  # fmt: skip
    con.unregister("frame")
    before = snapshot(con)
    table = text(ident(name))  # a name with a dot or a quote goes in as a string
    for macro, numbers in MACROS.items():
        out = con.sql(_macro_sql(macro, table, k, t, v)).df()
        plain = plain_answers[macro]
        assert list(out.columns[:1]) == [k], macro
        assert len(out) == len(plain), macro
        np.testing.assert_array_equal(
            _sorted_numbers(out, list(numbers)), _sorted_numbers(plain, list(numbers))
        )
    assert snapshot(con) == before
    con.close()


@pytest.mark.parametrize("name", HOSTILE)
def test_python_functions_take_any_name(name):
    plain = plain_frame()
    k, t, v = name, name + " t", name + " v"
    odd = plain.rename(columns={"k": k, "t": t, "v": v})
    for function, numbers in (
        (tidesplit.split_table, ("trend", "seasonal", "remainder")),
        (tidesplit.profile, ("strength_of_season", "strength_of_trend")),
        (tidesplit.outliers, ("expected", "score")),
        (tidesplit.forecast, ("forecast", "low", "high")),
    ):
        out = function(odd, k, t, v, period=PERIOD)
        mine = function(plain, "k", "t", "v", period=PERIOD)
        assert out.columns[0] == k
        np.testing.assert_array_equal(
            out[list(numbers)].to_numpy(dtype=float), mine[list(numbers)].to_numpy(dtype=float)
        )


# the command line's job: each name as the source table, the target table and the columns
@pytest.mark.parametrize("name", HOSTILE[:9] + HOSTILE[10:12])
def test_the_command_line_job_takes_any_name(name, tmp_path):
    warehouse = str(tmp_path / "w.duckdb")
    k, t, v = name, name + " t", name + " v"
    source, target = name + " in", name + " out"
    with duckdb.connect(warehouse) as con:
        con.execute("CREATE TABLE guard AS SELECT 1 AS kept")
        con.register("frame", plain_frame())
        con.execute(f"CREATE TABLE {ident(source)} AS SELECT k AS {ident(k)}, "
                    f"t AS {ident(t)}, v AS {ident(v)} FROM frame")  # fmt: skip
        con.unregister("frame")
        before = snapshot(con)
    code = cli.main([
        "split", "--from", f"{warehouse}:{source}", "--to", f"{warehouse}:{target}",
        "--key", k, "--time", t, "--value", v, "--period", str(PERIOD), "--quiet",
    ])  # fmt: skip
    assert code == elt.EXIT_OK
    with duckdb.connect(warehouse, read_only=True) as con:
        after = snapshot(con)
        made = after.pop(("main", target, "table"))
        assert after == before  # the source and the guard as they were, nothing else
        assert len(made) == len(plain_frame())
        out = con.sql(f"SELECT * FROM {ident(target)}").df()
    assert list(out.columns[:3]) == [k, t, v]
    mine = tidesplit.split_table(plain_frame(), "k", "t", "v", period=PERIOD)
    np.testing.assert_array_equal(
        _sorted_numbers(out, ["trend", "seasonal"]), _sorted_numbers(mine, ["trend", "seasonal"])
    )


def test_the_spark_front_takes_any_name(spark):
    # one Spark DataFrame whose key, time and value columns carry the hostile names in turn
    from tidesplit import spark as tide_spark

    plain = plain_frame()
    mine = tidesplit.split_table(plain, "k", "t", "v", period=PERIOD)
    tried = 0
    for name in HOSTILE:
        k, t, v = name, name + " t", name + " v"
        frame = spark.createDataFrame(plain.rename(columns={"k": k, "t": t, "v": v}))
        out = tide_spark.split_table(frame, k, t, v, period=PERIOD).toArrow().to_pandas()
        assert list(out.columns[:3]) == [k, t, v]
        np.testing.assert_array_equal(
            _sorted_numbers(out, ["trend", "seasonal"]),
            _sorted_numbers(mine, ["trend", "seasonal"]),
        )
        tried += 1
    assert tried == len(HOSTILE)
