"""tide_split and tide_split_list in DuckDB: shape, names, arguments, and the same numbers
as the Python API."""

from __future__ import annotations

import duckdb
import numpy as np
import pandas as pd
import pytest
from conftest import seasonal_series

import tidesplit

COMPONENTS = ["trend", "seasonal", "remainder", "adjusted", "weight"]
# the calendar effects' columns, 0 and adjusted itself without calendar_effects
EFFECT_COLUMNS = ["calendar_effect", "outside_effect", "adjusted_season_only"]
TAIL = ["inserted", "period", "season_span", "trend_span", "boxcox_lambda", "status"]


def sales_frame(rng, shops=3, products=4, n=48, period=12, missing=True):
    frames = []
    for s in range(shops):
        for p in range(products):
            y = np.round(seasonal_series(rng, n, period) * 10 + 50 * s, 1)
            if missing and (s + p) % 3 == 0:
                y[rng.choice(n, 3, replace=False)] = np.nan
            frames.append(
                pd.DataFrame(
                    {
                        "store": s,
                        "sku": f"p{p}",
                        "sku_name": f"product {p}",
                        "month": np.arange(n),
                        "units": y,
                    }
                )
            )
    return pd.concat(frames, ignore_index=True).sample(frac=1.0, random_state=3)


@pytest.fixture
def sales(con, rng):
    frame = sales_frame(rng)
    con.register("sales_df", frame)
    con.execute("CREATE TABLE sales AS SELECT * FROM sales_df")
    return frame


def test_one_row_per_input_row_with_own_column_names(con, sales):
    out = con.sql(
        "WITH one_store AS (SELECT * EXCLUDE (store) FROM sales WHERE store = 1) "
        "SELECT * FROM tide_split(one_store, 'sku', 'month', 'units', period := 12)"
    ).df()
    # sku must not also pick up sku_name: key names are exact, not patterns
    assert list(out.columns) == ["sku", "month", "units", *COMPONENTS, *EFFECT_COLUMNS, *TAIL]
    assert len(out) == (sales["store"] == 1).sum()
    assert (out["status"] == "ok").all()


def test_several_keys_and_every_row_back(con, sales):
    out = con.sql(
        "SELECT * FROM tide_split(sales, ['store', 'sku'], 'month', 'units', period := 12)"
    ).df()
    assert list(out.columns) == [
        "store",
        "sku",
        "month",
        "units",
        *COMPONENTS,
        *EFFECT_COLUMNS,
        *TAIL,
    ]
    assert len(out) == len(sales)
    merged = out.merge(sales, on=["store", "sku", "month"], suffixes=("", "_in"))
    assert len(merged) == len(sales)
    np.testing.assert_array_equal(merged["units"].isna(), merged["units_in"].isna())
    assert (out["status"] == "ok").all()


def test_missing_values_keep_trend_and_seasonal(con, sales):
    out = con.sql(
        "SELECT * FROM tide_split(sales, ['store', 'sku'], 'month', 'units', period := 12)"
    ).df()
    gaps = out[out["units"].isna()]
    assert len(gaps) > 0
    assert gaps["trend"].notna().all() and gaps["seasonal"].notna().all()
    assert gaps["remainder"].isna().all() and gaps["weight"].isna().all()
    full = out[out["units"].notna()]
    np.testing.assert_allclose(
        full["trend"] + full["seasonal"] + full["remainder"], full["units"], atol=1e-9
    )


