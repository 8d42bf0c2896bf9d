"""Several seasonal periods: MSTL (Bandara, Hyndman & Bergmeir, 2021, "MSTL: A
Seasonal-Trend Decomposition Algorithm for Time Series with Multiple Seasonal Patterns").

STL is applied in turn for each period, shortest first, each time to the series with the
other seasonal parts taken out, and the round is repeated; the trend (and the robustness
weights) come from the last STL fit.
"""

from __future__ import annotations

import numpy as np
from numba import get_num_threads, njit, prange

from .lanes import LONGEST, PADDED_FROM, SERIES, lane_group, stl_lanes
from .lanes import buffer_size as lanes_buffer_size
from .layout import COL_ACTIVE, COL_PERIOD
from .stl import _stl_one, buffer_size, chunk_edge, same_shape_groups
from .threads import launch


@njit(nogil=True, cache=True)
def _mstl_lanes(
    values: np.ndarray,
    offsets: np.ndarray,
    settings: np.ndarray,
    n_periods: int,
    rounds: int,
    group: np.ndarray,
    trend: np.ndarray,
    seasonal: np.ndarray,
    weight: np.ndarray,
    side: np.ndarray,
    buf: np.ndarray,
) -> None:
    """``_mstl_range``'s rounds for ``SERIES`` series of one shape, side by side
    (``lanes.stl_lanes``); ``side`` is scratch of (periods + 3, n * SERIES)."""
    first = group[0]
    n = offsets[first + 1] - offsets[first]
    width = n * SERIES
    work = side[0, :width]
    trend_l = side[1, :width]
    weight_l = side[2, :width]
    for lane in range(SERIES):
        lo = offsets[group[lane]]
        for i in range(n):
            work[i * SERIES + lane] = values[lo + i]
    for k in range(n_periods):
        side[3 + k, :width] = 0.0
    passes = 1 if n_periods == 1 else rounds
    for _ in range(passes):
        for k in range(n_periods):
            seasonal_l = side[3 + k, :width]
            for i in range(width):
                work[i] += seasonal_l[i]
            stl_lanes(work, n, settings[first, k], trend_l, seasonal_l, weight_l, buf)
            for i in range(width):
                work[i] -= seasonal_l[i]
    for lane in range(SERIES):
        lo = offsets[group[lane]]
        for i in range(n):
            at = i * SERIES + lane
            trend[lo + i] = trend_l[at]
            weight[lo + i] = weight_l[at]
            for k in range(n_periods):
                seasonal[k, lo + i] = side[3 + k, at]


@njit(nogil=True, cache=True)
def _mstl_range(
    values: np.ndarray,
    offsets: np.ndarray,
    settings: np.ndarray,
    n_periods: np.ndarray,
    rounds: int,
    first: int,
    stop: int,
    trend: np.ndarray,
    seasonal: np.ndarray,
    weight: np.ndarray,
) -> None:
    need = 0
    longest = 0
    most_periods = 1
    for s in range(first, stop):
        if settings[s, 0, COL_ACTIVE]:
            n = offsets[s + 1] - offsets[s]
            longest = max(longest, n)
            most_periods = max(most_periods, n_periods[s])
            for k in range(n_periods[s]):
                need = max(need, buffer_size(n, settings[s, k, COL_PERIOD]))
                need = max(need, lanes_buffer_size(n, settings[s, k]))
    buf = np.empty(need)
    deseasoned = np.empty(longest)
    active = settings[:, 0, COL_ACTIVE] != 0
    order, starts = same_shape_groups(offsets, settings, active, n_periods, first, stop)
    side = np.empty((most_periods + 3, longest * SERIES))
    for g in range(starts.size - 1):
        begin = starts[g]
        end = starts[g + 1]
        n = offsets[order[begin] + 1] - offsets[order[begin]]
        # series of one length and settings (hence one number of periods) side by side
        while end - begin >= PADDED_FROM and n <= LONGEST:
            group = lane_group(order, begin, end)
            _mstl_lanes(
                values, offsets, settings, n_periods[group[0]], rounds, group, trend, seasonal,
                weight, side, buf,
            )  # fmt: skip
            begin = min(begin + SERIES, end)
        for s in order[begin:end]:
            lo = offsets[s]
            hi = offsets[s + 1]
            n = hi - lo
            work = deseasoned[:n]
            for i in range(n):
                work[i] = values[lo + i]
            for k in range(n_periods[s]):
                for i in range(lo, hi):
                    seasonal[k, i] = 0.0
            passes = 1 if n_periods[s] == 1 else rounds
            for _ in range(passes):
                for k in range(n_periods[s]):
                    for i in range(n):
                        work[i] += seasonal[k, lo + i]
                    _stl_one(
                        work, settings[s, k], trend[lo:hi], seasonal[k, lo:hi], weight[lo:hi], buf
                    )
                    for i in range(n):
                        work[i] -= seasonal[k, lo + i]


@njit(nogil=True, cache=True)
def mstl_batch_serial(
    values: np.ndarray,
    offsets: np.ndarray,
    settings: np.ndarray,
    n_periods: np.ndarray,
    rounds: int,
    trend: np.ndarray,
    seasonal: np.ndarray,
    weight: np.ndarray,
) -> None:
    """MSTL of every active series on the calling thread.

    ``settings`` is (series, periods, settings columns), periods ascending; ``seasonal`` is
    (periods, points): row k holds the k-th period's seasonal part.
    """
    _mstl_range(
        values,
        offsets,
        settings,
        n_periods,
        rounds,
        0,
        offsets.shape[0] - 1,
        trend,
        seasonal,
        weight,
    )


@njit(nogil=True, parallel=True, cache=True)
def _mstl_batch_parallel(
    values: np.ndarray,
    offsets: np.ndarray,
    settings: np.ndarray,
    n_periods: np.ndarray,
    rounds: int,
    trend: np.ndarray,
    seasonal: np.ndarray,
    weight: np.ndarray,
    chunks: int,
) -> None:
    count = offsets.shape[0] - 1
    for c in prange(chunks):
        _mstl_range(
            values,
            offsets,
            settings,
            n_periods,
            rounds,
            chunk_edge(c, chunks, count),
            chunk_edge(c + 1, chunks, count),
            trend,
            seasonal,
            weight,
        )


def mstl_batch_parallel(
    values: np.ndarray,
    offsets: np.ndarray,
    settings: np.ndarray,
    n_periods: np.ndarray,
    rounds: int,
    trend: np.ndarray,
    seasonal: np.ndarray,
    weight: np.ndarray,
) -> None:
    """MSTL of every active series, spread over numba's threads."""
    count = offsets.shape[0] - 1
    chunks = max(1, min(count // SERIES, 4 * get_num_threads()))
    launch(
        _mstl_batch_parallel,
        values,
        offsets,
        settings,
        n_periods,
        rounds,
        trend,
        seasonal,
        weight,
        chunks,
    )
