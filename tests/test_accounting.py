"""Nothing lost, nothing silent: every input row of every key comes back, in every answer and
front, with many keys in one UDF call and across calls, good and bad series mixed.

The fleet (tests/fleet.py) holds series of known kinds; the checks know what each must give.
"""

from __future__ import annotations

import re

import duckdb
import numpy as np
import pandas as pd
import pytest
from fleet import (
    PERIOD,
    check_split,
    check_status,
    key_of,
    make_fleet,
    row_set,
    to_duckdb,
)

import tidesplit

KEYS = "['shop', 'item']"


@pytest.fixture(params=["date", "integer"])
def fleet_in_one_call(request):
    """60 keys on one DuckDB thread: one UDF call holds them all, so a value misplaced from
    one series to the next is seen."""
    fleet = make_fleet(np.random.default_rng(8), 60, request.param)
    con = tidesplit.connect()
    con.execute("SET threads = 1")
    given = to_duckdb(con, fleet)
    yield con, fleet, given
    con.close()


def split_alone(con, macro: str, key: tuple, args: str) -> pd.DataFrame:
    """The same macro over a table holding only one key."""
    shop, item = key
    shop_test = "shop IS NULL" if shop is None else f"shop = '{shop}'"
    con.execute(
        f"CREATE OR REPLACE TABLE alone AS SELECT * FROM fleet WHERE {shop_test} AND item = {item}"
    )
    return con.sql(f"SELECT * FROM {macro}(alone, {KEYS}, 't', 'v', {args})").df()


def same_components(together: pd.DataFrame, alone: pd.DataFrame, key: tuple) -> None:
    mine = together[together["item"] == key[1]].sort_values("t")
    alone = alone.sort_values("t")
    assert len(mine) == len(alone)
    for column in ("trend", "seasonal", "remainder", "adjusted", "weight"):
        np.testing.assert_allclose(
            mine[column].to_numpy(dtype=float),
            alone[column].to_numpy(dtype=float),
            rtol=1e-9,
            atol=1e-9,
            equal_nan=True,
            err_msg=f"{key} {column}",
        )


@pytest.mark.parametrize("fill", [False, True])
@pytest.mark.parametrize("robust", [False, True])
def test_split_accounts_for_every_row(fleet_in_one_call, fill, robust):
    con, fleet, given = fleet_in_one_call
    args = f"period := {PERIOD}, fill_gaps := {fill}, robust := {robust}, on_error := 'keep'"
    out = con.sql(f"SELECT * FROM tide_split(fleet, {KEYS}, 't', 'v', {args})").df()
    check_split(fleet, given, out, filled=fill)
    for key in list(fleet.kinds)[::7]:
        same_components(out, split_alone(con, "tide_split", key, args), key)


def test_split_with_a_transform_adds_up_on_its_scale(fleet_in_one_call):
    con, fleet, given = fleet_in_one_call
    args = f"period := {PERIOD}, fill_gaps := true, transform := 'log', on_error := 'keep'"
    out = con.sql(f"SELECT * FROM tide_split(fleet, {KEYS}, 't', 'v', {args})").df()
    check_split(fleet, given, out, filled=True, transform=np.log)


@pytest.mark.parametrize("fill", [False, True])
def test_several_periods_account_for_every_row(fleet_in_one_call, fill):
    con, fleet, given = fleet_in_one_call
    args = f"periods := [2, {PERIOD}], fill_gaps := {fill}, on_error := 'keep'"
    out = con.sql(f"SELECT * FROM tide_split_multi(fleet, {KEYS}, 't', 'v', {args})").df()
    # a series too short for the longer period is split with the shorter one alone
    check_split(fleet, given, out, filled=fill, expect={"too short": "ok; dropped period 4"})
    # the parts add up to the seasonal part for every split row, and are NULL for the others
    parts = out["seasonal_by_period"].map(
        lambda p: np.nan if p is None or len(p) == 0 else sum(x["seasonal"] for x in p)
    )
    ok = out["status"].str.startswith("ok")
    np.testing.assert_allclose(parts[ok], out.loc[ok, "seasonal"], rtol=1e-9, atol=1e-9)
    assert parts[~ok].isna().all()
    for key in list(fleet.kinds)[::9]:
        same_components(out, split_alone(con, "tide_split_multi", key, args), key)


