"""tide_profile, tide_outliers and tide_forecast (and their Python twins) against hand
computations, statsmodels and open datasets."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from datasets import AIRLINE_PASSENGERS, co2_monthly, elec_equip_monthly
from statsmodels.tsa.arima.model import ARIMA
from statsmodels.tsa.forecasting.stl import STLForecast
from statsmodels.tsa.holtwinters import ExponentialSmoothing
from statsmodels.tsa.seasonal import STL

import tidesplit
from tidesplit.kernel import damped, strengths


def monthly_frame(y, key="s", start="2000-01-01"):
    months = pd.date_range(start, periods=len(y), freq="MS")
    return pd.DataFrame({"k": key, "month": months, "v": np.asarray(y, dtype=float)})


# ---- strengths -------------------------------------------------------------------------


def test_strength_formula_by_hand():
    # Wang, Smith & Hyndman (2006); Hyndman & Athanasopoulos, FPP 3rd ed., section 4.3:
    # F = max(0, 1 - Var(R) / Var(C + R)). By hand: R = [1, -1, 1, -1] has sample variance
    # 4/3; S + R = [3, -1, -1, -1] has 4, so F_S = 2/3; T + R = [1, 0, 3, 2] has 5/3, so
    # F_T = 1/5.
    r = np.array([1.0, -1, 1, -1])
    assert strengths.strength(np.array([2.0, 0, -2, 0]), r) == pytest.approx(2 / 3)
    assert strengths.strength(np.array([0.0, 1, 2, 3]), r) == pytest.approx(0.2)
    assert strengths.strength(np.array([0.0, 0, 0, 0]), r) == 0.0  # clipped at zero


def test_strengths_of_pure_cycle_and_of_noise(rng):
    t = np.arange(120)
    cycle = 10 + 3 * np.sin(2 * np.pi * t / 12) + rng.normal(0, 0.05, 120)
    noise = 10 + rng.normal(0, 1, 120)
    frame = pd.concat([monthly_frame(cycle, "cycle"), monthly_frame(noise, "noise")])
    out = tidesplit.profile(frame, "k", "month", "v").set_index("k")
    assert out.loc["cycle", "strength_of_season"] > 0.99
    assert out.loc["noise", "strength_of_season"] < 0.4
    assert out.loc["noise", "strength_of_trend"] < 0.4


def test_strengths_equal_those_of_statsmodels_components():
    # the same formula applied to statsmodels' STL components (matched parameters)
    y = elec_equip_monthly()
    fit = STL(
        y,
        period=12,
        seasonal=13,
        trend=21,
        low_pass=13,
        seasonal_jump=2,
        trend_jump=3,
        low_pass_jump=2,
    ).fit(inner_iter=2, outer_iter=0)
    r = np.asarray(fit.resid)
    expected_s = max(0, 1 - np.var(r, ddof=1) / np.var(fit.seasonal + r, ddof=1))
    expected_t = max(0, 1 - np.var(r, ddof=1) / np.var(fit.trend + r, ddof=1))
    out = tidesplit.profile(monthly_frame(y), "k", "month", "v")
    assert out["strength_of_season"].iloc[0] == pytest.approx(expected_s, abs=1e-8)
    assert out["strength_of_trend"].iloc[0] == pytest.approx(expected_t, abs=1e-8)


def test_profile_cycle_shape_and_labels(con):
    t = np.arange(72)
    y = 100 + 10 * np.sin(2 * np.pi * (t - 0) / 12)  # peaks in April, troughs in October
    frame = monthly_frame(y)
    con.register("frame", frame)
    row = con.sql("SELECT * FROM tide_profile(frame, 'k', 'month', 'v')").df().iloc[0]
    assert (row["peak_label"], row["trough_label"]) == ("April", "October")
    assert (row["peak_position"], row["trough_position"]) == (3, 9)
    assert row["seasonal_amplitude"] == pytest.approx(20, abs=0.5)
    assert row["points"] == 72 and row["missing"] == 0 and row["time_step"] == "1 month"
    assert row["period"] == 12 and row["status"] == "ok"
    python = tidesplit.profile(frame, "k", "month", "v").iloc[0]
    for name in ("strength_of_trend", "strength_of_season", "remainder_sd", "remainder_acf1"):
        assert row[name] == pytest.approx(python[name], abs=1e-10)


def test_profile_counts_missing_and_flags_bad_series(con):
    frame = monthly_frame(co2_monthly()[:120]).dropna()
    short = monthly_frame(np.arange(10.0), key="short")
    con.register("frame", pd.concat([frame, short]))
    out = con.sql(
        "SELECT * FROM tide_profile(frame, 'k', 'month', 'v', transform := 'boxcox', "
        "on_error := 'keep') ORDER BY k"
    ).df()
    good, bad = out.iloc[0], out.iloc[1]
    assert good["missing"] == 120 - len(frame) and good["points"] == len(frame)
    assert 0 <= good["boxcox_lambda"] <= 1
    assert bad["status"].startswith("has 10 points") and np.isnan(bad["strength_of_season"])


def test_profile_with_two_periods(con, rng):
    t = np.arange(24 * 7 * 4)
    y = (
        20
        + 4 * np.sin(2 * np.pi * t / 24)
        + 2 * np.sin(2 * np.pi * t / 168)
        + rng.normal(0, 0.3, t.size)
    )
    frame = pd.DataFrame(
        {"k": "m", "ts": pd.date_range("2024-01-01", periods=t.size, freq="h"), "v": y}
    )
    con.register("frame", frame)
    row = (
        con.sql("SELECT * FROM tide_profile(frame, 'k', 'ts', 'v', periods := [24, 168])")
        .df()
        .iloc[0]
    )
    strengths = dict(row["strength_by_period"])
    assert strengths[24] > 0.9 and strengths[168] > 0.6
    assert row["peak_label"] == "06:00"  # sin over the day peaks a quarter-day in


# ---- outliers ---------------------------------------------------------------------------


def inject_spikes(y, rng, count=5, size=6.0):
    """Spikes of `size` standard deviations of the plain fit's remainder, distinct places."""
    scale = np.std(tidesplit.split(y, period=12).remainder)
    places = np.sort(rng.choice(np.arange(12, y.size - 12), count, replace=False))
    spiked = y.copy()
    spiked[places] += size * scale * rng.choice([-1, 1], count)
    return spiked, set(places.tolist())


