"""STL as a matrix: the shortcut for short series without robustness or gaps.

For a fixed length and settings, non-robust STL of a complete series is a linear map of the
data: every loess fit is a weighted sum whose weights depend on positions only, and the loops
start from a zero trend. So the trend of any series is ``y @ T`` and the seasonal ``y @ S``,
where row ``j`` of ``T`` and ``S`` is the split of the ``j``-th unit vector. Computing the two
matrices costs ``n`` ordinary splits; after that each series is two vector-matrix products.
The tests prove the shortcut equal to the direct loops.

A series' numbers must not depend on what else is split with it, on threads, or on what the
process did before. So whether a series takes this route depends on its length and settings
alone (``eligible``), a matrix built again is the same to the bit (the loops on unit vectors,
which depend on nothing else), and the products are our own rather than BLAS's: each value
is the sum of ``y[k] * T[k, j]`` over ``k`` in ascending order, from zero, a number defined by
the formula whatever the code path (numba neither fuses nor reorders floating-point
operations unless asked). BLAS does not promise that: measured with OpenBLAS, the same row
came out different in the last bit by the number of rows beside it, by where it fell in the
blocks of the product and by the thread count.
"""

from __future__ import annotations

import threading
from collections import OrderedDict

import numpy as np
from llvmlite import ir
from numba import get_num_threads, njit, prange, types
from numba.core import cgutils
from numba.extending import intrinsic

from .layout import COL_OUTER
from .stl import stl_batch_parallel, stl_batch_serial
from .threads import launch

# Longest series the split's shortcut takes. Building the two matrices costs n ordinary
# splits (about 7 ms at 200 points on one core), paid once per length and settings in a
# process whatever the batch holds; beyond about 200 points the products gain less than
# twice over the loops (measured: 5x at 120 and 156 points, under 2x at 240).
SHORTCUT_POINTS = 200

# Longest series whose matrices are built at all: choosing spans scores candidates exactly
# from them up to this length (span_choice), where they are worth more than in the split.
MAX_POINTS = 1024

# Matrices kept, in bytes: every length up to SHORTCUT_POINTS for a few settings (a fleet of
# mixed lengths needs one pair per length), so that they are not built again call after call.
_CACHE_BYTES = 256 * 2**20

# Series per block of the products: each matrix row is read once per block.
_BLOCK = 4


def eligible(n: int, settings: np.ndarray) -> bool:
    """Whether a complete series of ``n`` points with these settings takes the shortcut.

    Decided by the series' own length and settings only, never by what else is in the batch.

    >>> from tidesplit.params import SplitParams
    >>> eligible(120, SplitParams(period=12).resolve().settings_row())
    True
    >>> eligible(120, SplitParams(period=12, robust=True).resolve().settings_row())
    False
    """
    return bool(2 <= n <= SHORTCUT_POINTS and settings[COL_OUTER] == 0)


_cache: OrderedDict[tuple[int, tuple[int, ...]], tuple[np.ndarray, np.ndarray]] = OrderedDict()
_cache_bytes = 0
_cache_lock = threading.Lock()


def _key(n: int, settings: np.ndarray) -> tuple[int, tuple[int, ...]]:
    return n, tuple(int(v) for v in settings)


def _build(n: int, settings: np.ndarray, parallel: bool) -> tuple[np.ndarray, np.ndarray]:
    basis = np.eye(n).ravel()
    offsets = np.arange(0, n * n + 1, n, dtype=np.int64)
    trend = np.empty(n * n)
    seasonal = np.empty(n * n)
    weight = np.empty(n * n)
    rows = np.tile(np.asarray(settings, dtype=np.int64), (n, 1))
    # each unit vector is split on its own, so both launches give the same bits
    run = stl_batch_parallel if parallel else stl_batch_serial
    run(basis, offsets, rows, trend, seasonal, weight)
    return trend.reshape(n, n), seasonal.reshape(n, n)


