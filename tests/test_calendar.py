"""Time columns with calendars and gaps: step and period inference, fill_gaps, time zones."""

from __future__ import annotations

import duckdb
import numpy as np
import pandas as pd
import pytest
from datasets import co2_monthly

import tidesplit
from tidesplit import calendar
from tidesplit.api import _time_codes
from tidesplit.kernel import grid


def frame_of(times, values, key="a"):
    return pd.DataFrame({"k": key, "t": times, "v": np.asarray(values, dtype=float)})


def cycle(n, period, level=50.0):
    t = np.arange(n)
    return level + 0.05 * t + 5 * np.sin(2 * np.pi * t / period)


# (times, expected step in words, expected period): the period table of the docs
# (monthly 12, quarterly 4, weekly 52, daily 7, hourly 24, 15 minutes 96; common practice)
STEP_CASES = {
    "monthly dates": (pd.date_range("2015-01-01", periods=36, freq="MS").date, "1 month", 12),
    "month-end dates": (pd.date_range("2015-01-31", periods=36, freq="ME").date, "1 month", 12),
    "quarterly dates": (pd.date_range("2010-01-01", periods=24, freq="QS").date, "3 months", 4),
    "weekly dates": (pd.date_range("2018-01-01", periods=160, freq="7D").date, "1 week", 52),
    "daily dates": (pd.date_range("2020-01-01", periods=60, freq="D").date, "1 day", 7),
    "hourly timestamps": (pd.date_range("2020-01-01", periods=72, freq="h"), "1 hour", 24),
    "15-minute timestamps": (
        pd.date_range("2020-01-01", periods=400, freq="15min"),
        "15 minutes",
        96,
    ),
    "monthly timestamps at noon": (
        pd.date_range("2015-01-01 12:00", periods=36, freq="MS") + pd.Timedelta(hours=12),
        "1 month",
        12,
    ),
}


@pytest.mark.parametrize("case", sorted(STEP_CASES))
def test_step_and_period_inference(con, case):
    times, step_words, period = STEP_CASES[case]
    frame = frame_of(times, cycle(len(times), period))
    con.register("frame", frame)
    out = con.sql("SELECT * FROM tide_split(frame, 'k', 't', 'v')").df()
    assert (out["period"] == period).all()
    assert (out["status"] == "ok").all()
    codes, _, kind, _ = _time_codes(frame["t"])
    status = ["ok"]
    grid = calendar.regularise(np.sort(codes), np.array([0, len(codes)]), kind, status)
    assert calendar.describe_step(int(grid.unit[0]), int(grid.step[0])) == step_words
    assert grid.complete


def test_integer_time_with_a_step_and_estimated_period(con):
    t = np.arange(0, 3 * 96, 3)  # every third unit
    con.register("frame", frame_of(t, cycle(96, 12)))
    out = con.sql("SELECT * FROM tide_split(frame, 'k', 't', 'v')").df()
    assert (out["period"] == 12).all()  # estimated from the autocorrelation
    noise = np.random.default_rng(5).normal(size=96)
    con.register("noise", frame_of(np.arange(96), noise))
    kept = con.sql("SELECT * FROM tide_split(noise, 'k', 't', 'v', on_error := 'keep')").df()
    assert (kept["status"] == "no seasonal cycle found in the data; give period").all()
    assert kept["period"].isna().all()


def test_yearly_data_has_no_implied_period(con):
    times = pd.date_range("1950-01-01", periods=40, freq="YS").date
    con.register("frame", frame_of(times, cycle(40, 5)))
    with pytest.raises(duckdb.Error, match="no seasonal period is implied by a step of 12 months"):
        con.sql("SELECT * FROM tide_split(frame, 'k', 't', 'v')").df()
    out = con.sql("SELECT * FROM tide_split(frame, 'k', 't', 'v', period := 5)").df()
    assert (out["status"] == "ok").all()


def test_irregular_times_name_the_time_off_the_step(con):
    stamps = pd.date_range("2020-01-01", periods=30, freq="D")
    stamps = stamps.where(np.arange(30) != 17, stamps[17] + pd.Timedelta(hours=5))
    con.register("frame", frame_of(stamps, cycle(30, 7)))
    with pytest.raises(
        duckdb.Error,
        match=r"'k': a.*irregular times: 2020-01-18 05:00:00 \(beside 2020-01-17 00:00:00 and "
        r"2020-01-19 00:00:00\) is off the step of 1 day that the other times follow",
    ):
        con.sql("SELECT * FROM tide_split(frame, 'k', 't', 'v')").df()
    kept = con.sql("SELECT * FROM tide_split(frame, 'k', 't', 'v', on_error := 'keep')").df()
    assert len(kept) == 30 and kept["status"].str.startswith("irregular times").all()


