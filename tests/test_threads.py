"""Parallel kernels launched from several threads at once, on every threading layer.

numba's ``workqueue`` layer (its fallback without OpenMP or TBB) aborts the process when two
threads launch parallel kernels concurrently; our launches go through one guard
(kernel/threads.py) that serialises them there. Run in a child process with that layer
forced, so that a failure cannot take the test session down with it.
"""

from __future__ import annotations

import os
import subprocess
import sys

CHILD = """
import threading
import numpy as np
import numba
import tidesplit
from tidesplit import SplitParams, split_batch

rng = np.random.default_rng(0)
values = (np.sin(np.arange(120) * np.pi / 6) + rng.normal(0, 0.3, (400, 120))).ravel()
values[::37] = np.nan  # gaps: the direct (parallel) kernel, not the matrix shortcut
offsets = np.arange(0, values.size + 1, 120)
params = SplitParams(period=12, robust=True)
expected = split_batch(values, offsets, params).trend
results, errors = [], []

def work():
    try:
        for _ in range(3):
            results.append(split_batch(values, offsets, params).trend)
    except Exception as exc:  # pragma: no cover - reported below
        errors.append(repr(exc))

threads = [threading.Thread(target=work) for _ in range(4)]
for t in threads:
    t.start()
for t in threads:
    t.join()
assert not errors, errors
assert len(results) == 12
assert all(np.array_equal(r, expected, equal_nan=True) for r in results)
print(numba.threading_layer())
"""


def run_child(layer: str) -> subprocess.CompletedProcess:
    env = {**os.environ, "NUMBA_THREADING_LAYER": layer}
    return subprocess.run(
        [sys.executable, "-c", CHILD], env=env, capture_output=True, text=True, timeout=600
    )


def test_concurrent_launches_under_workqueue():
    done = run_child("workqueue")
    assert done.returncode == 0, done.stderr[-2000:]
    assert done.stdout.strip().splitlines()[-1] == "workqueue"


def test_concurrent_launches_under_the_default_layer():
    done = run_child("default")
    assert done.returncode == 0, done.stderr[-2000:]


def test_blas_threads_come_back_after_a_query(con):
    # the UDF path holds BLAS to one thread while it runs, then gives the setting back
    import numpy as np
    import pandas as pd
    from threadpoolctl import threadpool_info, threadpool_limits

    def blas_threads() -> dict[str, int]:
        return {
            lib["filepath"]: lib["num_threads"]
            for lib in threadpool_info()
            if lib["user_api"] == "blas"
        }

    before = blas_threads()
    t = np.arange(48)
    frame = pd.DataFrame({"k": np.repeat(np.arange(300), 48), "t": np.tile(t, 300)})
    frame["v"] = np.sin(2 * np.pi * frame["t"] / 12) + frame["k"]
    con.register("frame", frame)
    out = con.sql("SELECT * FROM tide_split(frame, 'k', 't', 'v', period := 12)").df()
    assert len(out) == len(frame)
    after = blas_threads()
    # every BLAS loaded before the query has its own thread count back (libraries loaded
    # during the query, such as scipy's, keep their defaults)
    assert {path: after[path] for path in before} == before
    # and the caller's own thread can still change them: threadpoolctl 3.8+ lets one thread
    # at a time control OpenBLAS, and a DuckDB worker must not keep that control
    with threadpool_limits(limits=1, user_api="blas"):
        assert set(blas_threads().values()) == {1}
    assert {path: blas_threads()[path] for path in before} == before
