"""Several seasonal periods: MSTL (Bandara, Hyndman & Bergmeir, 2021, "MSTL: A
Seasonal-Trend Decomposition Algorithm for Time Series with Multiple Seasonal Patterns").

STL is applied in turn for each period, shortest first, each time to the series with the
other seasonal parts taken out, and the round is repeated; the trend (and the robustness
weights) come from the last STL fit.
"""

from __future__ import annotations

import numpy as np
from numba import get_num_threads, njit, prange

from .layout import COL_ACTIVE, COL_PERIOD
from .stl import _stl_one, buffer_size
from .threads import launch


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
    for s in range(first, stop):
        if settings[s, 0, COL_ACTIVE]:
            n = offsets[s + 1] - offsets[s]
            longest = max(longest, n)
            for k in range(n_periods[s]):
                need = max(need, buffer_size(n, settings[s, k, COL_PERIOD]))
    buf = np.empty(need)
    deseasoned = np.empty(longest)
    for s in range(first, stop):
        if not settings[s, 0, COL_ACTIVE]:
            continue
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
                _stl_one(work, settings[s, k], trend[lo:hi], seasonal[k, lo:hi], weight[lo:hi], buf)
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
            c * count // chunks,
            (c + 1) * count // chunks,
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
    chunks = max(1, min(count, 4 * get_num_threads()))
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
