"""The kernel against statsmodels' STL (statsmodels.tsa.seasonal.STL, a port of the
authors' reference routines) with matched spans, degrees, jumps and loop counts."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import seasonal_series
from datasets import elec_equip_monthly, elnino_monthly, realgdp_quarterly
from statsmodels.tsa.seasonal import STL

import tidesplit

TOLERANCE = 1e-8

DATASETS = {
    "elec_equip": (elec_equip_monthly, 12),
    "realgdp": (realgdp_quarterly, 4),
    "elnino": (elnino_monthly, 12),
}


def reference(y, period, season_span, trend_span, lowpass_span, degree, jump, robust, inner, outer):
    fit = STL(
        y,
        period=period,
        seasonal=season_span,
        trend=trend_span,
        low_pass=lowpass_span,
        seasonal_deg=degree,
        trend_deg=degree,
        low_pass_deg=degree,
        seasonal_jump=jump,
        trend_jump=jump,
        low_pass_jump=jump,
        robust=robust,
    ).fit(inner_iter=inner, outer_iter=outer)
    return fit.trend, fit.seasonal, fit.weights


def ours(y, period, season_span, trend_span, lowpass_span, degree, jump, robust, inner, outer):
    parts = tidesplit.split(
        y,
        period=period,
        season_span=season_span,
        trend_span=trend_span,
        lowpass_span=lowpass_span,
        season_degree=degree,
        trend_degree=degree,
        lowpass_degree=degree,
        season_jump=jump,
        trend_jump=jump,
        lowpass_jump=jump,
        robust=robust,
        inner_loops=inner,
        outer_loops=outer,
    )
    return parts.trend, parts.seasonal, parts.weight


@pytest.mark.parametrize("name", sorted(DATASETS))
@pytest.mark.parametrize("robust", [False, True])
@pytest.mark.parametrize("degree", [0, 1])
@pytest.mark.parametrize("jump", [1, 3])
def test_open_datasets_match_statsmodels(name, robust, degree, jump):
    load, period = DATASETS[name]
    y = load()
    spans = (7, 23, 13) if period == 12 else (7, 9, 5)
    inner, outer = (2, 4) if robust else (5, 0)
    args = (y, period, *spans, degree, jump, robust, inner, outer)
    for mine, theirs in zip(ours(*args), reference(*args), strict=True):
        np.testing.assert_allclose(mine, theirs, rtol=0, atol=TOLERANCE * max(1, np.abs(y).max()))


@pytest.mark.parametrize(
    ("n", "period", "spans"),
    [
        (48, 12, (7, 21, 13)),
        (61, 7, (9, 13, 9)),
        (40, 4, (35, 7, 5)),  # season span far longer than each 10-point subseries
        (300, 24, (11, 41, 25)),
        (30, 2, (3, 5, 3)),
    ],
)
@pytest.mark.parametrize("robust", [False, True])
def test_synthetic_shapes_match_statsmodels(rng, n, period, spans, robust):
    y = seasonal_series(rng, n, period)
    y[rng.integers(0, n, 3)] += 8.0  # a few outliers, so the robust fit has work to do
    inner, outer = (2, 6) if robust else (3, 0)
    for degree in (0, 1):
        for jump in (1, 2, 5):
            args = (y, period, *spans, degree, jump, robust, inner, outer)
            for mine, theirs in zip(ours(*args), reference(*args), strict=True):
                np.testing.assert_allclose(mine, theirs, rtol=0, atol=TOLERANCE)


def test_default_spans_match_statsmodels_rule(rng):
    # statsmodels derives the same trend span rule from the paper (smallest odd integer
    # >= 1.5 p / (1 - 1.5 / n_s)); with our season span and jumps passed, the defaults agree.
    y = seasonal_series(rng, 96, 12)
    parts = tidesplit.split(y, period=12, season_jump=1, trend_jump=1, lowpass_jump=1)
    fit = STL(y, period=12, seasonal=13).fit(inner_iter=2, outer_iter=0)
    np.testing.assert_allclose(parts.trend, fit.trend, atol=TOLERANCE)
    np.testing.assert_allclose(parts.seasonal, fit.seasonal, atol=TOLERANCE)
