"""Generated keyed tables for the property-based tests (tests/test_generated.py).

A table is a handful of series under keys of one type, times of one type with steps that
may skip, repeat or fall off the step, and values from 1e-300 to 1e300 in size with NULL,
NaN and infinite ones, all in no particular order. ``hypothesis`` draws them; ``Table``
turns one into a DuckDB table (through Arrow, so that NaN and NULL stay apart) or a
DataFrame.
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import dataclass

import numpy as np
import pyarrow as pa
from hypothesis import strategies as st

KEY_TYPES = ("varchar", "bigint", "double", "date", "boolean", "struct")
TIME_TYPES = ("bigint", "integer", "date", "timestamp", "timestamptz")

# key values of each type, NULL (None) among them; NaN is a key of its own in SQL
_KEY_POOLS = {
    "varchar": [None, "", "a", "A", "é", "名前", "🌊", "a b", "x'y", 'q"r', "x;y", "select", "ä.ö"],
    "bigint": [None, 0, -1, 1, 2**62, 2**62 + 1, -(2**62), 7],
    "double": [None, math.nan, 0.0, -1.5, 1e300, -1e-300, math.inf, -math.inf, 2.5],
    "date": [
        None,
        dt.date(1970, 1, 1),
        dt.date(2024, 2, 29),
        dt.date(1, 1, 1),
        dt.date(9999, 12, 31),
    ],
    "boolean": [None, True, False],
    "struct": [
        None,
        {"a": 1, "b": "x"},
        {"a": None, "b": "x"},
        {"a": 1, "b": None},
        {"a": None, "b": None},
        {"a": 2**62 + 1, "b": "é"},
        {"a": 2**62, "b": "é"},
    ],
}
_ARROW_KEY = {
    "varchar": pa.string(),
    "bigint": pa.int64(),
    "double": pa.float64(),
    "date": pa.date32(),
    "boolean": pa.bool_(),
    "struct": pa.struct([("a", pa.int64()), ("b", pa.string())]),
}
EPOCH = dt.datetime(2001, 1, 1)


@dataclass
class Series:
    key: object
    times: list  # codes on the series' step: integers, or None for a NULL time
    values: list  # floats, None for NULL


@dataclass
class Table:
    key_type: str
    time_type: str
    step: str  # "1", "3", "day", "week", "month", "hour", "quarter-hour"
    period: int | None
    series: list[Series]

    def rows(self) -> list[tuple]:
        return [(s.key, t, v) for s in self.series for t, v in zip(s.times, s.values, strict=True)]

    def shuffled_rows(self) -> list[tuple]:
        rows = self.rows()
        order = np.random.default_rng(len(rows)).permutation(len(rows))
        return [rows[i] for i in order]

    def time_value(self, code: int | None):
        """A step position as a value of the time type."""
        if code is None:
            return None
        if isinstance(code, tuple):  # off the step by a third of it (an integer step of 1 has
            # no third: its times only ever become a finer step)
            base = self.time_value(code[1])
            if self.time_type in ("bigint", "integer"):
                return base + (1 if self.step == "3" else 0)
            third = dt.timedelta(days=10) if self.step == "month" else self._size() / 3
            return base + (third if self.time_type != "date" else dt.timedelta(days=1))
        if self.time_type in ("bigint", "integer"):
            return code * (3 if self.step == "3" else 1)
        if self.step == "month":
            year, month = divmod(2001 * 12 + code, 12)
            moment = dt.datetime(year, month + 1, 1)
        else:
            moment = EPOCH + code * self._size()
        if self.time_type == "date":
            return moment.date()
        if self.time_type == "timestamptz":
            return moment.replace(tzinfo=dt.UTC)
        return moment

    def _size(self) -> dt.timedelta:
        return {
            "day": dt.timedelta(days=1),
            "week": dt.timedelta(days=7),
            "hour": dt.timedelta(hours=1),
            "quarter-hour": dt.timedelta(minutes=15),
        }[self.step]

    def arrow(self, extra_key: int = 0) -> pa.Table:
        """The table as Arrow: key column ``k`` (and ``g``, a second key, for crowds)."""
        rows = self.shuffled_rows()
        time_type = {
            "bigint": pa.int64(),
            "integer": pa.int32(),
            "date": pa.date32(),
            "timestamp": pa.timestamp("us"),
            "timestamptz": pa.timestamp("us", tz="UTC"),
        }[self.time_type]
        return pa.table(
            {
                "k": pa.array([r[0] for r in rows], type=_ARROW_KEY[self.key_type]),
                "g": pa.array([extra_key] * len(rows), type=pa.int64()),
                "t": pa.array([self.time_value(r[1]) for r in rows], type=time_type),
                "v": pa.array([r[2] for r in rows], type=pa.float64()),
            }
        )


def _steps(time_type: str) -> list[str]:
    if time_type in ("bigint", "integer"):
        return ["1", "3"]
    if time_type == "date":
        return ["day", "week", "month"]
    return ["day", "month", "hour", "quarter-hour"]


@st.composite
def series_values(draw, n: int, period: int) -> list:
    """Level, cycle and noise at a scale from 1e-300 to 1e300; or constant; with NULL,
    NaN and infinite values here and there."""
    kind = draw(st.sampled_from(["seasonal", "seasonal", "seasonal", "constant", "noise"]))
    exponent = draw(st.integers(-300, 300))
    scale = 10.0**exponent
    seed = draw(st.integers(0, 2**16))
    rng = np.random.default_rng(seed)
    t = np.arange(n)
    if kind == "constant":
        base = np.full(n, draw(st.sampled_from([0.0, 1.0, -3.5])))
    elif kind == "noise":
        base = rng.normal(0, 1, n)
    else:
        base = 10 + 0.1 * t + 3 * np.sin(2 * np.pi * t / period) + rng.normal(0, 0.5, n)
    values: list = [float(v) * scale for v in base]
    holes = draw(st.sampled_from(["none", "none", "none", "null", "nan", "both"]))
    if holes != "none" and n:
        for i in draw(st.lists(st.integers(0, n - 1), max_size=max(1, n // 4))):
            values[i] = None if holes == "null" or (holes == "both" and i % 2) else math.nan
    if n and draw(st.integers(0, 9)) == 0:
        values[draw(st.integers(0, n - 1))] = draw(st.sampled_from([math.inf, -math.inf]))
    return values


@st.composite
def series_times(draw, n: int, time_type: str) -> list:
    """``n`` step positions: in order with gaps, sometimes a repeat, a NULL or one off the
    step (a fraction of the step, which integer times take as a finer step)."""
    if draw(st.booleans()):  # half the series complete, for the linear map's route
        gaps = [1] * n
    else:
        gaps = draw(st.lists(st.integers(1, 3), min_size=n, max_size=n))
    positions = list(np.cumsum([draw(st.integers(0, 40)), *gaps[1:]])) if n else []
    times: list = [int(p) for p in positions]
    trouble = draw(st.sampled_from(["none"] * 6 + ["repeat", "null", "off"]))
    if trouble == "repeat" and n >= 2:
        times[draw(st.integers(1, n - 1))] = times[0]
    if trouble == "off" and n >= 2:
        at = draw(st.integers(1, n - 1))
        times[at] = ("off", times[at - 1])
    if trouble == "null" and n:
        times[draw(st.integers(0, n - 1))] = None
    return times


@st.composite
def tables(draw, max_series: int = 5, max_points: int = 40, key_types=KEY_TYPES) -> Table:
    """A keyed table of up to ``max_series`` series (none at all, sometimes)."""
    key_type = draw(st.sampled_from(key_types))
    time_type = draw(st.sampled_from(TIME_TYPES))
    step = draw(st.sampled_from(_steps(time_type)))
    period = draw(st.sampled_from([2, 3, 4, 5, 6, None]))
    pool = _KEY_POOLS[key_type]
    keys = draw(st.lists(st.sampled_from(range(len(pool))), max_size=max_series, unique=True))
    series = []
    for index in keys:
        n = draw(st.sampled_from([0, 1, 2, 3, 5, 8, 12, 17, 24, 31, max_points]))
        n = draw(st.integers(1, max_points)) if n == 0 else n
        times = draw(series_times(n, time_type))
        values = draw(series_values(n, period or 4))
        series.append(Series(pool[index], times, values))
    return Table(key_type, time_type, step, period, series)