def operators(
    n: int, settings: np.ndarray, parallel: bool = False
) -> tuple[np.ndarray, np.ndarray]:
    """The trend and seasonal matrices (``n x n``) for this length and settings row."""
    global _cache_bytes
    key = _key(n, settings)
    with _cache_lock:
        found = _cache.get(key)
        if found is not None:
            _cache.move_to_end(key)
            return found
    found = _build(n, settings, parallel)
    size = 2 * found[0].nbytes
    with _cache_lock:
        if key not in _cache:
            while _cache and _cache_bytes + size > _CACHE_BYTES:
                _, gone = _cache.popitem(last=False)
                _cache_bytes -= 2 * gone[0].nbytes
            _cache[key] = found
            _cache_bytes += size
    return found


# Output columns a block's sums keep in vector registers at once: eight doubles, one
# 512-bit register (two 256-bit ones where that is the widest).
_COLUMNS = 8


@intrinsic
def _block_columns(typingctx, values, starts, q, n, t_op, s_op, j0, trend, seasonal):
    """Columns ``j0 .. j0 + _COLUMNS - 1`` of the trend and seasonal of the ``_BLOCK``
    series starting at ``starts[q:q + _BLOCK]``: every value ``sum(y[k] * op[k, j] for k
    ascending)`` from 0.0, as ``_products`` defines it, the block's 2 x ``_BLOCK`` sums of
    ``_COLUMNS`` columns held in registers across ``k`` (numba kept them in memory, a load
    and a store per term)."""
    signature = types.none(values, starts, q, n, t_op, s_op, j0, trend, seasonal)

    def codegen(context, builder, sig, args):
        _, _, q_v, n_v, _, _, j0_v, _, _ = args
        values_p, starts_p, t_p, s_p, trend_p, seasonal_p = (
            context.make_array(sig.args[k])(context, builder, args[k]).data
            for k in (0, 1, 4, 5, 7, 8)
        )
        dbl = ir.DoubleType()
        i64 = ir.IntType(64)
        vec = ir.VectorType(dbl, _COLUMNS)
        undef = ir.Constant(vec, ir.Undefined)
        mask = ir.Constant(ir.VectorType(ir.IntType(32), _COLUMNS), [0] * _COLUMNS)

        def at(pointer, index):
            return builder.bitcast(builder.gep(pointer, [index]), vec.as_pointer())

        starts = [
            builder.load(builder.gep(starts_p, [builder.add(q_v, ir.Constant(i64, r))]))
            for r in range(_BLOCK)
        ]
        zero = ir.Constant(vec, [0.0] * _COLUMNS)
        sums = [cgutils.alloca_once_value(builder, zero) for _ in range(2 * _BLOCK)]
        with cgutils.for_range(builder, n_v) as loop:
            k = loop.index
            row = builder.add(builder.mul(k, n_v), j0_v)
            t_row = builder.load(at(t_p, row), align=8)
            s_row = builder.load(at(s_p, row), align=8)
            for r in range(_BLOCK):
                y = builder.load(builder.gep(values_p, [builder.add(starts[r], k)]))
                y = builder.shuffle_vector(
                    builder.insert_element(undef, y, ir.Constant(i64, 0)), undef, mask
                )
                for total, op_row in ((sums[r], t_row), (sums[_BLOCK + r], s_row)):
                    builder.store(builder.fadd(builder.load(total), builder.fmul(y, op_row)), total)
        for r in range(_BLOCK):
            out = builder.add(starts[r], j0_v)
            builder.store(builder.load(sums[r]), at(trend_p, out), align=8)
            builder.store(builder.load(sums[_BLOCK + r]), at(seasonal_p, out), align=8)
        return context.get_dummy_value()

    return signature, codegen