ARGUMENT_SETS = [
    ("period := 12", {}),
    (
        "period := 12, season_span := 7, trend_jump := 3, robust := true",
        {"season_span": 7, "trend_jump": 3, "robust": True},
    ),
    (
        "period := 12, transform := 'boxcox', boxcox_lambda := 0.25",
        {"transform": "boxcox", "boxcox_lambda": 0.25},
    ),
    ("period := 12, transform := 'boxcox'", {"transform": "boxcox"}),
    ("period := 12, transform := 'log', season_span := 0", {"transform": "log", "season_span": 0}),
    (
        "season_degree := 0, lowpass_span := 15, period := 12, inner_loops := 3, "
        "outer_loops := 2, robust := true, trend_span := 19, lowpass_degree := 0, "
        "trend_degree := 0, season_jump := 2, lowpass_jump := 2",
        {
            "season_degree": 0,
            "lowpass_span": 15,
            "inner_loops": 3,
            "outer_loops": 2,
            "robust": True,
            "trend_span": 19,
            "lowpass_degree": 0,
            "trend_degree": 0,
            "season_jump": 2,
            "lowpass_jump": 2,
        },
    ),
]


@pytest.mark.parametrize(("sql_args", "py_args"), ARGUMENT_SETS, ids=[a for a, _ in ARGUMENT_SETS])
def test_sql_python_and_split_table_agree(con, sales, sql_args, py_args):
    sql = con.sql(
        f"SELECT * FROM tide_split(sales, ['store', 'sku'], 'month', 'units', {sql_args}) "
        "ORDER BY store, sku, month"
    ).df()
    table = tidesplit.split_table(sales, ["store", "sku"], "month", "units", period=12, **py_args)
    table = table.sort_values(["store", "sku", "month"]).reset_index(drop=True)
    for name in COMPONENTS:
        np.testing.assert_allclose(sql[name], table[name], rtol=0, atol=1e-10, equal_nan=True)
    for (store, sku), rows in sql.groupby(["store", "sku"]):
        one = tidesplit.split(rows["units"].to_numpy(), period=12, **py_args)
        for name in COMPONENTS:
            np.testing.assert_allclose(
                rows[name],
                getattr(one, name),
                rtol=0,
                atol=1e-10,
                equal_nan=True,
                err_msg=f"{store}/{sku} {name}",
            )


def test_split_list_for_own_group_by_over_a_subquery(con, sales):
    rows = con.sql(
        """
        SELECT store, sku, tide_split_list(list(units ORDER BY month), 12, robust := true) AS parts
        FROM (SELECT * FROM sales WHERE store < 2) GROUP BY store, sku ORDER BY store, sku
        """
    ).fetchall()
    assert len(rows) == 8
    frame = sales.sort_values("month")
    for store, sku, parts in rows:
        y = frame[(frame["store"] == store) & (frame["sku"] == sku)]["units"].to_numpy()
        one = tidesplit.split(y, period=12, robust=True)
        np.testing.assert_allclose(parts["trend"], one.trend, atol=1e-10)
        assert parts["status"] == "ok"
        assert len(parts["remainder"]) == len(y)


def test_table_macro_over_a_cte_and_dates(con, rng):
    con.execute(
        """
        CREATE TABLE visits AS
        SELECT 'site ' || (i % 2) AS site, DATE '2020-01-06' + 7 * (i // 2)::INT AS week_start,
               100 + 20 * sin((i // 2) * 2 * pi() / 13) + (i % 7) AS visitors
        FROM range(2 * 52) r(i)
        """
    )
    out = con.sql(
        "WITH recent AS (SELECT * FROM visits WHERE site = 'site 1') "
        "SELECT * FROM tide_split(recent, 'site', 'week_start', 'visitors', period := 13)"
    ).df()
    assert len(out) == 52 and list(out.columns)[:3] == ["site", "week_start", "visitors"]
    assert out["week_start"].is_monotonic_increasing


def test_register_is_idempotent_and_replaceable():
    con = duckdb.connect()
    tidesplit.register(con)
    tidesplit.register(con)
    tidesplit.register(con, replace=True)
    assert con.sql(
        "SELECT tide_split_list([1, 2, 3, 4, 1, 2, 3, 4]::DOUBLE[], 4).status"
    ).fetchall() == [("ok",)]