def test_profile_has_one_row_per_key_with_its_status(fleet_in_one_call):
    con, fleet, _ = fleet_in_one_call
    out = con.sql(
        f"SELECT * FROM tide_profile(fleet, {KEYS}, 't', 'v', period := {PERIOD}, "
        "on_error := 'keep')"
    ).df()
    assert len(out) == len(fleet.kinds)
    check_status(fleet, {key_of(r): r.status for r in out.itertuples()})
    ok = out["status"].str.startswith("ok")
    assert out.loc[ok, "strength_of_season"].notna().all()
    assert out.loc[~ok, "strength_of_season"].isna().all()


def test_outliers_with_all_rows_account_for_every_row(fleet_in_one_call):
    con, fleet, given = fleet_in_one_call
    out = con.sql(
        f"SELECT * FROM tide_outliers(fleet, {KEYS}, 't', 'v', period := {PERIOD}, "
        "all_rows := true, on_error := 'keep')"
    ).df()
    assert row_set(out, ["shop", "item", "t", "v"]) == row_set(given, ["shop", "item", "t", "v"])
    check_status(fleet, {key_of(r): r.status for r in out.itertuples()})
    ok = out["status"].str.startswith("ok")
    assert out.loc[ok & out["v"].notna(), "expected"].notna().all()
    assert out.loc[~ok, ["expected", "remainder", "score"]].isna().all().all()
    # without all_rows: the flagged rows and every row of an unsplit series
    short = con.sql(
        f"SELECT * FROM tide_outliers(fleet, {KEYS}, 't', 'v', period := {PERIOD}, "
        "on_error := 'keep')"
    ).df()
    wanted = out[out["is_outlier"].fillna(False) | ~ok]
    assert row_set(short, ["shop", "item", "t", "v"]) == row_set(wanted, ["shop", "item", "t", "v"])


def test_forecast_gives_every_key_its_rows_or_its_status(fleet_in_one_call):
    con, fleet, _ = fleet_in_one_call
    out = con.sql(
        f"SELECT * FROM tide_forecast(fleet, {KEYS}, 't', 'v', period := {PERIOD}, "
        "steps_ahead := 3, on_error := 'keep')"
    ).df()
    check_status(fleet, {key_of(r): r.status for r in out.itertuples()})
    counts = out.groupby(["item"])["status"].agg(["size", "first"])
    ok = counts["first"].str.startswith("ok")
    assert (counts.loc[ok, "size"] == 3).all() and (counts.loc[~ok, "size"] == 1).all()
    good = out[out["status"].str.startswith("ok")]
    assert good[["t", "steps_ahead", "forecast", "low", "high"]].notna().all().all()
    assert out.loc[~out["status"].str.startswith("ok"), ["t", "forecast"]].isna().all().all()


@pytest.mark.parametrize(
    "macro", ["tide_split", "tide_split_multi", "tide_profile", "tide_outliers", "tide_forecast"]
)
def test_raise_names_a_bad_key_and_its_reason(fleet_in_one_call, macro):
    con, _, _ = fleet_in_one_call
    period = f"periods := [2, {PERIOD}]" if macro == "tide_split_multi" else f"period := {PERIOD}"
    with pytest.raises(duckdb.Error, match=r"series \{'shop': .*, 'item': \d+\}: .* more series"):
        con.sql(f"SELECT * FROM {macro}(fleet, {KEYS}, 't', 'v', {period})").fetchall()


