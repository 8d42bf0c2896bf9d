"""The fast kernel against the literal implementation of the paper's steps (tests/naive.py),
over many shapes, missing-value patterns and options, including those statsmodels cannot
take (missing values, an infinite season span)."""

from __future__ import annotations

import naive
import numpy as np
import pytest
from conftest import seasonal_series

import tidesplit
from tidesplit import SplitParams

TOLERANCE = 1e-9


def compare(y, period, **options):
    resolved = SplitParams(period=period, **options).resolve()
    expected = naive.stl(
        y,
        period,
        resolved.season_span,
        resolved.trend_span,
        resolved.lowpass_span,
        resolved.season_degree,
        resolved.trend_degree,
        resolved.lowpass_degree,
        resolved.season_jump,
        resolved.trend_jump,
        resolved.lowpass_jump,
        resolved.inner_loops,
        resolved.outer_loops,
    )
    parts = tidesplit.split(y, period=period, **options)
    present = ~np.isnan(y)
    np.testing.assert_allclose(parts.trend, expected[0], rtol=0, atol=TOLERANCE)
    np.testing.assert_allclose(parts.seasonal, expected[1], rtol=0, atol=TOLERANCE)
    np.testing.assert_allclose(parts.weight[present], expected[2][present], rtol=0, atol=TOLERANCE)
    assert np.isnan(parts.weight[~present]).all()
    assert np.isnan(parts.remainder[~present]).all()
    assert np.isfinite(parts.trend).all() and np.isfinite(parts.seasonal).all()


OPTIONS = [
    {},
    {"robust": True},
    {"robust": True, "inner_loops": 2, "outer_loops": 3},
    {"season_span": 0},
    {"season_span": 0, "robust": True},
    {"season_degree": 0, "trend_degree": 0, "lowpass_degree": 0},
    {"season_span": 7, "season_jump": 2, "trend_jump": 3, "lowpass_jump": 4},
    {"season_span": 5, "trend_span": 9, "lowpass_span": 5, "inner_loops": 3},
]


@pytest.mark.parametrize(
    "options", OPTIONS, ids=lambda o: ",".join(f"{k}={v}" for k, v in o.items()) or "defaults"
)
@pytest.mark.parametrize(("n", "period"), [(36, 12), (50, 4), (73, 7), (31, 3)])
def test_complete_series(rng, n, period, options):
    compare(seasonal_series(rng, n, period), period, **options)


@pytest.mark.parametrize("options", OPTIONS[:4] + OPTIONS[6:7], ids=str)
@pytest.mark.parametrize("pattern", ["scattered", "run", "start", "end", "whole_cycle_gap"])
def test_missing_values(rng, options, pattern):
    period, n = 12, 72
    y = seasonal_series(rng, n, period)
    if pattern == "scattered":
        y[rng.choice(n, 10, replace=False)] = np.nan
    elif pattern == "run":
        y[30:37] = np.nan
    elif pattern == "start":
        y[:5] = np.nan
    elif pattern == "end":
        y[-4:] = np.nan
    else:  # a gap longer than the trend span's reach: fits there have no weight at all
        y[20:46] = np.nan
    compare(y, period, **options)


def test_robust_with_missing_and_outliers(rng):
    y = seasonal_series(rng, 96, 12)
    y[[10, 50, 51]] += 15
    y[[3, 4, 70]] = np.nan
    compare(y, 12, robust=True, inner_loops=2, outer_loops=5)


def test_the_robustness_median_is_numpys(rng):
    # the in-place selection that scales the robustness weights gives np.median's value
    # exactly: odd and even counts, ties, a NaN
    from tidesplit.kernel.median import _median

    for count in (1, 2, 3, 4, 7, 10, 31, 120, 121):
        for values in (rng.normal(size=count), rng.integers(0, 4, count).astype(float)):
            assert _median(values.copy(), count) == np.median(values)
    with_gap = np.array([1.0, np.nan, 3.0])
    assert np.isnan(_median(with_gap, 3))


def test_the_guided_median_is_numpys_whatever_the_guess(rng):
    # the median found among the values near the previous pass's is np.median's value
    # exactly, whether the guess is good, poor or missing, with ties and a NaN
    from tidesplit.kernel.median import _median_guided

    for count in (1, 2, 3, 4, 7, 10, 31, 120, 121, 8760):
        for values in (
            np.abs(rng.normal(size=count)),
            rng.integers(0, 4, count).astype(float),
            np.zeros(count),
        ):
            truth = np.median(values)
            for guess in (truth, truth * 1.05, truth * 0.9, truth * 3, 1e-300, 0.0, np.nan):
                assert _median_guided(values.copy(), count, guess) == truth, (count, guess)
    with_gap = np.array([1.0, np.nan, 3.0, 2.0])
    assert np.isnan(_median_guided(with_gap, 4, 2.0))
