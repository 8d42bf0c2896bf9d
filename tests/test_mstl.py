"""Several seasonal periods against statsmodels' MSTL (statsmodels.tsa.seasonal.MSTL, the
method of Bandara, Hyndman & Bergmeir, 2021) with matched settings."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from statsmodels.tsa.seasonal import MSTL

import tidesplit

TOLERANCE = 1e-8


def two_cycles(rng, n):
    t = np.arange(n)
    return (
        50
        + 0.01 * t
        + 5 * np.sin(2 * np.pi * t / 24)
        + 3 * np.cos(2 * np.pi * t / 168)
        + rng.normal(0, 0.5, n)
    )


def reference(y, periods, windows=None, lmbda=None, iterate=2, robust=False, inner=2, outer=0):
    fit = MSTL(
        y,
        periods=periods,
        windows=windows,
        lmbda=lmbda,
        iterate=iterate,
        stl_kwargs={
            "seasonal_jump": 1,
            "trend_jump": 1,
            "low_pass_jump": 1,
            "robust": robust,
            "inner_iter": inner,
            "outer_iter": outer,
        },
    ).fit()
    return fit


def ours(y, periods, **options):
    return tidesplit.split(
        y, periods=periods, season_jump=1, trend_jump=1, lowpass_jump=1, **options
    )


def assert_matches(mine, theirs, periods):
    seasonal = np.asarray(theirs.seasonal).reshape(len(mine.observed), -1)
    np.testing.assert_allclose(mine.trend, theirs.trend, atol=TOLERANCE)
    for k, period in enumerate(periods):
        np.testing.assert_allclose(mine.seasonal_parts[period], seasonal[:, k], atol=TOLERANCE)
    np.testing.assert_allclose(mine.remainder, theirs.resid, atol=TOLERANCE)


@pytest.mark.parametrize("robust", [False, True])
def test_synthetic_hourly_two_cycles(rng, robust):
    y = two_cycles(rng, 24 * 7 * 5)
    loops = {"inner_loops": 2, "outer_loops": 3} if robust else {"inner_loops": 2}
    mine = ours(y, [24, 168], robust=robust, **loops)
    theirs = reference(y, (24, 168), robust=robust, inner=2, outer=3 if robust else 0)
    assert_matches(mine, theirs, (24, 168))


def test_windows_iterations_and_fixed_lambda(rng):
    y = np.exp(two_cycles(rng, 24 * 7 * 4) / 20)
    mine = ours(
        y, [168, 24], season_spans=[9, 13], iterations=3, transform="boxcox", boxcox_lambda=0.3
    )
    # statsmodels sorts periods with their windows too; its automatic lambda is maximum
    # likelihood, not Guerrero's, so the comparison uses a fixed one
    theirs = reference(y, (168, 24), windows=(9, 13), lmbda=0.3, iterate=3)
    assert_matches(mine, theirs, (24, 168))


def test_open_hourly_dataset():
    # seattle-temps (vega_datasets): hourly temperatures of 2010, as consecutive points
    from vega_datasets import data

    y = data.seattle_temps()["temp"].to_numpy(dtype=float)[: 24 * 7 * 12]
    mine = ours(y, [24, 168])
    theirs = reference(y, (24, 168))
    assert_matches(mine, theirs, (24, 168))


def test_long_periods_are_dropped_with_a_status(rng):
    y = two_cycles(rng, 24 * 10)  # 240 points: 168 is not shorter than half the series
    mine = ours(y, [24, 168])
    assert list(mine.seasonal_parts) == [24]
    theirs = reference(y, (24,))
    np.testing.assert_allclose(mine.trend, theirs.trend, atol=TOLERANCE)
    frame = pd.DataFrame(
        {"k": "m", "t": pd.date_range("2024-01-01", periods=240, freq="h"), "v": y}
    )
    out = tidesplit.split_table(frame, "k", "t", "v", periods=[])  # implied: 24 and 168
    assert set(out["status"]) == {"ok; dropped period 168: not shorter than half the series"}
    # beside a longer series that keeps both: one column per period used, NaN where dropped
    longer = pd.DataFrame(
        {"k": "z", "t": pd.date_range("2024-01-01", periods=24 * 7 * 4, freq="h")}
    ).assign(v=two_cycles(rng, 24 * 7 * 4))
    both = tidesplit.split_table(pd.concat([frame, longer]), "k", "t", "v", periods=[])
    assert [c for c in both.columns if c.startswith("seasonal_period_")] == [
        "seasonal_period_24",
        "seasonal_period_168",
    ]
    short, long_ = both[both["k"] == "m"], both[both["k"] == "z"]
    assert short["seasonal_period_168"].isna().all()
    assert all(tuple(p) == (24,) for p in short["periods"])
    np.testing.assert_allclose(short["seasonal_period_24"], short["seasonal"], atol=1e-12)
    np.testing.assert_allclose(
        long_["seasonal_period_24"] + long_["seasonal_period_168"], long_["seasonal"], atol=1e-12
    )
    assert all(tuple(p) == (24, 168) for p in long_["periods"])


def test_sql_multi_with_inferred_periods_and_gaps(con, rng):
    y = two_cycles(rng, 24 * 7 * 5)
    times = pd.date_range("2024-02-01", periods=y.size, freq="h")
    frame = pd.DataFrame({"meter": "m1", "ts": times, "load": y}).drop(index=[100, 101, 500])
    con.register("meters", frame)
    out = con.sql(
        "SELECT * FROM tide_split_multi(meters, 'meter', 'ts', 'load', fill_gaps := true) "
        "ORDER BY ts"
    ).df()
    assert len(out) == y.size and out["inserted"].sum() == 3
    assert out["periods"].iloc[0].tolist() == [24, 168]
    # one (period, seasonal) struct per period on every row, in ascending period
    assert all([p["period"] for p in row] == [24, 168] for row in out["seasonal_by_period"])
    parts = pd.DataFrame(
        out["seasonal_by_period"].map(lambda r: {p["period"]: p["seasonal"] for p in r}).tolist()
    )
    np.testing.assert_allclose(parts[24] + parts[168], out["seasonal"], atol=1e-12)
    looked_up = con.sql(
        "SELECT tide_part(seasonal_by_period, 24) AS day, tide_part(seasonal_by_period, 168) "
        "AS week, tide_part(seasonal_by_period, 12) AS absent FROM tide_split_multi(meters, "
        "'meter', 'ts', 'load', fill_gaps := true) ORDER BY ts"
    ).df()
    np.testing.assert_array_equal(looked_up["day"], parts[24])
    np.testing.assert_array_equal(looked_up["week"], parts[168])
    assert looked_up["absent"].isna().all()
    table = tidesplit.split_table(frame, "meter", "ts", "load", periods=[], fill_gaps=True)
    np.testing.assert_allclose(table["trend"], out["trend"], atol=1e-10)
    # a transform applies before the split, as with one period
    logged = con.sql(
        "SELECT * FROM tide_split_multi(meters, 'meter', 'ts', 'load', periods := [24, 168], "
        "transform := 'log') ORDER BY ts"
    ).df()
    np.testing.assert_allclose(
        logged["trend"] + logged["seasonal"] + logged["remainder"],
        np.log(frame["load"]),
        atol=1e-10,
    )


def test_per_row_parts_same_periods_and_mixed():
    # Each output row lists (period, seasonal part) for the periods its series kept: the
    # same periods for every series (taken without masks) and a series that kept fewer.
    from tidesplit.duckdb_ext import _per_row_parts

    parts = np.array([[1.0, 2.0, 3.0], [4.0, 5.0, 6.0]])
    offsets = np.array([0, 2, 3])
    every = _per_row_parts(parts, [(24, 168), (24, 168)], offsets).to_pylist()
    assert every == [
        [
            [{"period": 24, "seasonal": 1.0}, {"period": 168, "seasonal": 4.0}],
            [{"period": 24, "seasonal": 2.0}, {"period": 168, "seasonal": 5.0}],
        ],
        [[{"period": 24, "seasonal": 3.0}, {"period": 168, "seasonal": 6.0}]],
    ]
    fewer = _per_row_parts(parts, [(24, 168), (24,)], offsets).to_pylist()
    assert fewer == [every[0], [[{"period": 24, "seasonal": 3.0}]]]