def test_python_twins_account_for_every_row(fleet_in_one_call):
    con, fleet, given = fleet_in_one_call
    for fill in (False, True):
        out = tidesplit.split_table(
            given, ["shop", "item"], "t", "v", period=PERIOD, fill_gaps=fill, on_error="keep"
        )
        check_split(fleet, given, out, filled=fill)
        sql = con.sql(
            f"SELECT * FROM tide_split(fleet, {KEYS}, 't', 'v', period := {PERIOD}, "
            f"fill_gaps := {fill}, on_error := 'keep')"
        ).df()
        # the same rows and numbers as SQL (DuckDB hands DATE to pandas as a timestamp, so
        # a message naming a time may spell it with a clock; the reason is the same)
        columns = ["shop", "item", "t", "v", "trend", "seasonal", "remainder", "status"]
        mine, theirs = row_set(out, columns), row_set(sql, columns)
        assert [r[:4] for r in mine] == [r[:4] for r in theirs]
        assert [r[7].replace(" 00:00:00", "") for r in mine] == [r[7] for r in theirs]
        np.testing.assert_allclose(
            np.array([r[4:7] for r in mine], dtype=float),
            np.array([r[4:7] for r in theirs], dtype=float),
            rtol=1e-9,
            atol=1e-9,
        )
    profile = tidesplit.profile(given, ["shop", "item"], "t", "v", period=PERIOD, on_error="keep")
    assert len(profile) == len(fleet.kinds)
    check_status(fleet, {key_of(r): r.status for r in profile.itertuples()})
    unusual = tidesplit.outliers(
        given, ["shop", "item"], "t", "v", period=PERIOD, all_rows=True, on_error="keep"
    )
    assert row_set(unusual, ["shop", "item", "t", "v"]) == row_set(
        given, ["shop", "item", "t", "v"]
    )
    check_status(fleet, {key_of(r): r.status for r in unusual.itertuples()})
    ahead = tidesplit.forecast(
        given, ["shop", "item"], "t", "v", period=PERIOD, steps_ahead=3, on_error="keep"
    )
    check_status(fleet, {key_of(r): r.status for r in ahead.itertuples()})
    assert len(ahead) == sum(3 if k in fleet.grid else 1 for k in fleet.kinds)


@pytest.mark.parametrize(
    "macro, args",
    [
        ("tide_split", f"period := {PERIOD}, fill_gaps := true, robust := true"),
        ("tide_split_multi", f"periods := [2, {PERIOD}]"),
    ],
)
def test_a_few_columns_are_the_rows_of_every_column(fleet_in_one_call, macro, args):
    """Selecting some columns lets DuckDB leave the others out of the unnest (README,
    Performance): the rows and their values stay those of every column, unsplit keys too."""
    con, _, _ = fleet_in_one_call
    call = f"{macro}(fleet, {KEYS}, 't', 'v', {args}, on_error := 'keep')"
    con.execute(f"CREATE TABLE every_column AS SELECT * FROM {call}")
    few = "shop, item, t, v, trend, seasonal, remainder"
    chosen = con.sql(f"SELECT {few} FROM {call} ORDER BY ALL").df()
    stored = con.sql(f"SELECT {few} FROM every_column ORDER BY ALL").df()
    rows = con.execute("SELECT count(*) FROM every_column").fetchone()[0]
    assert len(chosen) == len(stored) == rows
    assert stored["trend"].isna().any() and stored["trend"].notna().any()  # both kinds of key
    pd.testing.assert_frame_equal(chosen, stored)


def test_across_udf_calls_more_than_2048_keys():
    """2,500 keys arrive in two UDF calls (DuckDB hands over at most 2,048 rows per call)."""
    fleet = make_fleet(np.random.default_rng(9), 2500, "date", bad_share=0.05)
    con = tidesplit.connect()
    con.execute("SET threads = 1")
    given = to_duckdb(con, fleet)
    for fill in (False, True):
        out = con.sql(
            f"SELECT * FROM tide_split(fleet, {KEYS}, 't', 'v', period := {PERIOD}, "
            f"fill_gaps := {fill}, on_error := 'keep')"
        ).df()
        check_split(fleet, given, out, filled=fill)
    # out is the last split above, with fill_gaps; keys from the start, middle and end
    args = f"period := {PERIOD}, fill_gaps := true, on_error := 'keep'"
    keys = list(fleet.kinds)
    for key in (keys[0], keys[2100], keys[-1]):
        same_components(out, split_alone(con, "tide_split", key, args), key)


# The cases below each once gave a wrong answer with status ok, or took an argument it
# should have refused.