@njit(nogil=True, cache=True)
def _products(
    values: np.ndarray,
    starts: np.ndarray,
    n: int,
    t_op: np.ndarray,
    s_op: np.ndarray,
    trend: np.ndarray,
    seasonal: np.ndarray,
    first: int,
    stop: int,
) -> None:
    """Trend and seasonal of the series starting at ``starts[first:stop]`` (``n`` points).

    Every value is ``sum(y[k] * op[k, j] for k ascending)`` from 0.0, in the full blocks and
    in the rest alike, so it depends on the series alone.
    """
    acc = np.empty((2 * _BLOCK, n))
    whole = n - n % _COLUMNS  # columns in full vectors; the rest below
    q = first
    while q + _BLOCK <= stop:
        for j0 in range(0, whole, _COLUMNS):
            _block_columns(values, starts, q, n, t_op, s_op, j0, trend, seasonal)
        if whole < n:
            acc[:, whole:] = 0.0
            a = starts[q]
            b = starts[q + 1]
            c = starts[q + 2]
            d = starts[q + 3]
            for k in range(n):
                ya = values[a + k]
                yb = values[b + k]
                yc = values[c + k]
                yd = values[d + k]
                for j in range(whole, n):
                    x = t_op[k, j]
                    acc[0, j] += ya * x
                    acc[1, j] += yb * x
                    acc[2, j] += yc * x
                    acc[3, j] += yd * x
                for j in range(whole, n):
                    x = s_op[k, j]
                    acc[4, j] += ya * x
                    acc[5, j] += yb * x
                    acc[6, j] += yc * x
                    acc[7, j] += yd * x
            for r in range(_BLOCK):
                lo = starts[q + r]
                for j in range(whole, n):
                    trend[lo + j] = acc[r, j]
                    seasonal[lo + j] = acc[_BLOCK + r, j]
        q += _BLOCK
    while q < stop:
        lo = starts[q]
        for j in range(n):
            acc[0, j] = 0.0
            acc[1, j] = 0.0
        for k in range(n):
            y = values[lo + k]
            for j in range(n):
                acc[0, j] += y * t_op[k, j]
                acc[1, j] += y * s_op[k, j]
        for j in range(n):
            trend[lo + j] = acc[0, j]
            seasonal[lo + j] = acc[1, j]
        q += 1


@njit(nogil=True, parallel=True, cache=True)
def _products_parallel(
    values: np.ndarray,
    starts: np.ndarray,
    n: int,
    t_op: np.ndarray,
    s_op: np.ndarray,
    trend: np.ndarray,
    seasonal: np.ndarray,
    chunks: int,
) -> None:
    count = starts.shape[0]
    for c in prange(chunks):
        first = c * count // chunks
        stop = (c + 1) * count // chunks
        _products(values, starts, n, t_op, s_op, trend, seasonal, first, stop)


def apply_flat(
    values: np.ndarray,
    starts: np.ndarray,
    n: int,
    settings: np.ndarray,
    trend: np.ndarray,
    seasonal: np.ndarray,
    parallel: bool = False,
) -> None:
    """Trend and seasonal of the complete, non-robust series of ``n`` points that start at
    ``starts`` in the flat ``values``, written at the same places of ``trend`` and
    ``seasonal``; ``parallel`` spreads the series over numba's threads.

    >>> from tidesplit.params import SplitParams
    >>> y = np.tile(np.sin(np.arange(24) * np.pi / 6), 2) + np.arange(48) * 0.1
    >>> trend, seasonal = np.empty(48), np.empty(48)
    >>> row = SplitParams(period=12).resolve().settings_row()
    >>> apply_flat(y, np.array([0, 24]), 24, row, trend, seasonal)
    >>> bool(np.isfinite(trend).all())
    True
    """
    t_op, s_op = operators(n, settings, parallel)
    starts = np.ascontiguousarray(starts, dtype=np.int64)
    count = starts.shape[0]
    if parallel and count > _BLOCK:
        # chunks of whole blocks, so that the work spreads evenly; the numbers do not
        # depend on the chunks (see _products)
        chunks = max(1, min(count // _BLOCK, 4 * get_num_threads()))
        launch(_products_parallel, values, starts, n, t_op, s_op, trend, seasonal, chunks)
    else:
        _products(values, starts, n, t_op, s_op, trend, seasonal, 0, count)


def apply(series: np.ndarray, settings: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Trend and seasonal of each row of ``series`` (``m x n``, complete, non-robust).

    >>> y = np.tile(np.sin(np.arange(24) * np.pi / 6), (3, 1)) + np.arange(24) * 0.1
    >>> from tidesplit.params import SplitParams
    >>> trend, seasonal = apply(y, SplitParams(period=12).resolve().settings_row())
    >>> bool(np.allclose(trend + seasonal + (y - trend - seasonal), y))
    True
    """
    m, n = series.shape
    flat = np.ascontiguousarray(series, dtype=np.float64).ravel()
    trend = np.empty(m * n)
    seasonal = np.empty(m * n)
    apply_flat(flat, np.arange(m, dtype=np.int64) * n, n, settings, trend, seasonal)
    return trend.reshape(m, n), seasonal.reshape(m, n)
