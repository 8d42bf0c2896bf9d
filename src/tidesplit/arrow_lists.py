"""Arrow list arrays to the kernel's flat layout and back, without per-row Python.

A ``list<double>`` array already is the kernel's layout: one flat values buffer plus offsets.
We read both as numpy (a NaN-filled copy of the values only where nulls must become NaN),
and wrap the outputs, which share the input's offsets, as list arrays again.
"""

from __future__ import annotations

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc


def as_array(data: pa.Array | pa.ChunkedArray) -> pa.Array:
    """One contiguous array from whatever Arrow hands us."""
    if isinstance(data, pa.ChunkedArray):
        return data.combine_chunks() if data.num_chunks != 1 else data.chunk(0)
    return data


def list_layout(lists: pa.Array) -> tuple[np.ndarray, np.ndarray, pa.Array]:
    """Offsets (int64, starting at 0), the child slice they index, and which rows are NULL.

    >>> offsets, child, nulls = list_layout(pa.array([[1.0, 2.0], None, [3.0]]))
    >>> offsets.tolist(), child.to_pylist(), nulls.tolist()
    ([0, 2, 2, 3], [1.0, 2.0, 3.0], [False, True, False])
    """
    offsets = np.asarray(lists.offsets, dtype=np.int64)
    start = int(offsets[0]) if offsets.size else 0
    stop = int(offsets[-1]) if offsets.size else 0
    child = lists.values.slice(start, stop - start)
    nulls = np.asarray(lists.is_null(), dtype=bool)
    return offsets - start, child, nulls


def float_values(child: pa.Array) -> np.ndarray:
    """The child as float64 with NULL (and NaN) as NaN."""
    if child.type != pa.float64():
        child = pc.cast(child, pa.float64())
    return child.to_numpy(zero_copy_only=False)


def int_values(child: pa.Array) -> tuple[np.ndarray, np.ndarray]:
    """The child as int64 and a mask of its NULL entries (filled with 0)."""
    nulls = np.asarray(child.is_null(), dtype=bool)
    if child.null_count:
        child = child.fill_null(0)
    return child.to_numpy(zero_copy_only=False).astype(np.int64, copy=False), nulls


def float_lists(values: np.ndarray, offsets: np.ndarray, nulls: np.ndarray | None) -> pa.Array:
    """Wrap flat float64 values as a ``list<double>`` array; NaN becomes NULL.

    >>> float_lists(np.array([1.0, np.nan]), np.array([0, 2, 2]), None).to_pylist()
    [[1.0, None], []]
    """
    missing = np.isnan(values)
    # without NaN the buffer is wrapped as it is (no copy, no scan for nulls)
    child = pa.array(values, type=pa.float64(), mask=missing if missing.any() else None)
    mask = None if nulls is None or not nulls.any() else pa.array(nulls)
    return pa.ListArray.from_arrays(pa.array(offsets.astype(np.int32)), child, mask=mask)