def test_fill_gaps_puts_every_value_on_its_own_row_for_every_key(con):
    con.execute("SET threads = 1")  # one UDF call holds all three keys
    con.execute(
        "CREATE TABLE sales AS SELECT k, CAST(DATE '2020-01-01' + to_months(i) AS DATE) AS month, "
        "100.0 * k + i AS units FROM range(1, 4) a(k), range(30) r(i) WHERE i <> 5"
    )
    for macro, args in (("tide_split", "period := 12"), ("tide_split_multi", "periods := [3, 6]")):
        rows = con.sql(
            f"SELECT k, count(*), count(units), count(*) FILTER (WHERE units = 100.0 * k + "
            "date_diff('month', DATE '2020-01-01', month)) "
            f"FROM {macro}(sales, 'k', 'month', 'units', {args}, fill_gaps := true) "
            "GROUP BY k ORDER BY k"
        ).fetchall()
        assert rows == [(1, 30, 29, 29), (2, 30, 29, 29), (3, 30, 29, 29)], macro


def test_fill_gaps_keeps_the_times_of_an_unsplit_series(con):
    con.execute("SET threads = 1")  # the three series in one UDF call
    con.execute(
        "CREATE TABLE b AS SELECT * FROM (VALUES ('null', NULL, 1.0), ('null', 1, 2.0), "
        "('dup', 0, 1.0), ('dup', 1, 2.0), ('dup', 1, 2.5), ('dup', 2, 3.0), ('dup', 3, 4.0)) "
        "x(k, t, v) UNION ALL SELECT 'gap', i, 10.0 + i % 2 FROM range(10) r(i) WHERE i <> 4"
    )
    rows = con.sql(
        "SELECT k, t, v, inserted, status FROM tide_split(b, 'k', 't', 'v', period := 2, "
        "fill_gaps := true, on_error := 'keep') ORDER BY k, t NULLS FIRST, v"
    ).fetchall()
    times = {
        k: [(t, None if v is None else float(v), i) for key, t, v, i, _ in rows if key == k]
        for k in ("null", "dup", "gap")
    }
    assert times["null"] == [(None, 1.0, False), (1, 2.0, False)]
    assert times["dup"] == [
        (0, 1.0, False),
        (1, 2.0, False),
        (1, 2.5, False),
        (2, 3.0, False),
        (3, 4.0, False),
    ]
    assert [t for t, _, inserted in times["gap"] if inserted] == [4]
    assert [t for t, _, _ in times["gap"]] == list(range(10))
    statuses = {key: status for key, _, _, _, status in rows}
    assert statuses == {"null": "a time is NULL", "dup": "duplicate time 1", "gap": "ok"}


def test_every_period_has_each_cycle_position_observed(con):
    con.execute(
        "CREATE TABLE c AS SELECT 'a' k, i t, CASE WHEN i % 10 = 5 THEN NULL "
        "ELSE sin(i) + i * 0.1 END v FROM range(80) r(i)"
    )
    status = con.sql(
        "SELECT DISTINCT status, count(trend) FROM tide_split_multi(c, 'k', 't', 'v', "
        "periods := [4, 10], on_error := 'keep') GROUP BY status"
    ).fetchall()
    assert status == [("no value is observed at cycle position 5 of 10 (first at time 5)", 0)]


def test_a_robust_fit_that_breaks_down_says_so(con):
    # Cycle position 1 is observed once (50.0) among values near 1 at position 0: most
    # remainders of the first pass are exactly 0, so the robustness scale (six times their
    # median) is 0 and the lone observation's weight is 0.
    values = [1.0, None, 1.2, None, 0.9, None, 1.1, 50.0]
    values += [1.0, None, 1.3, None, 0.8, None, 1.1, None]
    rows = ", ".join(f"({t}, {'NULL' if v is None else v})" for t, v in enumerate(values))
    con.execute(f"CREATE TABLE d AS SELECT 'a' k, t, v FROM (VALUES {rows}) x(t, v)")
    with pytest.raises(duckdb.Error, match="the robust fit broke down"):
        con.sql(
            "SELECT * FROM tide_split(d, 'k', 't', 'v', period := 2, robust := true)"
        ).fetchall()
    kept = con.sql(
        "SELECT count(*), count(trend), any_value(status) FROM tide_split(d, 'k', 't', 'v', "
        "period := 2, robust := true, on_error := 'keep')"
    ).fetchall()[0]
    assert kept[:2] == (len(values), 0)
    assert kept[2].startswith("the robust fit broke down") and "cycle position 1 of 2" in kept[2]


