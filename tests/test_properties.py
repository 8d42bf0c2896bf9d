"""Properties the method guarantees, whatever the data."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import seasonal_series

import tidesplit
from tidesplit import SplitParams
from tidesplit.batch_split import _run_kernel
from tidesplit.kernel import linear


@pytest.mark.parametrize(
    "options", [{}, {"robust": True}, {"transform": "log"}, {"season_span": 0}]
)
def test_components_add_up(rng, options):
    y = seasonal_series(rng, 60, 12)
    y[[4, 33]] = np.nan
    parts = tidesplit.split(y, period=12, **options)
    scale = np.log(y) if options.get("transform") == "log" else y
    np.testing.assert_allclose(parts.trend + parts.seasonal + parts.remainder, scale, atol=1e-12)


@pytest.mark.parametrize("robust", [False, True])
def test_fixed_seasonal_pattern_repeats_exactly(rng, robust):
    y = seasonal_series(rng, 84, 7, noise=1.0)
    y[[9, 40]] = np.nan
    parts = tidesplit.split(y, period=7, season_span=0, robust=robust)
    cycles = parts.seasonal.reshape(-1, 7)
    np.testing.assert_allclose(cycles, np.broadcast_to(cycles[0], cycles.shape), rtol=0, atol=1e-12)


def test_pure_cycle_has_no_remainder():
    y = 5 + np.tile([3.0, -1.0, 0.5, -2.5], 12)
    parts = tidesplit.split(y, period=4, season_span=0)
    np.testing.assert_allclose(parts.trend, 5.0, atol=1e-9)
    np.testing.assert_allclose(parts.remainder, 0.0, atol=1e-9)


def test_robust_fit_down_weights_a_spike(rng):
    y = seasonal_series(rng, 96, 12, noise=0.1)
    y[50] += 30
    parts = tidesplit.split(y, period=12, robust=True)
    assert parts.weight[50] == 0.0
    assert np.median(parts.weight) > 0.8
    assert abs(parts.remainder[50] - 30) < 1.0


@pytest.mark.parametrize(
    "options",
    [
        {},
        {"season_span": 7, "trend_jump": 3},
        {"season_span": 0},
        {"season_degree": 0, "inner_loops": 3},
    ],
)
@pytest.mark.parametrize(("n", "period"), [(24, 12), (120, 12), (50, 7)])
def test_linear_shortcut_equals_direct_loops(rng, options, n, period):
    # Non-robust STL of a complete series is a linear map (see kernel/linear.py): the matrix
    # path and the direct loops must agree to rounding.
    batch = np.stack([seasonal_series(rng, n, period) for _ in range(40)])
    row = SplitParams(period=period, **options).resolve().settings_row()
    t_fast, s_fast = linear.apply(batch, row)
    settings = np.tile(row, (batch.shape[0], 1))
    offsets = np.arange(0, batch.size + 1, n)
    from tidesplit.kernel.stl import stl_batch_serial

    trend = np.empty(batch.size)
    seasonal = np.empty(batch.size)
    weight = np.empty(batch.size)
    stl_batch_serial(batch.ravel(), offsets, settings, trend, seasonal, weight)
    np.testing.assert_allclose(t_fast, trend.reshape(batch.shape), rtol=0, atol=1e-11)
    np.testing.assert_allclose(s_fast, seasonal.reshape(batch.shape), rtol=0, atol=1e-11)


@pytest.mark.parametrize(("n", "period"), [(120, 12), (52, 4), (13, 4), (97, 7)])
def test_linear_products_are_the_defined_sums(rng, n, period):
    # Each value of the shortcut is sum(y[k] * op[k, j]) over k ascending from 0.0 (see
    # kernel/linear.py), whichever way the products are blocked: lengths that fill the
    # vector columns and lengths that leave some over, counts with series left out of the
    # blocks of four, all to the bit.
    count = 11
    row = SplitParams(period=period).resolve().settings_row()
    values = rng.normal(size=count * n) * 100
    starts = np.arange(count, dtype=np.int64) * n
    trend = np.empty(count * n)
    seasonal = np.empty(count * n)
    linear.apply_flat(values, starts, n, row, trend, seasonal)
    t_op, s_op = linear.operators(n, row)
    for s in range(count):
        y = values[s * n : (s + 1) * n]
        want_trend = np.zeros(n)
        want_seasonal = np.zeros(n)
        for k in range(n):
            want_trend = want_trend + y[k] * t_op[k]
            want_seasonal = want_seasonal + y[k] * s_op[k]
        assert np.array_equal(trend[s * n : (s + 1) * n], want_trend)
        assert np.array_equal(seasonal[s * n : (s + 1) * n], want_seasonal)


def test_batch_path_mixes_shortcut_and_loops(rng):
    # A batch with complete, gappy and robust series, in one call: every series equals its
    # own single-series split.
    series = [seasonal_series(rng, 48, 12) for _ in range(30)]
    series[3][7] = np.nan
    values = np.concatenate(series)
    offsets = np.arange(0, values.size + 1, 48)
    row = SplitParams(period=12).resolve().settings_row()
    settings = np.tile(row, (30, 1))
    settings[5, 11] = 4  # outer loops: series 5 robust
    trend, seasonal, _ = _run_kernel(values, offsets, settings, parallel=True)
    for i in (0, 3, 5, 29):
        from tidesplit.kernel.stl import stl_batch_serial

        t1, s1, w1 = np.empty(48), np.empty(48), np.empty(48)
        stl_batch_serial(series[i], np.array([0, 48]), settings[i : i + 1], t1, s1, w1)
        np.testing.assert_allclose(trend[i * 48 : (i + 1) * 48], t1, atol=1e-11)
        np.testing.assert_allclose(seasonal[i * 48 : (i + 1) * 48], s1, atol=1e-11)


def test_parallel_and_serial_kernels_agree(rng):
    values = np.concatenate([seasonal_series(rng, 30 + i % 7, 6) for i in range(200)])
    lengths = np.array([30 + i % 7 for i in range(200)])
    offsets = np.concatenate(([0], np.cumsum(lengths)))
    values[::17] = np.nan
    row = SplitParams(period=6, robust=True).resolve().settings_row()
    settings = np.tile(row, (200, 1))
    from tidesplit.kernel.stl import stl_batch_parallel, stl_batch_serial

    outs = []
    for run in (stl_batch_serial, stl_batch_parallel):
        out = [np.full(values.size, np.nan) for _ in range(3)]
        run(values, offsets, settings, *out)
        outs.append(out)
    for a, b in zip(*outs, strict=True):
        np.testing.assert_array_equal(a, b)


@pytest.mark.parametrize("gaps", [False, True])
def test_unsplit_series_are_nan_even_in_reused_memory(rng, gaps):
    # working arrays come uninitialised from Arrow's pool (tidesplit.memory); dirty it
    # first so that a series left unsplit could only read NaN if we wrote NaN
    from tidesplit import memory

    for _ in range(4):
        memory.full(600 * 120, 7.0)
    values = np.concatenate([seasonal_series(rng, 120, 12) for _ in range(600)])
    if gaps:
        values[5::97] = np.nan
    values[130 * 120 : 131 * 120] = np.inf  # one bad series in the middle
    offsets = np.arange(0, values.size + 1, 120)
    out = tidesplit.split_batch(values, offsets, SplitParams(period=12), on_error="keep")
    bad = slice(130 * 120, 131 * 120)
    assert out.status[130].startswith("infinite value")
    for part in (out.trend, out.seasonal, out.remainder, out.adjusted, out.weight):
        assert np.isnan(part[bad]).all()
    assert np.isfinite(out.trend[: 130 * 120]).all() and np.isfinite(out.trend[131 * 120 :]).all()