def test_a_month_moved_off_its_day_is_the_time_named(con):
    # one monthly date moved to the 15th: the message names it, not two regular neighbours
    months = pd.date_range("1920-01-01", periods=200, freq="MS")
    months = months.where(np.arange(200) != 125, pd.Timestamp("1930-06-15"))
    con.register("frame", frame_of(months.date, cycle(200, 12)))
    status = con.sql(
        "SELECT DISTINCT status FROM tide_split(frame, 'k', 't', 'v', on_error := 'keep')"
    ).fetchall()
    assert status == [
        (
            "irregular times: 1930-06-15 (beside 1930-05-01 and 1930-07-01) is off the monthly "
            "calendar (the same day of each month) that the other times follow",
        )
    ]


def test_months_on_one_day_without_one_step_name_the_month_off_it(con):
    # every time on the 1st, but the months 2 and 3 apart: no step of whole months fits
    # (found by the generated tables of tests/test_generated.py; it raised an IndexError)
    months = pd.to_datetime(["2001-01-01", "2001-03-01", "2001-05-01", "2001-08-01"])
    con.register("frame", frame_of(months.date, [1.0, 2.0, 3.0, 4.0]))
    status = con.sql(
        "SELECT DISTINCT status FROM tide_split(frame, 'k', 't', 'v', period := 2, "
        "on_error := 'keep')"
    ).fetchall()
    assert status == [
        (
            "irregular times: 2001-08-01 (beside 2001-05-01) is off the step of 2 months that "
            "the other times follow",
        )
    ]


def test_gaps_are_missing_values_and_fill_gaps_inserts_rows(con):
    times = pd.date_range("2016-01-01", periods=60, freq="MS").date
    values = cycle(60, 12)
    full = frame_of(times, values)
    dropped = [5, 6, 30, 47]
    gappy = full.drop(index=dropped)
    con.register("gappy", gappy)
    plain = con.sql("SELECT * FROM tide_split(gappy, 'k', 't', 'v') ORDER BY t").df()
    assert len(plain) == len(gappy) and not plain["inserted"].any()
    filled = con.sql(
        "SELECT * FROM tide_split(gappy, 'k', 't', 'v', fill_gaps := true) ORDER BY t"
    ).df()
    # the complete series' row count, the dropped rows marked as inserted
    assert len(filled) == len(full)
    assert np.flatnonzero(filled["inserted"]).tolist() == dropped
    assert filled.loc[filled["inserted"], "v"].isna().all()
    assert filled.loc[filled["inserted"], "trend"].notna().all()
    np.testing.assert_array_equal(pd.to_datetime(filled["t"]).dt.date, times)
    # the same numbers with or without the inserted rows, and in the Python API
    kept = filled[~filled["inserted"]].reset_index(drop=True)
    np.testing.assert_allclose(kept["trend"], plain["trend"], atol=1e-12)
    table = tidesplit.split_table(gappy, "k", "t", "v", fill_gaps=True)
    np.testing.assert_allclose(table["trend"], filled["trend"], atol=1e-10)
    np.testing.assert_array_equal(table["inserted"], filled["inserted"])


def test_series_of_different_lengths_starts_and_steps_in_one_query(con):
    frames = [
        frame_of(pd.date_range("2019-01-01", periods=40, freq="MS"), cycle(40, 12), "monthly"),
        frame_of(pd.date_range("2021-03-01", periods=90, freq="D"), cycle(90, 7), "daily"),
        frame_of(pd.date_range("2022-06-01", periods=100, freq="h"), cycle(100, 24), "hourly"),
    ]
    con.register("mixed", pd.concat(frames, ignore_index=True))
    out = con.sql(
        "SELECT k, any_value(period) AS p, count(*) AS n FROM "
        "tide_split(mixed, 'k', 't', 'v') GROUP BY k ORDER BY k"
    ).fetchall()
    assert out == [("daily", 7, 90), ("hourly", 24, 100), ("monthly", 12, 40)]


