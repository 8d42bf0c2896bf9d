"""The loess smoothing's faster paths give the bits of the plain one.

``smooth`` fits interior points four at a time with shared tricube weights, and with unit
point weights takes the weights' sums once per smoothing; each fit must still do exactly
``fit_at``'s arithmetic in ``fit_at``'s order. ``plain_smooth`` below is the smoothing as it
was before those paths: one ``fit_at`` per fitted point. The two must agree to the bit over
many lengths, spans, jumps, degrees and weight patterns (unit, missing points, robustness
weights, all zero), and so must whole splits taken in one batch or one series at a time.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from numba import njit

from tidesplit.kernel.layout import (
    COL_ACTIVE,
    COL_INNER,
    COL_LOWPASS_DEGREE,
    COL_LOWPASS_JUMP,
    COL_LOWPASS_SPAN,
    COL_OUTER,
    COL_PERIOD,
    COL_SEASON_DEGREE,
    COL_SEASON_JUMP,
    COL_SEASON_SPAN,
    COL_TREND_DEGREE,
    COL_TREND_JUMP,
    COL_TREND_SPAN,
    N_SETTINGS,
)
from tidesplit.kernel.loess import fill_unfitted, fit_at, smooth
from tidesplit.kernel.stl import _subseries_smooth, stl_batch_serial


@njit(cache=False)
def plain_smooth(y, pw, n, span, degree, jump, ys):
    if n < 2:
        ys[0] = y[0]
        return
    step = min(jump, n - 1)
    nleft = 0
    nright = n - 1
    half = (span + 1) // 2
    for i in range(0, n, step):
        if span < n:
            if i + 1 < half:
                nleft = 0
                nright = span - 1
            elif i + 1 >= n - half + 1:
                nleft = n - span
                nright = n - 1
            else:
                nleft = i + 1 - half
                nright = span + i - half
        value, ok = fit_at(y, pw, n, span, degree, float(i), nleft, nright)
        ys[i] = value if ok else y[i]
    if step != 1:
        for i in range(0, n - step, step):
            delta = (ys[i + step] - ys[i]) / step
            for j in range(i + 1, i + step):
                ys[j] = ys[i] + delta * (j - i)
        last_fit = ((n - 1) // step) * step
        if last_fit != n - 1:
            value, ok = fit_at(y, pw, n, span, degree, float(n - 1), nleft, nright)
            ys[n - 1] = value if ok else y[n - 1]
            if last_fit != n - 2:
                delta = (ys[n - 1] - ys[last_fit]) / (n - 1 - last_fit)
                for j in range(last_fit + 1, n - 1):
                    ys[j] = ys[last_fit] + delta * (j - last_fit)
    for i in range(n):
        if math.isnan(ys[i]):
            fill_unfitted(ys, n)
            break


@njit(cache=False)
def plain_subseries(detrended, pw, n, period, span, degree, jump, cycle):
    """Cycle-subseries smoothing one phase at a time, each copied out and smoothed with
    ``smooth`` and two end fits (finite spans)."""
    kmax = n // period + 3
    sub_y = np.empty(kmax)
    sub_w = np.empty(kmax)
    sub_fit = np.empty(kmax)
    for phase in range(period):
        k = (n - phase - 1) // period + 1
        for m in range(k):
            sub_y[m] = detrended[m * period + phase]
            sub_w[m] = pw[m * period + phase]
        smooth(sub_y, sub_w, k, span, degree, jump, sub_fit[1:])
        value, ok = fit_at(sub_y, sub_w, k, span, degree, -1.0, 0, min(span, k) - 1)
        sub_fit[0] = value if ok else sub_fit[1]
        value, ok = fit_at(sub_y, sub_w, k, span, degree, float(k), max(0, k - span), k - 1)
        sub_fit[k + 1] = value if ok else sub_fit[k]
        for m in range(k + 2):
            cycle[m * period + phase] = sub_fit[m]


def weights(kind: str, n: int, rng: np.random.Generator) -> np.ndarray:
    if kind == "unit":
        return np.ones(n)
    if kind == "missing":
        return (rng.random(n) >= 0.1).astype(float)
    if kind == "robust":
        w = rng.uniform(0.0, 1.0, n) ** 2
        w[rng.random(n) < 0.05] = 0.0
        w[rng.random(n) < 0.3] = 1.0
        return w
    if kind == "long gap":
        w = np.ones(n)
        w[n // 3 : n // 3 + max(1, n // 4)] = 0.0
        return w
    return np.zeros(n)  # nothing to fit: every point left to the fill


def same_bits(a: np.ndarray, b: np.ndarray) -> bool:
    return np.array_equal(a.view(np.int64), b.view(np.int64))


@pytest.mark.parametrize("kind", ["unit", "missing", "robust", "long gap", "zero"])
def test_smooth_matches_one_fit_at_a_time(kind):
    rng = np.random.default_rng(7)
    checked = 0
    for _ in range(300):
        n = int(rng.integers(2, 400))
        span = int(rng.integers(1, 60)) * 2 + 1
        if rng.random() < 0.2:
            span = int(rng.integers(3, 80))  # even spans too: the paths must not assume odd
        jump = int(rng.integers(1, max(2, span // 3)))
        degree = int(rng.integers(0, 2))
        pw = weights(kind, n, rng)
        y = rng.normal(100.0, 20.0, n) + np.arange(n) * rng.normal()
        y[pw == 0.0] = np.nan  # a missing value always has weight 0
        fast = np.full(n, -1.0)
        plain = np.full(n, -1.0)
        smooth(y, pw, n, span, degree, jump, fast)
        plain_smooth(y, pw, n, span, degree, jump, plain)
        assert same_bits(fast, plain), (n, span, jump, degree, kind)
        checked += 1
    assert checked == 300


@pytest.mark.parametrize("kind", ["unit", "missing", "robust", "long gap"])
def test_subseries_four_phases_at_a_time_match_one_at_a_time(kind):
    """Neighbouring phases of one length are fitted four at a time; the bits are those of
    one phase at a time, for spans shorter and longer than the subseries."""
    rng = np.random.default_rng(11)
    for _ in range(150):
        period = int(rng.choice([4, 5, 7, 12, 24, 52]))
        n = int(rng.integers(2 * period, 30 * period))
        span = int(rng.integers(1, 30)) * 2 + 1
        jump = int(rng.integers(1, max(2, span // 2)))
        degree = int(rng.integers(0, 2))
        pw = weights(kind, n, rng)
        y = rng.normal(10.0, 3.0, n) + np.sin(np.arange(n) * 2 * np.pi / period)
        y[pw == 0.0] = np.nan
        kmax = n // period + 3
        fast = np.full(n + 2 * period, -1.0)
        plain = np.full(n + 2 * period, -1.0)
        scratch = [np.empty(kmax) for _ in range(3)]
        _subseries_smooth(y, pw, n, period, span, degree, jump, fast, *scratch, np.empty((4, kmax)))
        plain_subseries(y, pw, n, period, span, degree, jump, plain)
        assert same_bits(fast, plain), (n, period, span, jump, degree, kind)


def test_split_same_bits_in_a_batch_of_mixed_lengths_as_alone():
    """Series of several lengths and settings (robust, missing values, jumps) split in one
    batch give the bits each gives split alone."""
    rng = np.random.default_rng(3)
    series = []
    rows = []
    for s in range(40):
        period = int(rng.choice([4, 7, 12, 24]))
        n = int(rng.integers(2 * period + 1, 12 * period))
        t = np.arange(n)
        y = 50 + 0.1 * t + 5 * np.sin(2 * np.pi * t / period) + rng.normal(0, 1, n)
        if s % 3 == 0:
            holes = rng.random(n) < 0.08
            holes[:2] = holes[-2:] = False
            y[holes] = np.nan
        season = int(rng.choice([7, 13, 35]))
        trend = int(rng.choice([15, 21, 45]))
        robust = s % 2 == 0
        row = np.zeros(N_SETTINGS, dtype=np.int64)
        row[COL_PERIOD] = period
        row[COL_SEASON_SPAN] = season
        row[COL_TREND_SPAN] = trend
        row[COL_LOWPASS_SPAN] = period + 1 - period % 2
        row[COL_SEASON_DEGREE] = row[COL_TREND_DEGREE] = row[COL_LOWPASS_DEGREE] = 1
        row[COL_SEASON_JUMP] = rng.integers(1, 4)
        row[COL_TREND_JUMP] = rng.integers(1, 6)
        row[COL_LOWPASS_JUMP] = rng.integers(1, 4)
        row[COL_INNER] = 1 if robust else 2
        row[COL_OUTER] = 6 if robust else 0
        row[COL_ACTIVE] = 1
        series.append(y)
        rows.append(row)
    values = np.concatenate(series)
    offsets = np.concatenate([[0], np.cumsum([len(y) for y in series])]).astype(np.int64)
    settings = np.array(rows)
    together = [np.empty(values.size) for _ in range(3)]
    stl_batch_serial(values, offsets, settings, *together)
    for s, y in enumerate(series):
        alone = [np.empty(y.size) for _ in range(3)]
        stl_batch_serial(y, np.array([0, y.size]), settings[s : s + 1], *alone)
        part = slice(offsets[s], offsets[s + 1])
        for a, b in zip(together, alone, strict=True):
            assert same_bits(a[part], b), s


def settings_row(period: int, season: int, trend: int, robust: bool, jumps: tuple) -> np.ndarray:
    row = np.zeros(N_SETTINGS, dtype=np.int64)
    row[COL_PERIOD] = period
    row[COL_SEASON_SPAN] = season
    row[COL_TREND_SPAN] = trend
    row[COL_LOWPASS_SPAN] = period + 1 - period % 2
    row[COL_SEASON_DEGREE] = row[COL_TREND_DEGREE] = row[COL_LOWPASS_DEGREE] = 1
    row[COL_SEASON_JUMP], row[COL_TREND_JUMP], row[COL_LOWPASS_JUMP] = jumps
    row[COL_INNER] = 1 if robust else 2
    row[COL_OUTER] = 6 if robust else 0
    row[COL_ACTIVE] = 1
    return row


def noisy_series(rng: np.random.Generator, n: int, period: int, missing: bool) -> np.ndarray:
    t = np.arange(n)
    y = 50 + 0.1 * t + 5 * np.sin(2 * np.pi * t / period) + rng.normal(0, 1, n)
    y[rng.integers(0, n, 2)] += 40  # outliers
    if missing:
        y[rng.random(n) < 0.1] = np.nan
    return y


def test_series_of_one_shape_side_by_side_give_the_bits_of_each_alone():
    """Series of one length and settings run several at a time, one per vector lane
    (kernel.lanes); shuffled among other shapes, with missing points, robust or not, a fixed
    seasonal pattern (span 0), and shapes whose last few series do not fill the lanes (run
    in lanes with the last repeated, or one by one), each series gets the bits it gets
    split alone."""
    from tidesplit.kernel.lanes import PADDED_FROM, SERIES

    rng = np.random.default_rng(11)
    shapes = [
        (120, settings_row(12, 13, 21, True, (2, 3, 2))),
        (120, settings_row(12, 13, 21, False, (2, 3, 2))),
        (96, settings_row(7, 0, 15, True, (1, 2, 1))),
        (500, settings_row(24, 9, 41, True, (1, 5, 3))),
        (61, settings_row(4, 35, 45, False, (3, 1, 2))),
    ]
    left_over = (0, 1, PADDED_FROM - 1, PADDED_FROM, SERIES - 1)
    picks = []
    for k in range(len(shapes)):
        picks += [k] * (2 * SERIES + left_over[k])  # full groups, then a few left over
    picks = rng.permutation(picks)
    series = [noisy_series(rng, shapes[k][0], shapes[k][1][COL_PERIOD], i % 3 == 0)
              for i, k in enumerate(picks)]  # fmt: skip
    settings = np.array([shapes[k][1] for k in picks])
    settings[5, COL_ACTIVE] = 0  # left alone: its outputs stay as they were
    values = np.concatenate(series)
    offsets = np.concatenate([[0], np.cumsum([len(y) for y in series])]).astype(np.int64)
    together = [np.full(values.size, -1.0) for _ in range(3)]
    stl_batch_serial(values, offsets, settings, *together)
    for s, y in enumerate(series):
        part = slice(offsets[s], offsets[s + 1])
        if s == 5:
            assert all((a[part] == -1.0).all() for a in together)
            continue
        alone = [np.empty(y.size) for _ in range(3)]
        stl_batch_serial(y, np.array([0, y.size]), settings[s : s + 1], *alone)
        for a, b in zip(together, alone, strict=True):
            assert same_bits(a[part], b), s


def test_several_periods_side_by_side_give_the_bits_of_each_alone():
    """MSTL's rounds for series of one shape run side by side too; robust and not, with
    missing points and a few series left over (one by one, or in lanes padded)."""
    from tidesplit.kernel.lanes import PADDED_FROM, SERIES
    from tidesplit.kernel.mstl import mstl_batch_serial

    rng = np.random.default_rng(12)
    for robust, left_over in ((False, PADDED_FROM - 1), (True, PADDED_FROM + 1)):
        rows = np.array(
            [settings_row(7, 7, 15, robust, (1, 2, 1)), settings_row(30, 11, 61, robust, (2, 6, 3))]
        )
        n = 400
        series = [noisy_series(rng, n, 7, s % 2 == 0) for s in range(SERIES + left_over)]
        for y in series:
            y += 4 * np.cos(2 * np.pi * np.arange(n) / 30)
        values = np.concatenate(series)
        offsets = np.arange(0, values.size + 1, n, dtype=np.int64)
        settings = np.tile(rows[None], (len(series), 1, 1))
        counts = np.full(len(series), 2, dtype=np.int64)
        trend, weight = np.empty(values.size), np.empty(values.size)
        seasonal = np.empty((2, values.size))
        mstl_batch_serial(values, offsets, settings, counts, 2, trend, seasonal, weight)
        for s, y in enumerate(series):
            part = slice(offsets[s], offsets[s + 1])
            t1, w1, s1 = np.empty(n), np.empty(n), np.empty((2, n))
            mstl_batch_serial(y, np.array([0, n]), settings[s : s + 1], counts[:1], 2, t1, s1, w1)
            assert same_bits(trend[part], t1), (robust, s)
            assert same_bits(weight[part], w1), (robust, s)
            assert same_bits(seasonal[:, part], s1), (robust, s)


def test_series_of_one_shape_are_grouped_whatever_their_order():
    """Two settings of one length taken in turn, another length, an inactive series: the
    groups hold every active series once, each group one shape, so that the lanes fill."""
    from tidesplit.kernel.stl import same_shape_groups

    lengths = [120, 120, 96, 120, 120, 96, 120, 120, 120]
    offsets = np.concatenate([[0], np.cumsum(lengths)]).astype(np.int64)
    settings = np.tile(settings_row(12, 13, 21, False, (2, 3, 2)), (len(lengths), 1))
    settings[1::2, COL_OUTER] = 6  # every other series robust
    settings[7, COL_ACTIVE] = 0
    active = settings[:, COL_ACTIVE] != 0
    counts = np.zeros(len(lengths), dtype=np.int64)
    order, starts = same_shape_groups(offsets, settings, active, counts, 0, len(lengths))
    assert sorted(order) == [s for s in range(len(lengths)) if s != 7]
    groups = [order[starts[g] : starts[g + 1]] for g in range(len(starts) - 1)]
    shapes = {(lengths[s], tuple(settings[s])) for s in order}
    assert len(groups) == len(shapes)  # one group per shape: none split by the order
    for group in groups:
        assert len({(lengths[s], tuple(settings[s])) for s in group}) == 1
