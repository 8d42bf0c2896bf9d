"""The STL procedure of Cleveland, Cleveland, McRae & Terpenning (1990) on a batch of series.

A batch is one flat float64 array of values and int64 offsets (series ``i`` is
``values[offsets[i]:offsets[i + 1]]``), the layout of an Arrow list array, plus one row of
integer settings per series (columns named by the ``COL_*`` constants). Missing values are
NaN; they get zero weight in every loess fit, so trend and seasonal are defined everywhere.
"""

from __future__ import annotations

import math

import numpy as np
from numba import get_num_threads, njit, prange

from .lanes import LONGEST, PADDED_FROM, SERIES, lane_group, stl_lanes
from .lanes import buffer_size as lanes_buffer_size

# Columns of the settings matrix (defined apart, so that the settings can be built without
# loading the compiler).
from .layout import (
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
)
from .loess import (
    FAR,
    LANES,
    NEAR,
    _finish,
    _four_sums,
    _window,
    fill_unfitted,
    fit_at,
    smooth,
    subseries_level,
)
from .median import _median_guided
from .threads import launch


@njit(nogil=True, cache=True)
def _moving_average(x: np.ndarray, n: int, length: int, out: np.ndarray) -> None:
    """Running mean of ``length`` points; writes ``n - length + 1`` values. The sums are
    scaled by ``1 / length`` rather than divided: a division per value was a tenth of a
    long series' pass, and the two differ by rounding alone."""
    scale = 1.0 / length
    total = 0.0
    for i in range(length):
        total += x[i]
    out[0] = total * scale
    for j in range(1, n - length + 1):
        total = total - x[j - 1] + x[j + length - 1]
        out[j] = total * scale


@njit(nogil=True, cache=True)
def _lane_fit_four(
    detrended: np.ndarray,
    pw: np.ndarray,
    period: int,
    phase: int,
    k: int,
    span: int,
    degree: int,
    xs: float,
    nleft: int,
    nright: int,
    lfit: np.ndarray,
    at: int,
    fallback: int,
) -> None:
    """``fit_at(sub_y, sub_w, k, span, degree, xs, nleft, nright)`` for the subseries of
    phases ``phase`` to ``phase + 3`` (``k`` points each) into column ``at`` of ``lfit``, a
    row per phase. The four fits share their shape, so they run side by side
    (``_four_sums``, reading the subseries in place) with ``fit_at``'s arithmetic. An empty
    neighbourhood takes the subseries' point ``fallback`` (``fallback >= 0``) or ``lfit``'s
    column ``-1 - fallback``."""
    full_range = k - 1.0
    h = max(xs - nleft, nright - xs)
    if span > k:
        h += (span - k) // 2  # as in fit_at
    inv_h = 1.0 / h if h > 0.0 else 0.0
    # point t of the neighbourhood is subseries point nleft + t, at u = t - (xs - nleft)
    m = _four_sums(
        detrended, pw, nleft * period + phase, 1, period, nright - nleft + 1, xs - nleft,
        FAR * h, NEAR * h, inv_h,
    )  # fmt: skip
    for lane in range(LANES):
        value, ok = _finish(
            m[5 * lane], m[5 * lane + 1], m[5 * lane + 2], m[5 * lane + 3], m[5 * lane + 4],
            h, degree, full_range,
        )  # fmt: skip
        if ok:
            lfit[lane, at] = value
        elif fallback >= 0:
            lfit[lane, at] = detrended[fallback * period + phase + lane]
        else:
            lfit[lane, at] = lfit[lane, -1 - fallback]


