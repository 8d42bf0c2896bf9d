"""tide_forecast on held-out data of the open datasets: interval coverage and accuracy
against the seasonal naive forecast; the rolling-origin calibration on its own."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from datasets import open_collections
from open_checks import holdout_forecasts

import tidesplit
from tidesplit import forecast_ahead


@pytest.fixture(scope="module")
def held_out():
    # every open series long enough, its last two cycles held out, and the two cycles
    # before those (the series cut short there), and the two before: three windows each
    return pd.concat(holdout_forecasts(series, windows=3) for series in open_collections().values())


def _coverage(rows, level):
    column = "inside_" + str(level).replace(".", "_")
    return rows[column].sum() / rows["points"].sum()


def test_intervals_cover_what_they_claim_overall(held_out):
    # nominal 80% and 95% intervals within 3 points of nominal over all held-out points
    assert abs(_coverage(held_out, 0.8) - 0.8) <= 0.03, _coverage(held_out, 0.8)
    assert abs(_coverage(held_out, 0.95) - 0.95) <= 0.03, _coverage(held_out, 0.95)


def test_no_dataset_falls_below_85_percent_at_95(held_out):
    for name, rows in held_out.groupby("collection"):
        assert _coverage(rows, 0.95) >= 0.85, (name, _coverage(rows, 0.95))


def test_default_beats_seasonal_naive_on_most_series_of_every_dataset(held_out):
    # MASE (Hyndman & Koehler 2006) of the default (damped trend) against that of the
    # seasonal naive forecast (the last cycle repeated), series by series
    for name, rows in held_out.groupby("collection"):
        share = np.mean(rows["forecast_mase"] < rows["naive_mase"])
        assert share > 0.5, (name, share)


def test_conformal_rank(rng):
    # split conformal prediction (Vovk et al. 2005): the ceil((m + 1) q)-th smallest of m
    values = rng.permutation(np.arange(1.0, 20.0))  # 19 values
    series = np.zeros(19, dtype=np.int64)
    assert forecast_ahead._per_series(values, series, 1, "0.9")[0] == 18.0  # ceil(20 * 0.9)
    assert forecast_ahead._per_series(values, series, 1, "0.99")[0] == 19.0  # too few: largest
    assert forecast_ahead._per_series(values, series, 1, "mean")[0] == 10.0


def test_intervals_widen_where_the_past_errs_more_than_the_model_says(rng):
    # two series with the same steady noise until the last quarter of their past, where one
    # turns five times as noisy: the damped trend's own spread hardly moves (it averages the
    # whole past), the rolling-origin errors of the noisy one widen its intervals
    t = np.arange(240)
    base = 50 + 5 * np.sin(2 * np.pi * t / 12)
    calm = base + rng.normal(0, 1, 240)
    wild = calm.copy()
    wild[180:] = base[180:] + rng.normal(0, 5, 60)
    frame = pd.concat(
        pd.DataFrame({"k": k, "t": t, "v": v}) for k, v in (("calm", calm), ("wild", wild))
    )
    out = tidesplit.forecast(frame, "k", "t", "v", period=12, steps_ahead=12)
    width = (out["high"] - out["low"]).groupby(out["k"]).mean()
    assert width["wild"] > 3 * width["calm"]


def test_select_takes_each_series_its_best_method_on_the_past(rng):
    # a straight line with noise is drift's; a random walk with no trend is flat's
    t = np.arange(120)
    cycle = 3 * np.sin(2 * np.pi * t / 12)
    line = 10 + 0.5 * t + cycle + rng.normal(0, 0.3, 120)
    walk = 10 + np.cumsum(rng.normal(0, 1, 120)) + cycle
    frame = pd.concat(
        pd.DataFrame({"k": k, "t": t, "v": v}) for k, v in (("line", line), ("walk", walk))
    )
    from tidesplit import answers, api

    table = api._Table(frame, "k", "t", "v", answers.FORECAST)
    result = table.split(api._settings("forecast", 12, {}), fill_gaps=True)
    ahead = forecast_ahead.forecast(result, "integer", None, 12, 0.95, "select")
    assert ahead.method[0] in ("drift", "damped") and ahead.method[1] in ("flat", "damped")
    assert ahead.method[0] != ahead.method[1]


def test_sql_and_python_agree_over_many_keys(con, rng):
    # more keys than one UDF call takes (2,048): the refit of tide_outliers and the
    # rolling origins of tide_forecast run per call, and must not mix series across calls
    keys = 2100
    t = np.arange(60)
    values = 20 + np.sin(2 * np.pi * t / 12)[None, :] * rng.uniform(1, 3, (keys, 1))
    values = values + rng.normal(0, 0.3, (keys, 60)) + rng.uniform(0, 0.1, (keys, 1)) * t
    values[::50, 30] += 6.0  # a spike in every fiftieth series
    frame = pd.DataFrame(
        {"k": np.repeat(np.arange(keys), 60), "t": np.tile(t, keys), "v": values.ravel()}
    )
    con.register("frame", frame)
    sql = con.sql(
        "SELECT k, t, score, is_outlier FROM tide_outliers(frame, 'k', 't', 'v', period := 12, "
        "all_rows := true) ORDER BY k, t"
    ).df()
    python = tidesplit.outliers(frame, "k", "t", "v", period=12, all_rows=True)
    python = python.sort_values(["k", "t"]).reset_index(drop=True)
    np.testing.assert_allclose(sql["score"], python["score"], atol=1e-9)
    assert (sql["is_outlier"].to_numpy() == python["is_outlier"].to_numpy()).all()
    assert sql.loc[sql["t"] == 30, "is_outlier"].to_numpy()[::50].mean() > 0.9
    ahead = con.sql(
        "SELECT k, steps_ahead, forecast, low, high FROM tide_forecast(frame, 'k', 't', 'v', "
        "period := 12, steps_ahead := 6) ORDER BY k, steps_ahead"
    ).df()
    mine = tidesplit.forecast(frame, "k", "t", "v", period=12, steps_ahead=6)
    mine = mine.sort_values(["k", "steps_ahead"]).reset_index(drop=True)
    assert len(ahead) == keys * 6
    for column in ("forecast", "low", "high"):
        np.testing.assert_allclose(ahead[column], mine[column], rtol=1e-9)