def test_dst_hourly_in_absolute_time_daily_on_the_wall_clock(con):
    con.execute("SET TimeZone = 'Europe/Berlin'")
    # hourly through the spring change: 24 * 20 instants one hour apart in absolute time
    con.execute(
        "CREATE TABLE hourly AS SELECT 'm' AS k, TIMESTAMPTZ '2024-03-25 00:00:00+00' "
        "- to_hours(240) + to_hours(i) AS t, 10 + sin(2 * pi() * i / 24) AS v FROM range(480) r(i)"
    )
    out = con.sql("SELECT * FROM tide_split(hourly, 'k', 't', 'v', fill_gaps := true)").df()
    assert len(out) == 480 and not out["inserted"].any() and (out["period"] == 24).all()
    # daily at local midnight through the spring and autumn changes (23- and 25-hour days)
    con.execute(
        "CREATE TABLE daily AS SELECT 'm' AS k, "
        "timezone('Europe/Berlin', TIMESTAMP '2024-03-01' + to_days(i)) AS t, "
        "10 + sin(2 * pi() * i / 7) AS v FROM range(300) r(i)"
    )
    out = con.sql("SELECT * FROM tide_split(daily, 'k', 't', 'v', fill_gaps := true)").df()
    assert len(out) == 300 and not out["inserted"].any() and (out["period"] == 7).all()
    # the same daily series measured in absolute time would not be regular
    assert np.unique(np.diff(pd.to_datetime(out["t"]).astype("int64")) // 3_600_000_000).size == 3


def test_real_hourly_local_clock_gap_is_filled():
    # seattle-temps (vega_datasets): hourly local times of 2010, one hour missing where the
    # clock jumps in spring
    from vega_datasets import data

    temps = data.seattle_temps().assign(k="seattle")
    out = tidesplit.split_table(temps, "k", "date", "temp", fill_gaps=True)
    assert len(out) == len(temps) + 1 and out["inserted"].sum() == 1
    assert (out["period"] == 24).all() and (out["status"] == "ok").all()


def test_co2_monthly_with_missing_months_runs_as_is(con):
    # statsmodels' co2 (weekly Mauna Loa CO2) resampled to months leaves a few months empty;
    # those rows are simply absent. Trend rises smoothly, the yearly cycle is stable, and the
    # components are close to those of the same series with the gaps interpolated.
    y = co2_monthly()
    months = pd.date_range("1958-03-01", periods=y.size, freq="MS")
    present = ~np.isnan(y)
    assert (~present).sum() >= 3
    frame = pd.DataFrame({"k": "mlo", "t": months[present], "v": y[present]})
    con.register("co2", frame)
    out = con.sql("SELECT * FROM tide_split(co2, 'k', 't', 'v', fill_gaps := true) ORDER BY t").df()
    assert len(out) == y.size and out["inserted"].sum() == (~present).sum()
    assert (out["period"] == 12).all()
    trend = out["trend"].to_numpy()
    assert (np.diff(trend) > 0).mean() > 0.97
    amplitude = out.groupby(pd.to_datetime(out["t"]).dt.year)["seasonal"].agg(np.ptp)
    assert amplitude.iloc[1:-1].between(4, 9).all()
    interpolated = pd.Series(y).interpolate().to_numpy()
    reference = tidesplit.split(interpolated, period=12)
    assert np.abs(trend - reference.trend).max() < 0.3
    assert np.abs(out["seasonal"].to_numpy() - reference.seasonal).max() < 0.5


def test_null_keys_form_a_group_of_their_own(con):
    frame = pd.concat(
        [frame_of(np.arange(36), cycle(36, 12), "a"), frame_of(np.arange(36), cycle(36, 12), None)],
        ignore_index=True,
    )
    con.register("frame", frame)
    out = con.sql("SELECT * FROM tide_split(frame, 'k', 't', 'v', period := 12)").df()
    assert len(out) == 72 and out["k"].isna().sum() == 36 and (out["status"] == "ok").all()
    table = tidesplit.split_table(frame, "k", "t", "v", period=12)
    assert len(table) == 72 and table["k"].isna().sum() == 36


def test_split_estimates_a_missing_period():
    assert tidesplit.split(cycle(96, 12)).period == 12
    with pytest.raises(tidesplit.SplitError, match="no seasonal cycle found"):
        tidesplit.split(np.random.default_rng(0).normal(size=96))


@pytest.mark.parametrize(
    ("column", "words"),
    [
        ("CAST(i AS VARCHAR)", 'the time column "t" holds text'),
        ("CAST(i AS DOUBLE)", 'the time column "t" holds fractional numbers'),
        ("make_time(i % 24, 0, 0)", 'the time column "t" holds times of day without a date'),
        ("to_hours(i)", 'the time column "t" holds intervals'),
        ("i % 2 = 0", 'the time column "t" holds true/false'),
    ],
)
def test_a_time_column_of_another_type_is_refused_by_name(con, column, words):
    con.execute(
        f"CREATE TABLE s AS SELECT i % 3 AS k, {column} AS t, i * 1.0 AS v FROM range(60) r(i)"
    )
    for fill in ("false", "true"):
        with pytest.raises(duckdb.Error, match=words) as caught:
            con.sql(
                f"SELECT * FROM tide_split(s, 'k', 't', 'v', period := 4, fill_gaps := {fill})"
            ).fetchall()
        assert "__tide" not in str(caught.value)  # no internal name in the message


def test_times_at_the_edges_of_64_bits(con):
    # well-behaved neighbours in the same query keep their numbers and status
    top = 2**63 - 1
    con.execute(
        "CREATE TABLE edges AS "
        f"SELECT 'apart' k, CASE WHEN i = 0 THEN -9200000000000000000 ELSE {top} - 100 + i END t, "
        "5 + sin(i) v FROM range(40) r(i) "
        f"UNION ALL SELECT 'top', {top} - 40 + i, 5 + sin(i) FROM range(40) r(i) "
        "UNION ALL SELECT 'fine', i, 5 + sin(i) FROM range(40) r(i)"
    )
    status = dict(
        con.sql(
            "SELECT k, any_value(status) FROM tide_split(edges, 'k', 't', 'v', period := 4, "
            "fill_gaps := true, on_error := 'keep') GROUP BY k"
        ).fetchall()
    )
    assert status["apart"] == (
        f"times from -9200000000000000000 to {top - 61} lie too far apart for one grid"
    )
    assert status["top"] == status["fine"] == "ok"
    # a forecast whose times would pass the largest BIGINT says so instead of wrapping
    ahead = dict(
        con.sql(
            "SELECT k, any_value(status) FROM tide_forecast(edges, 'k', 't', 'v', period := 4, "
            "steps_ahead := 3, on_error := 'keep') GROUP BY k"
        ).fetchall()
    )
    assert ahead["top"] == (
        "the forecast's times run past the largest time the column holds from step 2 of 3 on"
    )
    assert ahead["fine"] == "ok"


def test_an_infinite_time_is_said_to_be_infinite(con):
    con.execute(
        "CREATE TABLE inf AS SELECT 'a' k, CASE WHEN i = 5 THEN 'infinity'::TIMESTAMP "
        "ELSE TIMESTAMP '2020-01-01' + INTERVAL (i) DAY END AS t, 5 + sin(i) v "
        "FROM range(40) r(i)"
    )
    status = con.sql(
        "SELECT DISTINCT status FROM tide_split(inf, 'k', 't', 'v', on_error := 'keep')"
    ).fetchall()
    assert status == [("a time is infinite",)]


def test_rows_sorted_within_series_as_a_stable_sort(rng):
    # DuckDB's list() hands rows back in no promised order; the UDF sorts each series by
    # time itself (kernel/grid.sort_within), as np.lexsort((codes, series)) would, ties
    # in the order they came: series in order, shuffled grids without gaps (put in place
    # row by row), grids with gaps and repeated times (sorted), an empty series.
    parts = [
        np.arange(10),
        rng.permutation(50) + 1_000,
        np.roll(np.arange(0, 80, 2), 7),
        rng.permutation(np.repeat(np.arange(6), 3)),
        np.array([], dtype=np.int64),
        np.array([5, 4, 4, 9]),
    ]
    codes = np.concatenate(parts).astype(np.int64)
    offsets = np.concatenate(([0], np.cumsum([p.size for p in parts])))
    values = rng.normal(size=codes.size)
    order, sorted_codes, sorted_values = grid.sort_within(codes, values, offsets)
    series = np.repeat(np.arange(len(parts)), np.diff(offsets))
    expected = np.lexsort((codes, series))
    assert np.array_equal(order, expected)
    assert np.array_equal(sorted_codes, codes[expected])
    assert np.array_equal(sorted_values, values[expected])
    back = np.empty_like(values)
    grid.place(order, sorted_values, back)
    assert np.array_equal(back, values)