def test_outliers_in_sql_match_python_and_join_back(con, rng):
    y, _ = inject_spikes(elec_equip_monthly(), rng)
    frame = monthly_frame(y)
    con.register("frame", frame)
    sql = con.sql("SELECT * FROM tide_outliers(frame, 'k', 'month', 'v') ORDER BY month").df()
    python = tidesplit.outliers(frame, "k", "month", "v")
    np.testing.assert_array_equal(pd.to_datetime(sql["month"]), pd.to_datetime(python["month"]))
    np.testing.assert_allclose(sql["score"], python["score"], atol=1e-10)
    assert set(sql["direction"]) <= {"high", "low"} and sql["is_outlier"].all()
    every = con.sql(
        "SELECT * FROM tide_outliers(frame, 'k', 'month', 'v', all_rows := true, rule := 'mad')"
    ).df()
    assert len(every) == len(frame)
    # expected is trend + seasonal on the original scale
    logged = con.sql(
        "SELECT * FROM tide_outliers(frame, 'k', 'month', 'v', all_rows := true, "
        "transform := 'log')"
    ).df()
    np.testing.assert_allclose(
        np.log(logged["v"]) - np.log(logged["expected"]), logged["remainder"], atol=1e-10
    )


# ---- forecasts --------------------------------------------------------------------------


def test_drift_forecast_matches_statsmodels_stl_forecast():
    # statsmodels' STLForecast carries the last cycle of the seasonal part forward and
    # forecasts the adjusted series with the given model; ARIMA(0,1,0) with a trend term is
    # a random walk with drift, our 'drift' method.
    y = elec_equip_monthly()[:-12]
    stl_args = dict(
        seasonal=13, trend=21, low_pass=13, seasonal_jump=2, trend_jump=3, low_pass_jump=2
    )
    fit = STLForecast(
        y, ARIMA, model_kwargs={"order": (0, 1, 0), "trend": "t"}, period=12, **stl_args
    ).fit(inner_iter=2, outer_iter=0)
    theirs = fit.forecast(12)
    frame = pd.DataFrame({"k": "e", "t": np.arange(y.size), "v": y})
    ours = tidesplit.forecast(frame, "k", "t", "v", period=12, steps_ahead=12, trend_model="drift")
    np.testing.assert_allclose(ours["forecast"], theirs, rtol=1e-4)
    assert ours["t"].tolist() == list(range(y.size, y.size + 12))


def test_damped_trend_recursion_matches_statsmodels():
    # statsmodels' ExponentialSmoothing (Holt's damped trend, fixed parameters, known start);
    # its smoothing_trend b* relates to our state-space beta by beta = alpha * b*
    a = np.log(AIRLINE_PASSENGERS)
    alpha, beta_star, phi = 0.6, 0.1, 0.9
    l0, b0 = a[0], a[1] - a[0]
    model = ExponentialSmoothing(
        a[1:],
        trend="add",
        damped_trend=True,
        initialization_method="known",
        initial_level=l0,
        initial_trend=b0,
    ).fit(smoothing_level=alpha, smoothing_trend=beta_star, damping_trend=phi, optimized=False)
    level, slope, sse, _ = damped.damped_path(a[1:], alpha, alpha * beta_star, phi, l0, b0)
    h = np.arange(1, 7)
    ours = level + np.cumsum(phi**h) * slope
    np.testing.assert_allclose(ours, model.forecast(6), rtol=1e-12)
    assert sse == pytest.approx(model.sse, rel=1e-10)


