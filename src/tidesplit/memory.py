"""Large working arrays from Arrow's memory pool rather than numpy's allocator.

A UDF call allocates a dozen arrays of a few MB (components, grid slots, copies). numpy
takes each from the C allocator, which maps fresh pages for blocks this size and hands
them back on free, so every call pays a page fault per 4 KiB it touches: in our
measurements (``benchmarks/suite.py``, 2,048 series x 120 points per call) that was about
half of a call's time. Arrow's pool (mimalloc or jemalloc) keeps freed pages and reuses
them, and its buffers are what the DuckDB front hands back anyway. The arrays behave as
ordinary numpy arrays; the pool buffer lives as long as they do.
"""

from __future__ import annotations

import numpy as np

# Below this many bytes numpy's own allocator reuses memory well; the pool is for the rest.
POOL_BYTES = 64 * 1024


def empty(size: int, dtype: np.dtype | type = np.float64) -> np.ndarray:
    """An uninitialised one-dimensional array of ``size`` elements.

    >>> a = empty(3)
    >>> a[:] = 1.5
    >>> a.tolist(), a.dtype.name
    ([1.5, 1.5, 1.5], 'float64')
    """
    dtype = np.dtype(dtype)
    nbytes = int(size) * dtype.itemsize
    if nbytes < POOL_BYTES:
        return np.empty(size, dtype=dtype)
    import pyarrow as pa  # on first use: ``import tidesplit`` stays light

    return np.frombuffer(pa.allocate_buffer(nbytes), dtype=dtype)


def full(size: int, value: object, dtype: np.dtype | type = np.float64) -> np.ndarray:
    """A one-dimensional array of ``size`` copies of ``value``.

    >>> full(2, np.nan).tolist()
    [nan, nan]
    """
    out = empty(size, dtype)
    out.fill(value)
    return out


def copy(values: np.ndarray) -> np.ndarray:
    """A writable copy of a one-dimensional array.

    >>> copy(np.arange(3)).tolist()
    [0, 1, 2]
    """
    out = empty(values.size, values.dtype)
    np.copyto(out, values.reshape(-1))
    return out