def test_many_series_on_several_threads_match_one_thread(rng):
    # more than one 2048-row UDF call, run by DuckDB on two threads at once
    frame = pd.concat(
        [
            pd.DataFrame({"k": k, "t": np.arange(36), "v": seasonal_series(rng, 36, 12)})
            for k in range(5000)
        ],
        ignore_index=True,
    )
    frame.loc[frame.sample(200, random_state=1).index, "v"] = np.nan
    results = []
    for threads in (1, 2):
        con = tidesplit.connect(config={"threads": threads})
        con.register("frame", frame)
        results.append(
            con.sql(
                "SELECT * FROM tide_split(frame, 'k', 't', 'v', period := 12, robust := true) "
                "ORDER BY k, t"
            ).df()
        )
        con.close()
    assert len(results[0]) == len(frame)
    for name in COMPONENTS:
        np.testing.assert_allclose(results[0][name], results[1][name], atol=1e-12, equal_nan=True)


def test_rows_in_any_order_come_back_aligned(rng):
    # list() keeps no order; the UDF sorts each series by time and maps the components back.
    # Values encode their time, so any misalignment of time, value and components shows.
    n_series, n = 3000, 48
    frame = pd.DataFrame(
        {"k": np.repeat(np.arange(n_series), n), "t": np.tile(np.arange(n), n_series)}
    )
    frame["v"] = 100 + frame["k"] + 0.5 * frame["t"] + 3 * np.sin(2 * np.pi * frame["t"] / 12)
    frame = frame.sample(frac=1.0, random_state=7).reset_index(drop=True)
    con = tidesplit.connect(config={"threads": 2})
    con.register("frame", frame)
    out = con.sql("SELECT * FROM tide_split(frame, 'k', 't', 'v', period := 12)").df()
    expected = 100 + out["k"] + 0.5 * out["t"] + 3 * np.sin(2 * np.pi * out["t"] / 12)
    np.testing.assert_allclose(out["v"], expected, atol=1e-9)
    np.testing.assert_allclose(
        out["trend"] + out["seasonal"] + out["remainder"], out["v"], atol=1e-9
    )
    one = out[out["k"] == 17].sort_values("t")
    single = tidesplit.split(one["v"].to_numpy(), period=12)
    np.testing.assert_allclose(one["trend"], single.trend, atol=1e-9)


def test_arguments_must_be_constants(con):
    con.execute(
        "CREATE TABLE t AS SELECT i // 24 AS k, i % 24 AS t, sin(i) AS v FROM range(96) r(i)"
    )
    with pytest.raises(duckdb.Error, match="period must be the same for every series"):
        con.sql("SELECT tide_split_list(list(v ORDER BY t), 4 + k) FROM t GROUP BY k").fetchall()


def test_table_names_schema_qualified_dotted_and_quoted(con):
    con.execute("CREATE SCHEMA analytics")
    con.execute(
        "CREATE TABLE analytics.sales AS SELECT i % 3 AS k, i // 3 AS t, sin(i) AS v "
        "FROM range(60) r(i)"
    )
    con.execute('CREATE TABLE "odd.name" AS SELECT * FROM analytics.sales')
    con.execute('CREATE TABLE "say ""when""" AS SELECT * FROM analytics.sales')
    for name in ("analytics.sales", "'analytics.sales'", "'\"odd.name\"'", '\'"say ""when"""\''):
        rows = con.sql(
            f"SELECT count(*) FROM tide_split({name}, 'k', 't', 'v', period := 4)"
        ).fetchall()
        assert rows == [(60,)], name


def test_a_cursor_is_registered_in_one_cheap_call(con):
    con.execute("CREATE TABLE s AS SELECT i % 3 AS k, i // 3 AS t, sin(i) AS v FROM range(60) r(i)")
    cursor = con.cursor()
    with pytest.raises(duckdb.Error, match="tide_split does not exist"):
        cursor.sql("SELECT * FROM tide_split(s, 'k', 't', 'v', period := 4)").fetchall()
    tidesplit.register(cursor)  # the UDFs are shared already; only the macros are made
    assert cursor.sql(
        "SELECT count(*) FROM tide_split(s, 'k', 't', 'v', period := 4)"
    ).fetchall() == [(60,)]
