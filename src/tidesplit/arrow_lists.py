"""Arrow list arrays to the kernel's flat layout and back, without per-row Python.

A ``list<double>`` array already is the kernel's layout: one flat values buffer plus offsets.
We read both as numpy (a NaN-filled copy of the values only where nulls must become NaN),
and wrap the outputs, which share the input's offsets, as list arrays again.

Both ways go through the arrays' buffers (``Array.buffers``, ``np.frombuffer``,
``Array.from_buffers``) rather than ``to_numpy`` or ``pa.array``: those ask pyarrow's
pandas shim whether the data is a pandas object, which imports pandas (0.1 s of a fresh
process's first query, and pandas is not otherwise needed by the SQL front).
"""

from __future__ import annotations

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

# numpy's dtype of each fixed-width Arrow type we read or write through buffers
_NUMPY_TYPES = {
    pa.float64(): np.dtype(np.float64),
    pa.int64(): np.dtype(np.int64),
    pa.int32(): np.dtype(np.int32),
}


def as_array(data: pa.Array | pa.ChunkedArray) -> pa.Array:
    """One contiguous array from whatever Arrow hands us."""
    if isinstance(data, pa.ChunkedArray):
        return data.combine_chunks() if data.num_chunks != 1 else data.chunk(0)
    return data


def _bits(buffer: pa.Buffer, offset: int, length: int) -> np.ndarray:
    """``length`` bits of an Arrow bitmap from bit ``offset``, as bool."""
    first, skip = divmod(offset, 8)
    stop = (offset + length + 7) // 8
    raw = np.frombuffer(buffer, dtype=np.uint8, count=stop - first, offset=first)
    return np.unpackbits(raw, bitorder="little")[skip : skip + length].astype(bool)


def null_mask(array: pa.Array) -> np.ndarray:
    """Which entries of ``array`` are NULL, as a bool array.

    >>> null_mask(pa.array([1.0, None, 3.0])).tolist()
    [False, True, False]
    """
    if array.null_count == 0:
        return np.zeros(len(array), dtype=bool)
    validity = array.buffers()[0]
    if validity is None:  # a type whose nulls are not in a bitmap (null, union)
        return np.asarray(array.is_null(), dtype=bool)
    return ~_bits(validity, array.offset, len(array))


def _fixed_values(array: pa.Array) -> np.ndarray:
    """A read-only numpy view of a fixed-width array's values (NULL slots undefined)."""
    dtype = _NUMPY_TYPES[array.type]
    data = array.buffers()[1]
    if data is None or len(array) == 0:
        return np.empty(0, dtype=dtype)
    return np.frombuffer(data, dtype=dtype, count=len(array), offset=array.offset * dtype.itemsize)


