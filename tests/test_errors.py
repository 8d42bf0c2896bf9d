"""Bad input: a clear error naming the series and the reason, or, with on_error := 'keep',
NULL components and a status, with every input row still in the output."""

from __future__ import annotations

import duckdb
import numpy as np
import pandas as pd
import pytest

import tidesplit
from tidesplit import ParamError, SplitError


def good_series(n=36, period=12):
    t = np.arange(n)
    return 20 + np.sin(2 * np.pi * t / period) + 0.01 * t


def table_with(con, bad_rows: pd.DataFrame):
    """Two good series (keys 'a', 'b') and one series 'bad' given by bad_rows."""
    good = [pd.DataFrame({"shop": k, "t": np.arange(36), "v": good_series()}) for k in ("a", "b")]
    frame = pd.concat([*good, bad_rows.assign(shop="bad")], ignore_index=True)
    con.register("frame", frame)
    return frame


def bad(values, times=None):
    values = np.asarray(values, dtype=float)
    times = np.arange(values.size) if times is None else np.asarray(times)
    return pd.DataFrame({"t": times, "v": values})


CASES = {
    "too short": (bad(good_series(20)), "", "at least two periods (24) are needed"),
    "duplicate time": (bad(good_series(), np.r_[np.arange(35), 34]), "", "duplicate time 34"),
    "infinite": (
        bad(np.r_[good_series()[:10], np.inf, good_series()[11:]]),
        "",
        "infinite value at time 10",
    ),
    "non-positive under log": (
        bad(np.r_[good_series()[:5], -1.0, good_series()[6:]]),
        ", transform := 'log'",
        "value -1 at time 5 is not positive",
    ),
    "zero under boxcox": (
        bad(np.r_[0.0, good_series()[1:]]),
        ", transform := 'boxcox'",
        "is not positive, which the boxcox transform needs",
    ),
    "all missing": (bad(np.full(36, np.nan)), "", "every value is missing"),
    "a phase never observed": (
        bad(np.where(np.arange(36) % 12 == 3, np.nan, good_series())),
        "",
        "no value is observed at cycle position 3 of 12 (first at time 3)",
    ),
}


@pytest.mark.parametrize("case", sorted(CASES))
def test_bad_series_fails_the_query_naming_key_and_reason(con, case):
    rows, extra, reason = CASES[case]
    table_with(con, rows)
    with pytest.raises(duckdb.Error) as caught:
        con.sql(
            f"SELECT * FROM tide_split(frame, 'shop', 't', 'v', period := 12{extra})"
        ).fetchall()
    message = str(caught.value)
    assert "'shop': bad" in message
    assert reason in message


@pytest.mark.parametrize("case", sorted(CASES))
def test_keep_goes_on_and_accounts_for_every_row(con, case):
    rows, extra, reason = CASES[case]
    frame = table_with(con, rows)
    out = con.sql(
        f"SELECT * FROM tide_split(frame, 'shop', 't', 'v', period := 12{extra}, "
        "on_error := 'keep')"
    ).df()
    assert len(out) == len(frame)
    flagged = out[out["shop"] == "bad"]
    assert len(flagged) == len(rows)
    assert (flagged["status"].str.contains(reason, regex=False)).all()
    for name in ("trend", "seasonal", "remainder", "adjusted", "weight"):
        assert flagged[name].isna().all()
    fine = out[out["shop"] != "bad"]
    assert fine["status"].str.startswith("ok").all() and fine["trend"].notna().all()
    # the input values come back untouched, bad series included
    np.testing.assert_array_equal(np.sort(flagged["v"].to_numpy()), np.sort(rows["v"].to_numpy()))


@pytest.mark.parametrize(
    ("args", "reason"),
    [
        ("period := 1", "period must be at least 2"),
        (
            "period := 12, season_span := 8",
            "season_span must be an odd integer of at least 3, got 8",
        ),
        ("period := 12, trend_span := 1", "trend_span must be an odd integer"),
        ("period := 12, trend_degree := 2", "trend_degree must be 0 or 1, got 2"),
        ("period := 12, transform := 'cube'", "transform must be one of none, log, boxcox"),
        ("period := 12.5", "period must be a whole number"),
        ("period := 12, season_jump := 0", "season_jump must be at least 1"),
    ],
)
def test_bad_arguments(con, args, reason):
    # an argument no series can be split with fails the query, under keep too: it is not a
    # property of one series, and keep would only hide it behind every row's status
    table_with(con, bad(good_series()))
    for keep in ("", ", on_error := 'keep'"):
        with pytest.raises(duckdb.Error, match=reason) as caught:
            con.sql(f"SELECT * FROM tide_split(frame, 'shop', 't', 'v', {args}{keep})").fetchall()
        assert "series" not in str(caught.value)  # not blamed on one key


def test_unknown_argument_is_refused_by_the_binder(con):
    table_with(con, bad(good_series()))
    with pytest.raises(duckdb.Error, match="tide_split"):
        con.sql(
            "SELECT * FROM tide_split(frame, 'shop', 't', 'v', seasonal_window := 7)"
        ).fetchall()


def test_unknown_on_error_mode(con):
    table_with(con, bad(good_series()))
    with pytest.raises(duckdb.Error, match="on_error must be one of raise, keep"):
        con.sql(
            "SELECT * FROM tide_split(frame, 'shop', 't', 'v', period := 12, on_error := 'skip')"
        ).fetchall()


def test_null_time_is_bad_input(con):
    frame = bad(good_series()).astype({"t": "float64"})
    frame.loc[4, "t"] = np.nan
    frame["t"] = frame["t"].astype("Int64")
    table_with(con, frame)
    with pytest.raises(duckdb.Error, match=r"'shop': bad.*a time is NULL"):
        con.sql("SELECT * FROM tide_split(frame, 'shop', 't', 'v', period := 12)").fetchall()


def test_python_api_errors():
    with pytest.raises(SplitError, match="at least two periods"):
        tidesplit.split(good_series(20), period=12)
    with pytest.raises(ParamError, match="unknown argument"):
        tidesplit.split(good_series(), period=12, windows=3)
    frame = pd.concat(
        [bad(good_series()).assign(k="x"), bad(good_series(10)).assign(k="y")], ignore_index=True
    )
    with pytest.raises(SplitError, match=r"series \{'k': 'y'\}: has 10 points"):
        tidesplit.split_table(frame, "k", "t", "v", period=12)
    kept = tidesplit.split_table(frame, "k", "t", "v", period=12, on_error="keep")
    assert len(kept) == len(frame)
    assert set(kept["status"]) == {"ok", "has 10 points; at least two periods (24) are needed"}
