"""STL as a matrix: the shortcut for equal-length series without robustness or gaps.

For a fixed length and settings, non-robust STL of a complete series is a linear map of the
data: every loess fit is a weighted sum whose weights depend on positions only, and the loops
start from a zero trend. So the trend of any series is ``y @ T`` and the seasonal ``y @ S``,
where row ``j`` of ``T`` and ``S`` is the split of the ``j``-th unit vector. Computing the two
matrices costs ``n`` ordinary splits; after that a whole batch is two matrix products.
The tests prove the shortcut equal to the direct loops.
"""

from __future__ import annotations

import threading

import numpy as np

from .layout import COL_OUTER
from .stl import stl_batch_serial

# Beyond this length the two n x n matrices stop paying for themselves (and take memory).
MAX_POINTS = 1024


def eligible(n: int, settings: np.ndarray) -> bool:
    """Whether a complete series of ``n`` points with these settings is a linear map."""
    return 2 <= n <= MAX_POINTS and settings[COL_OUTER] == 0


# Bounded by size rather than count: choosing spans keeps a pair of matrices for every
# candidate pair of spans and length, each small for the common lengths.
_CACHE_BYTES = 256 * 2**20
_cache: dict[tuple[int, tuple[int, ...]], tuple[np.ndarray, np.ndarray]] = {}
_cache_bytes = 0
_cache_lock = threading.Lock()


def _key(n: int, settings: np.ndarray) -> tuple[int, tuple[int, ...]]:
    return n, tuple(int(v) for v in settings)


def _build(n: int, settings: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    basis = np.eye(n).ravel()
    offsets = np.arange(0, n * n + 1, n, dtype=np.int64)
    trend = np.empty(n * n)
    seasonal = np.empty(n * n)
    weight = np.empty(n * n)
    rows = np.tile(np.asarray(settings, dtype=np.int64), (n, 1))
    stl_batch_serial(basis, offsets, rows, trend, seasonal, weight)
    return trend.reshape(n, n), seasonal.reshape(n, n)


def is_cached(n: int, settings: np.ndarray) -> bool:
    """Whether the matrices for this length and settings are already built."""
    return _key(n, settings) in _cache


def operators(n: int, settings: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The trend and seasonal matrices (``n x n``) for this length and settings row."""
    global _cache_bytes
    key = _key(n, settings)
    found = _cache.get(key)
    if found is None:
        found = _build(n, settings)
        size = 2 * found[0].nbytes
        with _cache_lock:
            while _cache and _cache_bytes + size > _CACHE_BYTES:
                _cache_bytes -= 2 * _cache.pop(next(iter(_cache)))[0].nbytes
            if key not in _cache:
                _cache_bytes += size
            _cache[key] = found
    return found


def apply(
    series: np.ndarray,
    settings: np.ndarray,
    trend: np.ndarray | None = None,
    seasonal: np.ndarray | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Trend and seasonal of each row of ``series`` (``m x n``, complete, non-robust),
    written into ``trend`` and ``seasonal`` (``m x n`` each) when given.

    >>> y = np.tile(np.sin(np.arange(24) * np.pi / 6), (3, 1)) + np.arange(24) * 0.1
    >>> from tidesplit.params import SplitParams
    >>> trend, seasonal = apply(y, SplitParams(period=12).resolve().settings_row())
    >>> bool(np.allclose(trend + seasonal + (y - trend - seasonal), y))
    True
    """
    t_op, s_op = operators(series.shape[1], settings)
    if trend is None or seasonal is None:
        return series @ t_op, series @ s_op
    np.matmul(series, t_op, out=trend)
    np.matmul(series, s_op, out=seasonal)
    return trend, seasonal