def list_layout(lists: pa.Array) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Offsets (int64, starting at 0), the child slice they index, and which rows are NULL.

    >>> offsets, child, nulls = list_layout(pa.array([[1.0, 2.0], None, [3.0]]))
    >>> offsets.tolist(), child.to_pylist(), nulls.tolist()
    ([0, 2, 2, 3], [1.0, 2.0, 3.0], [False, True, False])
    """
    width = np.int64 if pa.types.is_large_list(lists.type) else np.int32
    raw = lists.buffers()[1]
    if raw is None or len(lists) == 0:
        offsets = np.zeros(1, dtype=np.int64)
    else:
        offsets = np.frombuffer(
            raw,
            dtype=width,
            count=len(lists) + 1,
            offset=lists.offset * np.dtype(width).itemsize,
        ).astype(np.int64)
    start, stop = int(offsets[0]), int(offsets[-1])
    child = lists.values.slice(start, stop - start)
    return offsets - start, child, null_mask(lists)


def float_values(child: pa.Array) -> np.ndarray:
    """The child as float64 with NULL (and NaN) as NaN.

    >>> float_values(pa.array([1.5, None])).tolist()
    [1.5, nan]
    """
    if child.type != pa.float64():
        child = pc.cast(child, pa.float64())
    values = _fixed_values(child)
    if child.null_count:
        values = values.copy()
        values[null_mask(child)] = np.nan
    return values


def int_values(child: pa.Array) -> tuple[np.ndarray, np.ndarray]:
    """The child as int64 and a mask of its NULL entries (filled with 0).

    >>> codes, nulls = int_values(pa.array([4, None, 6]))
    >>> codes.tolist(), nulls.tolist()
    ([4, 0, 6], [False, True, False])
    """
    if child.type != pa.int64():
        child = pc.cast(child, pa.int64())
    nulls = null_mask(child)
    values = _fixed_values(child)
    if child.null_count:
        values = values.copy()
        values[nulls] = 0
    return values, nulls


def _bitmap(valid: np.ndarray | None) -> tuple[pa.Buffer | None, int]:
    """An Arrow validity bitmap and the null count; no bitmap when nothing is NULL."""
    if valid is None:
        return None, 0
    nulls = int(valid.size - np.count_nonzero(valid))
    if nulls == 0:
        return None, 0
    return pa.py_buffer(np.packbits(valid, bitorder="little")), nulls


def fixed_array(
    values: np.ndarray, arrow_type: pa.DataType, nulls: np.ndarray | None = None
) -> pa.Array:
    """A float64 or int64 array over ``values`` (no copy where already contiguous and of the
    type), NULL where ``nulls`` is true.

    >>> fixed_array(np.array([1, 2]), pa.int64(), np.array([False, True])).to_pylist()
    [1, None]
    """
    data = np.ascontiguousarray(values, dtype=_NUMPY_TYPES[arrow_type])
    bitmap, count = _bitmap(None if nulls is None else ~np.asarray(nulls, dtype=bool))
    return pa.Array.from_buffers(
        arrow_type, data.size, [bitmap, pa.py_buffer(data)], null_count=count
    )


def float_array(values: np.ndarray) -> pa.Array:
    """A float64 array, NaN as NULL (as ``pa.array(..., from_pandas=True)`` gives).

    >>> float_array(np.array([1.0, np.nan])).to_pylist()
    [1.0, None]
    """
    missing = np.isnan(values)
    # without NaN the buffer is wrapped as it is (no copy, no bitmap)
    return fixed_array(values, pa.float64(), missing if missing.any() else None)


def bool_array(values: np.ndarray) -> pa.Array:
    """A boolean array (Arrow packs it into bits).

    >>> bool_array(np.array([True, False, True])).to_pylist()
    [True, False, True]
    """
    bits = np.packbits(np.asarray(values, dtype=bool), bitorder="little")
    return pa.Array.from_buffers(pa.bool_(), len(values), [None, pa.py_buffer(bits)], null_count=0)


def string_array(texts: list[str | None]) -> pa.Array:
    """A string array, None as NULL.

    >>> string_array(["ok", None, "été"]).to_pylist()
    ['ok', None, 'été']
    """
    if texts and texts[0] is not None and texts.count(texts[0]) == len(texts):
        # one text throughout (every status "ok", say): its bytes repeated, no pass in Python
        raw = texts[0].encode()
        offsets = np.arange(len(texts) + 1, dtype=np.int32) * np.int32(len(raw))
        return pa.Array.from_buffers(
            pa.string(), len(texts), [None, pa.py_buffer(offsets), pa.py_buffer(raw * len(texts))]
        )
    encoded = [b"" if t is None else t.encode() for t in texts]
    offsets = np.zeros(len(encoded) + 1, dtype=np.int32)
    np.cumsum([len(b) for b in encoded], out=offsets[1:])
    valid = np.fromiter((t is not None for t in texts), dtype=bool, count=len(texts))
    bitmap, count = _bitmap(valid)
    return pa.Array.from_buffers(
        pa.string(),
        len(encoded),
        [bitmap, pa.py_buffer(offsets), pa.py_buffer(b"".join(encoded))],
        null_count=count,
    )


def list_array(offsets: np.ndarray, child: pa.Array, nulls: np.ndarray | None = None) -> pa.Array:
    """Wrap ``child`` as a list array with ``offsets`` (int32 in Arrow), NULL rows where
    ``nulls`` is true.

    >>> list_array(np.array([0, 1, 1]), pa.array([7]), np.array([False, True])).to_pylist()
    [[7], None]
    """
    bounds = np.ascontiguousarray(offsets, dtype=np.int32)
    bitmap, count = _bitmap(None if nulls is None else ~np.asarray(nulls, dtype=bool))
    return pa.Array.from_buffers(
        pa.list_(child.type),
        bounds.size - 1,
        [bitmap, pa.py_buffer(bounds)],
        null_count=count,
        children=[child],
    )


def float_lists(values: np.ndarray, offsets: np.ndarray, nulls: np.ndarray | None) -> pa.Array:
    """Wrap flat float64 values as a ``list<double>`` array; NaN becomes NULL.

    >>> float_lists(np.array([1.0, np.nan]), np.array([0, 2, 2]), None).to_pylist()
    [[1.0, None], []]
    """
    return list_array(offsets, float_array(values), nulls)