def test_values_too_large_to_split_are_refused_with_their_time(con):
    for size in ("1e200", "1e307"):
        con.execute(
            f"CREATE OR REPLACE TABLE e AS SELECT 'a' k, i t, {size} * (1.5 + sin(i)) v "
            "FROM range(40) r(i)"
        )
        rows = con.sql(
            "SELECT count(*), count(forecast), any_value(status) FROM tide_forecast(e, 'k', 't', "
            "'v', period := 4, steps_ahead := 3, on_error := 'keep')"
        ).fetchall()
        assert rows[0][:2] == (1, 0)
        assert rows[0][2].startswith("value 1.5e+") and "at time 0 is beyond 1e+150" in rows[0][2]
        status = con.sql(
            "SELECT DISTINCT status FROM tide_split(e, 'k', 't', 'v', period := 4, "
            "on_error := 'keep')"
        ).fetchall()
        assert "the largest tidesplit splits" in status[0][0]


def test_a_forecast_that_overflows_after_the_back_transform_is_said(con):
    # a log-scale trend far ahead: exp() of it overflows a float
    con.execute(
        "CREATE TABLE grow AS SELECT 'a' k, i t, exp(0.5 * i + sin(i)) v FROM range(600) r(i)"
    )
    row = con.sql(
        "SELECT count(*), count(forecast), any_value(status) FROM tide_forecast(grow, 'k', 't', "
        "'v', period := 4, steps_ahead := 2000, transform := 'log', trend_model := 'drift', "
        "on_error := 'keep')"
    ).fetchall()[0]
    assert row[:2] == (1, 0) and row[2].startswith("the forecast is not finite from step")


def test_an_adjusted_value_no_number_reaches_is_said():
    # a low value in the high season: without its seasonal part it lies below -1 / lambda,
    # which the Box-Cox back-transform reaches from no positive number
    t = np.arange(48)
    values = np.where(t % 4 == 0, 50.0, 0.2) + 0.01 * t
    values[20] = 0.01
    frame = pd.DataFrame({"k": "a", "t": t, "v": values})
    out = tidesplit.split_table(
        frame, "k", "t", "v", period=4, transform="boxcox", boxcox_lambda=0.5
    )
    assert out["adjusted"].isna().sum() == 1 and np.isnan(out["adjusted"][20])
    assert out["status"][0] == (
        "ok; adjusted is NULL at 1 point(s), first at time 20: without its seasonal part the "
        "value lies outside what the Box-Cox transform with lambda 0.5 reaches"
    )


def test_an_argument_no_series_can_use_fails_the_query_under_keep_too(con):
    con.execute("CREATE TABLE f AS SELECT 'a' k, i t, 5.0 + sin(i) v FROM range(40) r(i)")
    with pytest.raises(duckdb.Error, match="period must be at least 2, got 0"):
        con.sql(
            "SELECT * FROM tide_split_multi(f, 'k', 't', 'v', periods := [0, 5], "
            "on_error := 'keep')"
        ).fetchall()


@pytest.mark.parametrize(
    ("call", "reason"),
    [
        (
            "tide_split(f, 'k', 't', 'v', period := 4, robust := 'yes')",
            "robust must be true or false, got VARCHAR yes",
        ),
        ("tide_split(f, 'k', 't', 'v', 4)", "give every argument after the value column by name"),
        ("tide_split_multi(f, 'k', 't', 'v', 7)", "give every argument after the value column"),
        (
            "tide_forecast(f, 'k', 't', 'v', period := 4, steps_ahead := 2.5)",
            "steps_ahead must be a whole number, got 2.5",
        ),
        (
            "tide_forecast(f, 'k', 't', 'v', period := 4, coverage := 'high')",
            "coverage must be a number",
        ),
        ("tide_split(f, 'k', 't', 'v', period := '12')", "period must be a number, got VARCHAR"),
        ("tide_split_multi(f, 'k', 't', 'v', periods := ['a'])", "periods must be a list of"),
        (
            "tide_outliers(f, 'k', 't', 'v', period := 4, all_rows := 1)",
            "all_rows must be true or false, got INTEGER 1",
        ),
        ("tide_profile(f, 'k', 't', 'v', period := 4, fill_gaps := true)", "tide_profile"),
    ],
)
def test_arguments_are_used_or_refused(con, call, reason):
    con.execute("CREATE TABLE f AS SELECT 'a' k, i t, 5.0 + sin(i) v FROM range(40) r(i)")
    with pytest.raises(duckdb.Error, match=reason.replace("(", r"\(")):
        con.sql(f"SELECT * FROM {call}").fetchall()