@njit(nogil=True, cache=True)
def _subseries_four(
    detrended: np.ndarray,
    pw: np.ndarray,
    period: int,
    phase: int,
    k: int,
    span: int,
    degree: int,
    jump: int,
    cycle: np.ndarray,
    lfit: np.ndarray,
) -> None:
    """``_subseries_smooth``'s work for phases ``phase`` to ``phase + 3``, each of
    ``k >= 2`` points, with a finite span: the steps of ``smooth`` and the two end fits,
    the fits four phases at a time."""
    # smooth(sub_y, sub_w, k, span, degree, jump, sub_fit[1:]): column m + 1 is point m
    step = min(jump, k - 1)
    half = (span + 1) // 2
    nleft = 0
    nright = k - 1
    for i in range(0, k, step):
        if span < k:
            nleft, nright = _window(i, k, span, half)
        _lane_fit_four(
            detrended, pw, period, phase, k, span, degree, float(i), nleft, nright, lfit,
            i + 1, i,
        )  # fmt: skip
    if step != 1:
        for lane in range(LANES):
            ys = lfit[lane, 1:]
            for i in range(0, k - step, step):
                delta = (ys[i + step] - ys[i]) / step
                for j in range(i + 1, i + step):
                    ys[j] = ys[i] + delta * (j - i)
        last_fit = ((k - 1) // step) * step
        if last_fit != k - 1:
            # the neighbourhood left over from the final jump, as in smooth
            _lane_fit_four(
                detrended, pw, period, phase, k, span, degree, float(k - 1), nleft, nright,
                lfit, k, k - 1,
            )  # fmt: skip
            if last_fit != k - 2:
                for lane in range(LANES):
                    ys = lfit[lane, 1:]
                    delta = (ys[k - 1] - ys[last_fit]) / (k - 1 - last_fit)
                    for j in range(last_fit + 1, k - 1):
                        ys[j] = ys[last_fit] + delta * (j - last_fit)
    for lane in range(LANES):
        ys = lfit[lane, 1:]
        for i in range(k):
            if math.isnan(ys[i]):
                fill_unfitted(ys, k)
                break
    # one point beyond each end; an empty neighbourhood repeats the end's fitted value
    _lane_fit_four(
        detrended, pw, period, phase, k, span, degree, -1.0, 0, min(span, k) - 1, lfit, 0, -2
    )
    _lane_fit_four(
        detrended, pw, period, phase, k, span, degree, float(k), max(0, k - span), k - 1,
        lfit, k + 1, -1 - k,
    )  # fmt: skip
    for lane in range(LANES):
        for m in range(k + 2):
            cycle[m * period + phase + lane] = lfit[lane, m]


@njit(nogil=True, cache=True)
def _subseries_smooth(
    detrended: np.ndarray,
    pw: np.ndarray,
    n: int,
    period: int,
    span: int,
    degree: int,
    jump: int,
    cycle: np.ndarray,
    sub_y: np.ndarray,
    sub_w: np.ndarray,
    sub_fit: np.ndarray,
    lfit: np.ndarray,
) -> None:
    """Cycle-subseries smoothing (paper, step 2), one point beyond each end of each subseries.

    ``cycle`` receives ``n + 2 * period`` values: position ``i`` of the padded series is
    time ``i - period``. ``lfit`` is scratch of (4, n // period + 3) values.
    """
    # Phases below n % period have one point more than the others. Four neighbouring
    # phases of one length at a time go through _subseries_four; the rest (fewer than four
    # of a length) and infinite spans one by one.
    longer = n % period
    four_long = 0
    four_short = longer
    if span != 0:
        if longer > 0 and n // period + 1 >= 2:
            four_long = (longer // LANES) * LANES
            for first in range(0, four_long, LANES):
                _subseries_four(
                    detrended, pw, period, first, n // period + 1, span, degree, jump, cycle,
                    lfit,
                )  # fmt: skip
        if n // period >= 2:
            four_short = longer + ((period - longer) // LANES) * LANES
            for first in range(longer, four_short, LANES):
                _subseries_four(
                    detrended, pw, period, first, n // period, span, degree, jump, cycle,
                    lfit,
                )  # fmt: skip
    for phase in range(period):
        if phase < four_long or longer <= phase < four_short:
            continue
        k = (n - phase - 1) // period + 1
        for m in range(k):
            sub_y[m] = detrended[m * period + phase]
            sub_w[m] = pw[m * period + phase]
        if span == 0:
            # Infinite span: the (weighted) mean of the subseries at every position
            level = subseries_level(sub_y, sub_w, 0, 1, k)
            for m in range(k + 2):
                sub_fit[m] = level
        else:
            smooth(sub_y, sub_w, k, span, degree, jump, sub_fit[1:])
            value, ok = fit_at(sub_y, sub_w, k, span, degree, -1.0, 0, min(span, k) - 1)
            sub_fit[0] = value if ok else sub_fit[1]
            value, ok = fit_at(sub_y, sub_w, k, span, degree, float(k), max(0, k - span), k - 1)
            sub_fit[k + 1] = value if ok else sub_fit[k]
        for m in range(k + 2):
            cycle[m * period + phase] = sub_fit[m]


@njit(nogil=True, cache=True)
def _robustness_weights(
    y: np.ndarray, fit: np.ndarray, n: int, rw: np.ndarray, absres: np.ndarray, guess: float
) -> float:
    """Bisquare of |remainder| / (6 * median |remainder|) (paper, section 2.4).

    Missing points get weight 0; the median is over the observed points. ``guess`` is the
    previous pass's median (NaN for none: see ``_median_guided``); returns this one's.
    """
    count = 0
    for i in range(n):
        if not math.isnan(y[i]):
            absres[count] = abs(y[i] - fit[i])
            count += 1
    if count == 0:
        return math.nan
    median = _median_guided(absres, count, guess)
    scale = 6.0 * median
    near = NEAR * scale
    far = FAR * scale
    for i in range(n):
        if math.isnan(y[i]):
            rw[i] = 0.0
            continue
        r = abs(y[i] - fit[i])
        if r <= near:
            rw[i] = 1.0
        elif r <= far:
            q = r / scale
            q = 1.0 - q * q
            rw[i] = q * q
        else:
            rw[i] = 0.0
    return median


@njit(nogil=True, cache=True)
def buffer_size(n: int, period: int) -> int:
    """Scratch values that ``_stl_one`` needs for a series of ``n`` points."""
    return 7 * (n + 2 * period + 2) + 7 * (n // period + 3)


@njit(nogil=True, cache=True)
def _inner_pass(
    y: np.ndarray,
    pw: np.ndarray,
    settings: np.ndarray,
    trend: np.ndarray,
    seasonal: np.ndarray,
    detrended: np.ndarray,
    cycle: np.ndarray,
    smoothed: np.ndarray,
    lowpass: np.ndarray,
    ones: np.ndarray,
    sub_y: np.ndarray,
    sub_w: np.ndarray,
    sub_fit: np.ndarray,
    lfit: np.ndarray,
) -> None:
    """One pass of STL's inner loop (the paper, section 2, steps 1 to 6) with the point
    weights ``pw`` held fixed: the seasonal part from ``y - trend``, then the trend from
    ``y - seasonal``. The other arrays are ``_stl_one``'s scratch."""
    n = y.shape[0]
    period = settings[COL_PERIOD]
    for i in range(n):
        detrended[i] = y[i] - trend[i]
    _subseries_smooth(
        detrended, pw, n, period, settings[COL_SEASON_SPAN], settings[COL_SEASON_DEGREE],
        settings[COL_SEASON_JUMP], cycle, sub_y, sub_w, sub_fit, lfit,
    )  # fmt: skip
    # Low-pass filter of the cycle-subseries (paper, step 3): moving averages of length
    # period, period and 3, then a loess fit.
    _moving_average(cycle, n + 2 * period, period, smoothed)
    _moving_average(smoothed, n + period + 1, period, lowpass)
    _moving_average(lowpass, n + 2, 3, smoothed)
    smooth(
        smoothed, ones, n, settings[COL_LOWPASS_SPAN], settings[COL_LOWPASS_DEGREE],
        settings[COL_LOWPASS_JUMP], lowpass,
    )  # fmt: skip
    for i in range(n):
        seasonal[i] = cycle[period + i] - lowpass[i]
        detrended[i] = y[i] - seasonal[i]
    smooth(
        detrended, pw, n, settings[COL_TREND_SPAN], settings[COL_TREND_DEGREE],
        settings[COL_TREND_JUMP], trend,
    )  # fmt: skip


@njit(nogil=True, cache=True)
def _stl_one(
    y: np.ndarray,
    settings: np.ndarray,
    trend: np.ndarray,
    seasonal: np.ndarray,
    weight: np.ndarray,
    buf: np.ndarray,
) -> None:
    """STL of one series ``y`` (NaN = missing) into ``trend``, ``seasonal`` and ``weight``.

    ``buf`` is scratch of at least ``buffer_size(n, period)`` values, reused across series.
    """
    n = y.shape[0]
    period = settings[COL_PERIOD]
    inner = settings[COL_INNER]
    outer = settings[COL_OUTER]
    width = n + 2 * period + 2
    detrended = buf[0:width]
    cycle = buf[width : 2 * width]
    smoothed = buf[2 * width : 3 * width]
    lowpass = buf[3 * width : 4 * width]
    pw = buf[4 * width : 5 * width]
    ones = buf[5 * width : 6 * width]
    scratch = buf[6 * width : 7 * width]
    kmax = n // period + 3
    sub_y = buf[7 * width : 7 * width + kmax]
    sub_w = buf[7 * width + kmax : 7 * width + 2 * kmax]
    sub_fit = buf[7 * width + 2 * kmax : 7 * width + 3 * kmax]
    lfit = buf[7 * width + 3 * kmax : 7 * width + 7 * kmax].reshape((LANES, kmax))

    for i in range(n):
        pw[i] = 0.0 if math.isnan(y[i]) else 1.0
        trend[i] = 0.0
        weight[i] = pw[i]
    for i in range(width):
        ones[i] = 1.0

    passes = 0
    median = math.nan
    while True:
        for _ in range(inner):
            _inner_pass(
                y, pw, settings, trend, seasonal, detrended, cycle, smoothed, lowpass, ones,
                sub_y, sub_w, sub_fit, lfit,
            )  # fmt: skip
        passes += 1
        if passes > outer:
            break
        for i in range(n):
            detrended[i] = trend[i] + seasonal[i]
        median = _robustness_weights(y, detrended, n, pw, scratch, median)
        for i in range(n):
            weight[i] = pw[i]


@njit(nogil=True, cache=True)
def same_shape_groups(
    offsets: np.ndarray,
    settings: np.ndarray,
    active: np.ndarray,
    counts: np.ndarray,
    first: int,
    stop: int,
) -> tuple[np.ndarray, np.ndarray]:
    """The active series of ``first .. stop-1`` in an order where series of one length, one
    settings row (or matrix, for several periods) and one ``counts`` entry (MSTL's number of
    periods) stand together: (the series in that order, the start of each group in it, with
    the end as a last entry)."""
    count = 0
    for s in range(first, stop):
        if active[s]:
            count += 1
    chosen = np.empty(count, dtype=np.int64)
    lengths = np.empty(count, dtype=np.int64)
    marks = np.empty(count, dtype=np.int64)
    count = 0
    for s in range(first, stop):
        if active[s]:
            chosen[count] = s
            lengths[count] = offsets[s + 1] - offsets[s]
            # a mark of the settings (FNV-1a over their values), so that series of one
            # length but different settings do not interleave after sorting
            mark = np.int64(-3750763034362895579) ^ counts[s]
            for value in settings[s].flat:
                mark = (mark ^ value) * np.int64(1099511628211)
            marks[count] = mark
            count += 1
    by_mark = np.argsort(marks, kind="mergesort")
    order = chosen[by_mark][np.argsort(lengths[by_mark], kind="mergesort")]
    starts = np.empty(count + 1, dtype=np.int64)
    groups = 0
    for i in range(count):
        s = order[i]
        if i > 0:
            t = order[i - 1]
            if (
                offsets[s + 1] - offsets[s] == offsets[t + 1] - offsets[t]
                and counts[s] == counts[t]
                and np.array_equal(settings[s], settings[t])
            ):
                continue
        starts[groups] = i
        groups += 1
    starts[groups] = count
    return order, starts[: groups + 1]


@njit(nogil=True, cache=True)
def _stl_range(
    values: np.ndarray,
    offsets: np.ndarray,
    settings: np.ndarray,
    first: int,
    stop: int,
    trend: np.ndarray,
    seasonal: np.ndarray,
    weight: np.ndarray,
) -> None:
    """Series ``first .. stop-1`` of the batch: series of one shape ``SERIES`` at a time
    side by side (``lanes.stl_lanes``; a shape's last few too, from ``PADDED_FROM``), the
    rest one by one; scratch reused throughout."""
    need = 0
    for s in range(first, stop):
        if settings[s, COL_ACTIVE]:
            n = offsets[s + 1] - offsets[s]
            need = max(need, buffer_size(n, settings[s, COL_PERIOD]))
            need = max(need, lanes_buffer_size(n, settings[s]))
    buf = np.empty(need)
    one_period = np.zeros(offsets.shape[0] - 1, dtype=np.int64)
    active = settings[:, COL_ACTIVE] != 0
    order, starts = same_shape_groups(offsets, settings, active, one_period, first, stop)
    longest = 0
    for s in order:
        longest = max(longest, offsets[s + 1] - offsets[s])
    side = np.empty((4, longest * SERIES))
    for g in range(starts.size - 1):
        begin = starts[g]
        end = starts[g + 1]
        n = offsets[order[begin] + 1] - offsets[order[begin]]
        while end - begin >= PADDED_FROM and n <= LONGEST:
            group = lane_group(order, begin, end)
            y = side[0, : n * SERIES]
            for lane in range(SERIES):
                lo = offsets[group[lane]]
                for i in range(n):
                    y[i * SERIES + lane] = values[lo + i]
            stl_lanes(
                y, n, settings[group[0]], side[1, : n * SERIES], side[2, : n * SERIES],
                side[3, : n * SERIES], buf,
            )  # fmt: skip
            for lane in range(SERIES):
                lo = offsets[group[lane]]
                for i in range(n):
                    at = i * SERIES + lane
                    trend[lo + i] = side[1, at]
                    seasonal[lo + i] = side[2, at]
                    weight[lo + i] = side[3, at]
            begin = min(begin + SERIES, end)
        for s in order[begin:end]:
            lo = offsets[s]
            hi = offsets[s + 1]
            _stl_one(values[lo:hi], settings[s], trend[lo:hi], seasonal[lo:hi], weight[lo:hi], buf)


@njit(nogil=True, cache=True)
def stl_batch_serial(
    values: np.ndarray,
    offsets: np.ndarray,
    settings: np.ndarray,
    trend: np.ndarray,
    seasonal: np.ndarray,
    weight: np.ndarray,
) -> None:
    """STL over every active series of the batch on the calling thread (no numba threads).

    For callers that bring their own threads, such as a database running UDF calls in
    parallel; the GIL is released throughout.
    """
    _stl_range(values, offsets, settings, 0, offsets.shape[0] - 1, trend, seasonal, weight)


@njit(nogil=True, cache=True)
def chunk_edge(c: int, chunks: int, count: int) -> int:
    """Where chunk ``c`` of ``chunks`` starts among ``count`` series: at a multiple of
    ``SERIES``, so that series of one shape in a row fill the lanes in every chunk."""
    if c >= chunks:
        return count
    return (c * count // chunks) // SERIES * SERIES


@njit(nogil=True, parallel=True, cache=True)
def _stl_batch_parallel(
    values: np.ndarray,
    offsets: np.ndarray,
    settings: np.ndarray,
    trend: np.ndarray,
    seasonal: np.ndarray,
    weight: np.ndarray,
    chunks: int,
) -> None:
    count = offsets.shape[0] - 1
    for c in prange(chunks):
        _stl_range(
            values,
            offsets,
            settings,
            chunk_edge(c, chunks, count),
            chunk_edge(c + 1, chunks, count),
            trend,
            seasonal,
            weight,
        )


def stl_batch_parallel(
    values: np.ndarray,
    offsets: np.ndarray,
    settings: np.ndarray,
    trend: np.ndarray,
    seasonal: np.ndarray,
    weight: np.ndarray,
) -> None:
    """STL over every active series of the batch, spread over numba's threads."""
    count = offsets.shape[0] - 1
    chunks = max(1, min(count // SERIES, 4 * get_num_threads()))
    launch(_stl_batch_parallel, values, offsets, settings, trend, seasonal, weight, chunks)


@njit(nogil=True, cache=True)
def inner_passes_given_weights(
    y: np.ndarray,
    pw: np.ndarray,
    settings: np.ndarray,
    trend: np.ndarray,
    seasonal: np.ndarray,
    buf: np.ndarray,
) -> None:
    """The inner loop of STL alone, ``settings[COL_INNER]`` passes, with the point weights
    ``pw`` held fixed (robustness times presence: 0 where ``y`` is missing), starting from
    the trend passed in ``trend``; writes ``trend`` and ``seasonal``.

    For fits that compute the robustness weights themselves (regression effects beside a
    robust split, ``kernel.regression``): with the weights fixed, the passes are linear in
    ``y`` and the starting trend: ``_stl_one``'s own inner pass, ``_inner_pass``.
    ``buf`` as for ``_stl_one``.
    """
    n = y.shape[0]
    period = settings[COL_PERIOD]
    width = n + 2 * period + 2
    detrended = buf[0:width]
    cycle = buf[width : 2 * width]
    smoothed = buf[2 * width : 3 * width]
    lowpass = buf[3 * width : 4 * width]
    ones = buf[5 * width : 6 * width]
    kmax = n // period + 3
    sub_y = buf[7 * width : 7 * width + kmax]
    sub_w = buf[7 * width + kmax : 7 * width + 2 * kmax]
    sub_fit = buf[7 * width + 2 * kmax : 7 * width + 3 * kmax]
    lfit = buf[7 * width + 3 * kmax : 7 * width + 7 * kmax].reshape((LANES, kmax))
    for i in range(width):
        ones[i] = 1.0
    for _ in range(settings[COL_INNER]):
        _inner_pass(
            y, pw, settings, trend, seasonal, detrended, cycle, smoothed, lowpass, ones,
            sub_y, sub_w, sub_fit, lfit,
        )  # fmt: skip
