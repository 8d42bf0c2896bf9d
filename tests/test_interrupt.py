"""A long split can be stopped: Ctrl-C between kernel launches in Python, ``con.interrupt()``
between UDF calls in SQL.

No timing: each test stops the work from inside its first piece and counts the pieces that
ran after, which must be fewer than all of them.
"""

from __future__ import annotations

import _thread
import itertools

import duckdb
import numpy as np
import pytest

import tidesplit
from tidesplit import SplitParams, batch_split
from tidesplit.tuning import LAUNCH_WORK


def test_ctrl_c_stops_the_python_front_between_launches(monkeypatch):
    # robust series with gaps (the loops, not the linear map): many launches' worth of work
    n, count = 240, 6000
    rng = np.random.default_rng(3)
    values = (np.sin(np.arange(n) * np.pi / 6) + rng.normal(0, 0.3, (count, n))).ravel()
    values[::29] = np.nan
    offsets = np.arange(0, values.size + 1, n)
    params = SplitParams(period=12, robust=True)
    settings = params.resolve().settings_row()
    passes = settings[10] * (settings[11] + 1)
    launches = len(batch_split._launches(np.full(count, n), np.full(count, passes)))
    assert launches >= 4, "the batch must take several launches"
    calls = []
    real = batch_split.stl_batch_parallel

    def first_one_presses_ctrl_c(*args):
        calls.append(args[1].size - 1)
        if len(calls) == 1:
            _thread.interrupt_main()  # as Ctrl-C does: raised in the main thread
        return real(*args)

    monkeypatch.setattr(batch_split, "stl_batch_parallel", first_one_presses_ctrl_c)
    with pytest.raises(KeyboardInterrupt):
        tidesplit.split_batch(values, offsets, params)
    assert len(calls) < launches
    assert sum(calls) * n * passes <= 2 * LAUNCH_WORK + n * passes


def test_interrupt_stops_a_query_between_udf_calls(monkeypatch):
    con = tidesplit.connect()
    con.execute("SET threads = 1")
    series = 6 * 2048  # DuckDB hands the UDF up to 2,048 series a call: six calls
    con.execute(
        f"CREATE TABLE big AS SELECT i // 48 AS k, i % 48 AS t, sin(i) + (i % 5) AS v "
        f"FROM range(48 * {series}) r(i)"
    )
    calls = []
    real = batch_split._run_kernel

    def first_one_interrupts(*args):
        calls.append(args[1].size - 1)
        if len(calls) == 1:
            con.interrupt()
        return real(*args)

    monkeypatch.setattr(batch_split, "_run_kernel", first_one_interrupts)
    with pytest.raises(duckdb.InterruptException):
        con.sql(
            "SELECT count(*) FROM tide_split(big, 'k', 't', 'v', period := 12, robust := true)"
        ).fetchall()
    assert 1 <= len(calls) < 6
    con.close()


def test_launches_cover_every_series_and_hold_enough_for_the_lanes():
    """Long series (an hourly year, robust, two periods: ten of them make a launch's work)
    still go at least LAUNCH_SERIES to a launch, so that the kernel runs them side by side;
    every series falls in exactly one launch, in order."""
    from tidesplit.tuning import LAUNCH_SERIES

    for count in (1, 5, LAUNCH_SERIES, 40, 1001):
        runs = batch_split._launches(np.full(count, 8760), np.full(count, 44))
        assert runs[0][0] == 0 and runs[-1][1] == count
        assert all(a[1] == b[0] for a, b in itertools.pairwise(runs))
        if count >= LAUNCH_SERIES:
            assert all(stop - first >= LAUNCH_SERIES for first, stop in runs)
    # short series keep launches of about LAUNCH_WORK point-passes
    runs = batch_split._launches(np.full(100_000, 120), np.full(100_000, 11))
    assert len(runs) >= 100_000 * 120 * 11 // LAUNCH_WORK - 1