def test_arguments_are_checked_even_on_an_empty_table(con):
    con.execute("CREATE TABLE nothing (k VARCHAR, t BIGINT, v DOUBLE)")
    with pytest.raises(duckdb.Error, match="robust must be true or false"):
        con.sql("SELECT * FROM tide_split(nothing, 'k', 't', 'v', robust := 'yes')").fetchall()


def test_python_twins_refuse_what_sql_refuses():
    frame = pd.DataFrame({"k": "a", "t": np.arange(40), "v": 5.0 + np.sin(np.arange(40))})
    with pytest.raises(tidesplit.ParamError, match="steps_ahead must be a whole number"):
        tidesplit.forecast(frame, "k", "t", "v", period=4, steps_ahead=2.5)
    with pytest.raises(tidesplit.ParamError, match=r"unknown argument.*fill_gaps"):
        tidesplit.profile(frame, "k", "t", "v", period=4, fill_gaps=True)
    with pytest.raises(tidesplit.ParamError, match="robust must be true or false"):
        tidesplit.split_table(frame, "k", "t", "v", period=4, robust="yes")
    with pytest.raises(tidesplit.ParamError, match='input column "status" has the name'):
        tidesplit.outliers(frame.rename(columns={"k": "status"}), "status", "t", "v", period=4)
    with pytest.raises(tidesplit.ParamError, match="fill_gaps needs times"):
        tidesplit.split(frame["v"], periods=[4, 8], fill_gaps=True)
    with pytest.raises(KeyError, match="the table has k, t, v"):
        tidesplit.split_table(frame, "shop", "t", "v", period=4)


def test_input_columns_named_like_the_output(con):
    # a key named like a column that tide_split drops for one period stays
    con.execute(
        "CREATE TABLE h AS SELECT i % 2 AS periods, i // 2 AS t, sin(i) + i * 0.01 AS v "
        "FROM range(40) r(i)"
    )
    out = con.sql("SELECT * FROM tide_split(h, 'periods', 't', 'v', period := 4)").df()
    assert sorted(out["periods"].unique()) == [0, 1] and len(out) == 40
    con.execute("CREATE TABLE h2 AS SELECT periods AS period, t, v FROM h")
    out = con.sql("SELECT * FROM tide_split_multi(h2, 'period', 't', 'v', periods := [4])").df()
    assert sorted(out["period"].unique()) == [0, 1] and list(out.columns).count("period") == 1
    # a key named like an output column is refused, never renamed or filtered on
    for macro, name in (
        ("tide_outliers", "status"),
        ("tide_split", "trend"),
        ("tide_forecast", "forecast"),
        ("tide_profile", "points"),
    ):
        con.execute(f"CREATE OR REPLACE TABLE clash AS SELECT periods AS {name}, t, v FROM h")
        with pytest.raises(duckdb.Error, match=f'the input column "{name}" has the name of an'):
            con.sql(f"SELECT * FROM {macro}(clash, '{name}', 't', 'v', period := 4)").fetchall()
    with pytest.raises(duckdb.Error, match="key, time and value must be different columns"):
        con.sql("SELECT * FROM tide_split(h, 'periods', 't', 't', period := 4)").fetchall()


def test_messages_give_times_and_cycle_names(con):
    con.execute(
        "CREATE TABLE p AS SELECT 'a' k, CAST(DATE '2020-01-01' + to_months(i) AS DATE) t, "
        "CASE WHEN i = 13 THEN 0 WHEN i % 12 = 11 AND i > 30 THEN NULL ELSE 5 + sin(i) END v "
        "FROM range(40) r(i)"
    )
    zero = con.sql(
        "SELECT DISTINCT status FROM tide_split(p, 'k', 't', 'v', transform := 'log', "
        "on_error := 'keep')"
    ).fetchall()
    assert zero == [("value 0 at 2021-02-01 is not positive, which the log transform needs",)]
    con.execute("UPDATE p SET v = NULL WHERE month(t) = 12")
    unseen = con.sql(
        "SELECT DISTINCT status FROM tide_split(p, 'k', 't', 'v', on_error := 'keep')"
    ).fetchall()
    assert unseen == [
        ("no value is observed at December (cycle position 11 of 12, first at 2020-12-01)",)
    ]