def test_grid_fit_is_the_best_damped_path(rng):
    # the grid fit runs every path side by side; it must pick what a plain search over the
    # tested recursion (damped_path) picks, with the same final state, missing points too
    alphas, betas, phis = np.linspace(0.1, 0.9, 5), np.array([0.01, 0.1, 0.3]), np.array([0.8, 0.9])
    series = [np.cumsum(rng.normal(0.2, 1.0, 60)) for _ in range(4)]
    series[1][[5, 6, 30]] = np.nan
    series[2][0] = np.nan  # starts one point later
    values = np.concatenate(series)
    offsets = np.arange(0, values.size + 1, 60)
    out = np.empty((4, 6))
    damped.damped_fit_serial(values, offsets, np.ones(4, bool), alphas, betas, phis, out)
    for s, a in enumerate(series):
        seen = np.flatnonzero(~np.isnan(a))
        first, second = seen[0], seen[1]
        start = (a[first], (a[second] - a[first]) / (second - first))
        best = None
        for alpha in alphas:
            for beta in betas[betas <= alpha]:
                for phi in phis:
                    level, slope, sse, count = damped.damped_path(
                        a[first + 1 :], alpha, beta, phi, *start
                    )
                    if best is None or sse < best[0]:
                        best = (sse, alpha, beta, phi, level, slope, sse / max(count - 3, 1))
        assert out[s].tolist() == list(best[1:])


def mase(actual, forecast, train, period):
    # Hyndman & Koehler (2006): MAE scaled by the in-sample seasonal naive MAE
    scale = np.mean(np.abs(train[period:] - train[:-period]))
    return np.mean(np.abs(actual - forecast)) / scale


@pytest.mark.parametrize("method", ["damped", "drift"])
def test_forecast_beats_seasonal_naive_on_held_out_tail(method):
    y = AIRLINE_PASSENGERS
    train, test = y[:-24], y[-24:]
    frame = monthly_frame(train, start="1949-01-01")
    out = tidesplit.forecast(
        frame, "k", "month", "v", steps_ahead=24, trend_model=method, transform="log"
    )
    ours = mase(test, out["forecast"].to_numpy(), train, 12)
    naive = mase(test, np.tile(train[-12:], 2), train, 12)
    assert ours < naive, (ours, naive)
    # future rows carry the next months
    assert pd.to_datetime(out["month"]).dt.strftime("%Y-%m").tolist()[:2] == ["1959-01", "1959-02"]


@pytest.mark.parametrize("method", ["damped", "drift"])
def test_intervals_widen_with_horizon(con, method):
    frame = monthly_frame(elec_equip_monthly())
    con.register("frame", frame)
    out = con.sql(
        "SELECT * FROM tide_forecast(frame, 'k', 'month', 'v', steps_ahead := 18, "
        f"coverage := 0.8, trend_model := '{method}') ORDER BY steps_ahead"
    ).df()
    width = (out["high"] - out["low"]).to_numpy()
    assert (np.diff(width) > 0).all()
    assert ((out["low"] < out["forecast"]) & (out["forecast"] < out["high"])).all()
    python = tidesplit.forecast(
        frame, "k", "month", "v", steps_ahead=18, coverage=0.8, trend_model=method
    )
    np.testing.assert_allclose(out["forecast"], python["forecast"], rtol=1e-10)


def test_future_times_follow_the_step(con):
    weeks = pd.date_range("2023-01-02", periods=120, freq="7D").date
    t = np.arange(120)
    frame = pd.DataFrame({"k": "w", "week": weeks, "v": 50 + np.sin(2 * np.pi * t / 52) + 0.1 * t})
    con.register("frame", frame)
    out = con.sql("SELECT * FROM tide_forecast(frame, 'k', 'week', 'v', steps_ahead := 3)").df()
    expected = [weeks[-1] + pd.Timedelta(days=7 * h) for h in (1, 2, 3)]
    assert pd.to_datetime(out["week"]).dt.date.tolist() == expected
    assert out["steps_ahead"].tolist() == [1, 2, 3]


def test_future_times_per_series_in_one_query(con, rng):
    # month ends, mid-month and daily series in one batch: each continues on its own grid
    month_ends = pd.date_range("2020-02-29", periods=48, freq="ME").date  # ends 2024-01-31
    mid_month = pd.date_range("2020-03-15", periods=48, freq="MS").date + pd.Timedelta(days=14)
    days = pd.date_range("2024-01-01", periods=60, freq="D").date
    frames = [
        pd.DataFrame({"k": name, "day": when, "v": 20 + rng.normal(0, 1, len(when))})
        for name, when in (("ends", month_ends), ("mid", mid_month), ("daily", days))
    ]
    con.register("frame", pd.concat(frames, ignore_index=True))
    out = con.sql(
        "SELECT k, day, steps_ahead FROM tide_forecast(frame, 'k', 'day', 'v', steps_ahead := 3) "
        "ORDER BY k, steps_ahead"
    ).df()
    ahead = {k: pd.to_datetime(g["day"]).dt.date.tolist() for k, g in out.groupby("k")}
    date = pd.Timestamp
    assert ahead["ends"] == [date(d).date() for d in ("2024-02-29", "2024-03-31", "2024-04-30")]
    last_mid = pd.Timestamp(mid_month[-1])
    assert ahead["mid"] == [(last_mid + pd.DateOffset(months=h)).date() for h in (1, 2, 3)]
    assert ahead["daily"] == [date(d).date() for d in ("2024-03-01", "2024-03-02", "2024-03-03")]
