"""A fresh process's way to its first split stays short: what it must not load, and the
Arrow codec of the SQL front (read and written through buffers) against pyarrow's own
conversions."""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pyarrow as pa
import pytest

from tidesplit import arrow_lists

FIRST_SPLIT = """
import sys, tidesplit
con = tidesplit.connect()
con.execute("CREATE TABLE s AS SELECT i // 48 AS k, i % 48 AS t, "
            "(i % 12)::DOUBLE + (i % 48) / 10 AS v FROM range(96) r(i)")
rows = con.sql("SELECT count(*) FROM tide_split(s, 'k', 't', 'v', period := 12)").fetchall()
listed = con.sql("SELECT tide_split_list(list(v), 12).status FROM s GROUP BY k").fetchall()
assert rows == [(96,)] and listed == [('ok',), ('ok',)], (rows, listed)
print(sorted(m for m in ('pandas', 'scipy.linalg', 'statsmodels', 'matplotlib')
             if m in sys.modules))
"""


def test_first_split_loads_no_pandas_or_scipy_linalg():
    # pandas came with pyarrow's numpy conversions, scipy.linalg with numba's BLAS probe;
    # together about a quarter of a second of a fresh process (benchmarks/suite.py --start)
    loaded = subprocess.run(
        [sys.executable, "-c", FIRST_SPLIT], capture_output=True, text=True, check=True
    ).stdout.strip()
    assert loaded == "[]"


def test_blas_flag_is_numbas_own():
    # the flag numba's BLAS probe sets (it is what its inner products choose a route by)
    # must be the same whether or not the probe was answered without importing scipy
    code = (
        "import tidesplit.kernel, numba.np.arraymath as m, numba.np.linalg as l; "
        "print(m._HAVE_BLAS, m.ensure_blas is l.ensure_blas); "
        "import scipy.linalg.cython_blas; print(True)"
    )
    out = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, check=True
    ).stdout.split()
    assert out == ["True", "True", "True"]


def test_numba_products_still_work_after_the_probe():
    numba = pytest.importorskip("numba")
    import tidesplit.kernel  # noqa: F401

    @numba.njit
    def dot(a, b):
        return np.dot(a, b)

    a = np.arange(5.0)
    assert dot(a, a) == 30.0  # 0 + 1 + 4 + 9 + 16


def sliced_lists() -> list[pa.Array]:
    """List arrays as Arrow may hand them over: with NULL rows and NULL items, sliced (an
    offset into their buffers), empty, large offsets."""
    base = pa.array([[1.0, None], None, [], [3.5, 4.0, float("nan")], [5.0], None, [7.0]])
    return [
        base,
        base.slice(1),
        base.slice(3, 3),
        base.slice(7),
        pa.array([[1.0], [2.0, 3.0]]),
        pa.array([[1.0, None], None], pa.large_list(pa.float64())),
    ]


@pytest.mark.parametrize("lists", sliced_lists())
def test_list_layout_matches_pyarrow(lists):
    offsets, child, nulls = arrow_lists.list_layout(lists)
    # pyarrow's own views of the same array are the reference
    assert nulls.tolist() == lists.is_null().to_pylist()
    expected = [0 if v is None else len(v) for v in lists.to_pylist()]
    assert np.diff(offsets).tolist() == expected
    # (NULL rows here hold no items, so the child is what flatten gives)
    flat = arrow_lists.float_values(child)
    np.testing.assert_array_equal(flat, lists.flatten().to_numpy(zero_copy_only=False))
    np.testing.assert_array_equal(flat, child.to_numpy(zero_copy_only=False))


@pytest.mark.parametrize(
    "child",
    [pa.array([4, None, 6, 7]), pa.array([4, None, 6, 7]).slice(1), pa.array([], pa.int64())],
)
def test_int_values_match_pyarrow(child):
    codes, nulls = arrow_lists.int_values(child)
    assert nulls.tolist() == child.is_null().to_pylist()
    assert codes.tolist() == child.fill_null(0).to_pylist()
    assert codes.dtype == np.int64


def test_int_values_widen_narrow_types():
    codes, nulls = arrow_lists.int_values(pa.array([1, None, 3], pa.int32()))
    assert codes.tolist() == [1, 0, 3] and nulls.tolist() == [False, True, False]


def test_written_arrays_equal_pyarrows():
    values = np.array([1.5, np.nan, -2.0, 0.0])
    offsets = np.array([0, 1, 1, 4])
    nulls = np.array([False, True, False])
    ours = arrow_lists.float_lists(values, offsets, nulls)
    theirs = pa.ListArray.from_arrays(
        pa.array(offsets.astype(np.int32)),
        pa.array(values, pa.float64(), from_pandas=True),
        mask=pa.array(nulls),
    )
    ours.validate(full=True)
    assert ours.equals(theirs)
    ints = arrow_lists.fixed_array(np.array([3, 0, 5]), pa.int64(), np.array([0, 1, 0], bool))
    assert ints.equals(pa.array([3, 0, 5], pa.int64(), mask=np.array([0, 1, 0], bool)))
    flags = np.array([True, False, True, True, False, False, True, False, True])
    assert arrow_lists.bool_array(flags).equals(pa.array(flags))
    texts = ["ok", None, "a time is NULL", "é"]
    assert arrow_lists.string_array(texts).equals(pa.array(texts, pa.string()))
    assert arrow_lists.string_array([]).equals(pa.array([], pa.string()))
    # NaN kept as a number where no NULL is asked for
    kept = arrow_lists.fixed_array(np.array([np.nan, 1.0]), pa.float64())
    assert kept.null_count == 0 and np.isnan(kept.to_numpy()[0])