def test_split_list_over_many_groups_in_one_call(fleet_in_one_call):
    con, fleet, _ = fleet_in_one_call
    rows = con.sql(
        "SELECT item, list(v ORDER BY t) AS values, tide_split_list(list(v ORDER BY t), "
        f"{PERIOD}, on_error := 'keep') AS parts FROM fleet WHERE t IS NOT NULL GROUP BY item"
    ).fetchall()
    assert len(rows) == len(fleet.kinds)
    for item, values, parts in rows:
        values = np.array(values, dtype=float)
        assert len(parts["trend"]) == len(values)
        if parts["status"] == "ok":
            total = np.array(parts["trend"]) + np.array(parts["seasonal"])
            remainder = np.array(parts["remainder"], dtype=float)
            seen = ~np.isnan(values)
            np.testing.assert_allclose(total[seen] + remainder[seen], values[seen], rtol=1e-9)
        else:
            assert all(v is None for v in parts["trend"]), item


@pytest.mark.parametrize(
    ("args", "words"),
    [
        ("period := 4, inner_loops := 1e9", "inner_loops must be at most 100, got 1e+09"),
        ("period := 4, robust := true, outer_loops := 1000", "outer_loops must be at most 100"),
        ("period := 4, season_jump := 1e300", "season_jump must be at most 10,000,000"),
        ("period := 1e300", "period must be at most 10,000,000"),
    ],
)
def test_arguments_beyond_their_bounds_are_refused_before_any_work(con, args, words):
    con.execute("CREATE TABLE f AS SELECT 'a' k, i t, 5.0 + sin(i) v FROM range(40) r(i)")
    for keep in ("", ", on_error := 'keep'"):
        with pytest.raises(duckdb.Error, match=re.escape(words)):
            con.sql(f"SELECT * FROM tide_split(f, 'k', 't', 'v', {args}{keep})").fetchall()
    with pytest.raises(duckdb.Error, match="steps_ahead must be at most 100,000"):
        con.sql(
            "SELECT * FROM tide_forecast(f, 'k', 't', 'v', period := 4, steps_ahead := 1e9)"
        ).fetchall()
    with pytest.raises(duckdb.Error, match="steps_ahead must be a whole number, got nan"):
        con.sql(
            "SELECT * FROM tide_forecast(f, 'k', 't', 'v', period := 4, "
            "steps_ahead := 'NaN'::DOUBLE)"
        ).fetchall()


def test_a_series_too_long_is_refused_before_its_grid(monkeypatch):
    # the length bound, lowered here so that the test stays small: a series past it is
    # not split (keep) or names its key (raise); the others are split as usual, and
    # every row of the long one comes back
    from tidesplit import calendar

    monkeypatch.setattr(calendar, "MAX_SERIES_POINTS", 100)
    t = np.arange(150)
    frame = pd.DataFrame(
        {
            "k": np.repeat(["long", "short a", "short b"], [150, 60, 60]),
            "t": np.concatenate([t, t[:60], t[:60]]),
            "v": np.concatenate([np.sin(t), np.sin(t[:60]), np.cos(t[:60])]) + 5,
        }
    )
    kept = tidesplit.split_table(frame, "k", "t", "v", period=12, on_error="keep")
    assert len(kept) == len(frame)
    status = kept.groupby("k")["status"].first()
    assert status["long"] == (
        "too long: 150 points on its regular grid, more than the 100 a series may have"
    )
    assert status["short a"] == status["short b"] == "ok"
    assert kept.loc[kept["k"] == "long", "trend"].isna().all()
    with pytest.raises(tidesplit.SplitError, match=r"series \{'k': 'long'\}: too long"):
        tidesplit.split_table(frame, "k", "t", "v", period=12)
