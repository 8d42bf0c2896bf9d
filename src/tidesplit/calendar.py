"""Time columns: the regular step of each series, its gaps, and the period a step implies.

Times arrive as int64 codes: integers as they are; DATE, TIMESTAMP and TIMESTAMPTZ as
microseconds since 1970-01-01 (UTC for TIMESTAMPTZ). Per series we find the step:

- calendar months (monthly, quarterly, yearly, or any whole number of months) when every
  time falls on the same day of its month and time of day, or every time is a month end;
- otherwise a fixed duration: the smallest difference between neighbouring times, which
  every other difference must be a whole multiple of (15 minutes, hourly, daily, weekly...).

TIMESTAMPTZ: steps of a day or more are measured on the wall clock of the session's time
zone (a daily series at local midnight has 23- and 25-hour days across daylight-saving
changes and stays one step per day); shorter steps are measured in absolute time, so an
hourly series runs through the change with neither a gap nor a repeated hour.

Times missing inside a series become missing values at their place in the regular grid.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import memory
from .kernel import grid, strengths
from .status import OK
from .tuning import MAX_GROWTH, MAX_SERIES_POINTS, PERIOD_PEAK_FLOOR

US_PER_MINUTE = 60_000_000
US_PER_HOUR = 60 * US_PER_MINUTE
US_PER_DAY = 24 * US_PER_HOUR
US_PER_WEEK = 7 * US_PER_DAY

UNIT_NUMBER = 0  # integer time: steps in its own units
UNIT_MICROSECOND = 1
UNIT_MONTH = 2


def time_kind(sql_type: str | None) -> str:
    """Our kind of time from DuckDB's type name.

    >>> time_kind("DATE"), time_kind("TIMESTAMP WITH TIME ZONE"), time_kind("INTEGER")
    ('date', 'timestamptz', 'integer')
    """
    name = (sql_type or "BIGINT").upper()
    if name == "DATE":
        return "date"
    if "TIME ZONE" in name or name.startswith("TIMESTAMPTZ"):
        return "timestamptz"
    if name.startswith("TIMESTAMP"):
        return "timestamp"
    return "integer"


@dataclass
class Grid:
    """Where each input row sits on its series' regular grid."""

    unit: np.ndarray  # per series: UNIT_*
    step: np.ndarray  # per series: the step in that unit
    slots: np.ndarray  # per input row: its position on the grid
    offsets: np.ndarray  # grid offsets (series i spans offsets[i]:offsets[i+1])
    first: np.ndarray  # per series: the code (or month index) of the first grid point
    anchor: np.ndarray  # per series, months: microseconds after the month start, -1 month end
    local: np.ndarray  # per series: measured on the wall clock (TIMESTAMPTZ daily and up)

    @property
    def complete(self) -> bool:
        """True when no series has a gap (grid and input are the same)."""
        return self.offsets[-1] == self.slots.size


def describe(code: int, kind: str) -> str:
    """A time code as readable text.

    >>> describe(0, "date"), describe(3600_000_000, "timestamptz"), describe(7, "integer")
    ('1970-01-01', '1970-01-01 01:00:00+00', '7')
    """
    if kind == "integer":
        return str(code)
    stamp = np.datetime64(int(code), "us")
    if kind == "date":
        return str(stamp.astype("datetime64[D]"))
    text = str(stamp.astype("datetime64[s]")).replace("T", " ")
    return text + "+00" if kind == "timestamptz" else text


def _local_codes(codes: np.ndarray, time_zone: str | None) -> np.ndarray:
    """UTC microseconds to wall-clock microseconds in ``time_zone``."""
    if not time_zone or time_zone.upper() == "UTC":
        return codes
    import pandas as pd  # only TIMESTAMPTZ needs the time-zone database

    stamps = pd.DatetimeIndex(codes.astype("datetime64[us]")).tz_localize("UTC")
    return stamps.tz_convert(time_zone).tz_localize(None).as_unit("us").asi8


def _utc_codes(local: np.ndarray, time_zone: str | None) -> np.ndarray:
    if not time_zone or time_zone.upper() == "UTC":
        return local
    import pandas as pd

    stamps = pd.DatetimeIndex(local.astype("datetime64[us]")).tz_localize(
        time_zone, ambiguous=True, nonexistent="shift_forward"
    )
    return stamps.tz_convert("UTC").tz_localize(None).as_unit("us").asi8


# Times (codes) further apart than this within one series cannot be placed on a grid
# without overflowing 64-bit steps: 2^62 microseconds is about 146,000 years.
FARTHEST_APART = 2**62
# What an infinite DATE or TIMESTAMP ('infinity', '-infinity') arrives as: the smallest
# 64-bit code, which no finite time takes (the SQL macros write it, the fronts refuse it).
INFINITE_TIME_CODE = -(2**63)


def refuse_far_apart(codes: np.ndarray, offsets: np.ndarray, kind: str, status: list[str]) -> None:
    """A reason in ``status`` for a series whose times (sorted) lie too far apart for one
    grid, or one of which is infinite.

    >>> status = ["ok", "ok"]
    >>> refuse_far_apart(np.array([0, 1, -2**62, 2**62]), np.array([0, 2, 4]), "integer", status)
    >>> status[1]
    'times from -4611686018427387904 to 4611686018427387904 lie too far apart for one grid'
    """
    filled = np.flatnonzero(np.diff(offsets) > 0)
    if not filled.size:
        return
    first = codes[offsets[filled]].astype(np.float64)
    last = codes[offsets[filled + 1] - 1].astype(np.float64)
    infinite = np.zeros(offsets.size - 1, dtype=bool)
    infinite[filled] = codes[offsets[filled]] == INFINITE_TIME_CODE
    for s in filled[(last - first > FARTHEST_APART) | infinite[filled]]:
        if status[s] != OK:
            continue
        if infinite[s]:
            status[s] = "a time is infinite"
            continue
        lo, hi = int(codes[offsets[s]]), int(codes[offsets[s + 1] - 1])
        shown = (
            (str(lo), str(hi)) if kind == "integer" else (describe(lo, kind), describe(hi, kind))
        )
        status[s] = f"times from {shown[0]} to {shown[1]} lie too far apart for one grid"


def regularise(
    codes: np.ndarray,
    offsets: np.ndarray,
    kind: str,
    status: list[str],
    time_zone: str | None = None,
) -> Grid:
    """Find each series' step and the grid position of every row; bad series get a status.

    ``codes`` must be sorted within each series. A repeated time, or a difference that is
    not a whole multiple of the step, leaves the series with a reason in ``status``.

    >>> status = ["ok"]
    >>> grid = regularise(np.array([0, 2, 6, 8]), np.array([0, 4]), "integer", status)
    >>> grid.step.tolist(), grid.slots.tolist(), grid.offsets.tolist(), status
    ([2], [0, 1, 3, 4], [0, 5], ['ok'])
    """
    codes = np.ascontiguousarray(codes, dtype=np.int64)
    offsets = np.ascontiguousarray(offsets, dtype=np.int64)
    count = offsets.size - 1
    lengths = np.diff(offsets)
    unit = np.full(count, UNIT_NUMBER if kind == "integer" else UNIT_MICROSECOND)
    step = np.ones(count, dtype=np.int64)
    first = np.zeros(count, dtype=np.int64)
    span = np.zeros(count, dtype=np.int64)
    problem = np.zeros(count, dtype=np.int64)
    where = np.full(count, -1, dtype=np.int64)
    slots = memory.full(codes.size, 0, dtype=np.int64)
    anchor = np.zeros(count, dtype=np.int64)
    everyone = np.ones(count, dtype=bool)
    local = np.zeros(count, dtype=bool)
    measured = codes

    def scan(values: np.ndarray, which: np.ndarray) -> None:
        grid.fixed_grid(values, offsets, which, step, first, span, problem, where, slots)

    if kind == "timestamptz":
        # a day or more on the wall clock, shorter steps in absolute time (module notes)
        measured = _local_codes(codes, time_zone)
        scan(measured, everyone)
        local = (step >= US_PER_DAY) & (step % US_PER_DAY == 0)
        if not local.all():
            scan(codes, ~local)
            measured = np.where(np.repeat(local, lengths), measured, codes)
    else:
        scan(codes, everyone)

    if kind != "integer":
        maybe = (step >= 28 * US_PER_DAY) & (lengths >= 2)
        if maybe.any():
            rows = np.repeat(maybe, lengths)
            picked = measured[rows]
            months = picked.astype("datetime64[us]").astype("datetime64[M]")
            start = months.astype("datetime64[us]").astype(np.int64)
            following = (months + 1).astype("datetime64[us]").astype(np.int64)
            into = np.zeros(codes.size, dtype=np.int64)
            ends = np.zeros(codes.size, dtype=bool)
            tod = np.zeros(codes.size, dtype=np.int64)
            into[rows] = picked - start
            ends[rows] = picked // US_PER_DAY == following // US_PER_DAY - 1
            tod[rows] = picked % US_PER_DAY
            by_month = np.zeros(count, dtype=bool)
            grid.month_anchors(into, ends, tod, offsets, maybe, by_month, anchor)
            if by_month.any():
                month_index = np.zeros(codes.size, dtype=np.int64)
                month_index[rows] = months.astype(np.int64)
                scan(month_index, by_month)
                unit[by_month] = UNIT_MONTH

    too_sparse = span > MAX_GROWTH * np.maximum(lengths, 1)
    too_long = span > MAX_SERIES_POINTS
    for s in np.flatnonzero((problem != grid.FINE) | too_sparse | too_long):
        if status[s] != OK:
            continue
        lo, hi = int(offsets[s]), int(offsets[s + 1])
        if problem[s] == grid.REPEATED:
            status[s] = f"duplicate time {describe(int(codes[where[s]]), kind)}"
        elif problem[s] == grid.UNEVEN:
            status[s] = _irregular_reason(codes[lo:hi], measured[lo:hi], kind)
        elif too_long[s]:
            status[s] = (
                f"too long: {span[s]:,} points on its regular grid, more than the "
                f"{MAX_SERIES_POINTS:,} a series may have"
            )
        else:
            status[s] = (
                f"too sparse: {lengths[s]} times spread over {span[s]} steps of "
                f"{describe_step(int(unit[s]), int(step[s]))}"
            )
    if status.count(OK) == count:  # the common case, without a pass in Python
        bad = np.zeros(count, dtype=bool)
    else:
        bad = np.array([st != OK for st in status], dtype=bool)
    if bad.any():
        span[bad] = lengths[bad]  # a bad series keeps its rows as they are
        rows = np.repeat(bad, lengths)
        slots[rows] = (np.arange(codes.size) - np.repeat(offsets[:-1], lengths))[rows]
    grid_offsets = np.concatenate(([0], np.cumsum(span))).astype(np.int64)
    return Grid(unit, step, slots, grid_offsets, first, anchor, local)


def _irregular_reason(codes: np.ndarray, measured: np.ndarray, kind: str) -> str:
    """Name the time that breaks a series' step: the first time off the calendar that most
    of the other times follow (the same day of each month, or a whole number of the most
    common step from the first time).

    >>> times = np.array([0, 1, 2, 3, 5, 6]) * US_PER_DAY + np.r_[0, 0, 0, 0, US_PER_HOUR, 0]
    >>> _irregular_reason(times, times, "timestamp")
    'irregular times: 1970-01-06 01:00:00 (beside 1970-01-04 00:00:00 and 1970-01-07 00:00:00) \
is off the step of 1 day that the other times follow'
    """
    n = measured.size
    odd = -1
    rule = ""
    if kind != "integer":
        # times that mostly share a place in their month (the 1st, the 15th at noon, or the
        # month's end) follow a monthly calendar: the odd one out is off that calendar
        months = measured.astype("datetime64[us]").astype("datetime64[M]")
        start = months.astype("datetime64[us]").astype(np.int64)
        following = (months + 1).astype("datetime64[us]").astype(np.int64)
        month_end = measured // US_PER_DAY == following // US_PER_DAY - 1
        place = np.where(month_end, -1, measured - start)
        places, counts = np.unique(place, return_counts=True)
        usual_place = places[np.argmax(counts)]
        if counts.max() * 2 > n and (np.diff(start[place == usual_place]) > 0).all():
            off = np.flatnonzero(place != usual_place)
            if off.size:
                odd = int(off[0])
                rule = "the monthly calendar (the same day of each month)"
            else:
                # every time on the same day of its month, but the months keep no one step
                odd, rule = _off_the_step(months.astype(np.int64), UNIT_MONTH)
    if odd < 0:
        odd, rule = _off_the_step(measured, UNIT_NUMBER if kind == "integer" else UNIT_MICROSECOND)
    shown = f"time {codes[odd]}" if kind == "integer" else describe(int(codes[odd]), kind)
    around = [describe(int(codes[i]), kind) for i in (odd - 1, odd + 1) if 0 <= i < n]
    beside = f" (beside {' and '.join(around)})" if around else ""
    return f"irregular times: {shown}{beside} is off {rule} that the other times follow"


def _off_the_step(measured: np.ndarray, unit: int) -> tuple[int, str]:
    """The first time off the most common step counted from the first time, and the rule."""
    gaps = np.diff(measured)
    steps, counts = np.unique(gaps[gaps > 0], return_counts=True)
    usual = int(steps[np.argmax(counts)]) if steps.size else 1
    residue = (measured - measured[0]) % usual
    places, counts = np.unique(residue, return_counts=True)
    off = np.flatnonzero(residue != places[np.argmax(counts)])
    odd = int(off[0]) if off.size else measured.size - 1
    return odd, f"the step of {describe_step(unit, usual)}"


def describe_step(unit: int, step: int) -> str:
    """A step as words.

    >>> describe_step(UNIT_MONTH, 3), describe_step(UNIT_MICROSECOND, 900_000_000)
    ('3 months', '15 minutes')
    """
    if unit == UNIT_NUMBER:
        return f"{step}"
    if unit == UNIT_MONTH:
        return "1 month" if step == 1 else f"{step} months"
    for size, name in (
        (US_PER_WEEK, "week"),
        (US_PER_DAY, "day"),
        (US_PER_HOUR, "hour"),
        (US_PER_MINUTE, "minute"),
        (1_000_000, "second"),
    ):
        if step % size == 0:
            k = step // size
            return f"1 {name}" if k == 1 else f"{k} {name}s"
    return f"{step} microseconds"


def period_for_step(unit: int, step: int) -> int:
    """The seasonal period a step implies, or 0 when it implies none (common practice:
    the table in README, "Time columns").

    >>> us = UNIT_MICROSECOND
    >>> [period_for_step(UNIT_MONTH, 1), period_for_step(UNIT_MONTH, 3),
    ...  period_for_step(us, US_PER_WEEK), period_for_step(us, US_PER_DAY),
    ...  period_for_step(us, US_PER_HOUR), period_for_step(us, 15 * US_PER_MINUTE)]
    [12, 4, 52, 7, 24, 96]
    """
    if unit == UNIT_MONTH:
        return 12 // step if step < 12 and 12 % step == 0 else 0
    if unit == UNIT_MICROSECOND:
        if step == US_PER_WEEK:
            return 52
        if step == US_PER_DAY:
            return 7
        if step < US_PER_DAY and US_PER_DAY % step == 0:
            return US_PER_DAY // step
    return 0


def periods_for_step(unit: int, step: int) -> tuple[int, ...]:
    """The seasonal periods a step implies for several cycles (common practice):
    sub-daily data has a day and a week, daily data a week and a year, others one period.

    >>> us = UNIT_MICROSECOND
    >>> periods_for_step(us, US_PER_HOUR), periods_for_step(us, US_PER_DAY)
    ((24, 168), (7, 365))
    """
    if unit == UNIT_MICROSECOND and step < US_PER_DAY and US_PER_DAY % step == 0:
        per_day = US_PER_DAY // step
        return (per_day, 7 * per_day)
    if unit == UNIT_MICROSECOND and step == US_PER_DAY:
        return (7, 365)
    single = period_for_step(unit, step)
    return (single,) if single else ()


def grid_codes(grid: Grid, kind: str, time_zone: str | None = None) -> np.ndarray:
    """The time code of every grid point (for rows inserted into gaps)."""
    lengths = np.diff(grid.offsets)
    series = np.repeat(np.arange(lengths.size), lengths)
    position = np.arange(grid.offsets[-1]) - np.repeat(grid.offsets[:-1], lengths)
    return _codes_at(grid, series, position, kind, time_zone)


def future_codes(
    grid: Grid, series: np.ndarray, horizon: int, kind: str, time_zone: str | None
) -> np.ndarray:
    """The time codes of the ``horizon`` grid points after the end of each of ``series``,
    series after series."""
    series = np.asarray(series, dtype=np.int64)
    lengths = np.diff(grid.offsets)[series]
    position = np.repeat(lengths, horizon) + np.tile(np.arange(horizon), series.size)
    return _codes_at(grid, np.repeat(series, horizon), position, kind, time_zone)


def point_text(
    grid: Grid | None, series: int, position: int, kind: str, time_zone: str | None
) -> str:
    """The time of grid point ``position`` of a series, as a person reads it ("2020-03-01",
    "time 7"); ``position 7`` when the series has no times.

    >>> status = ["ok"]
    >>> grid = regularise(np.array([10, 12, 16]), np.array([0, 3]), "integer", status)
    >>> point_text(grid, 0, 2, "integer", None), point_text(None, 0, 2, "integer", None)
    ('time 14', 'position 2')
    """
    if grid is None:
        return f"position {position}"
    code = int(_codes_at(grid, np.array([series]), np.array([position]), kind, time_zone)[0])
    return f"time {code}" if kind == "integer" else describe(code, kind)


def phase_text(
    grid: Grid | None, series: int, phase: int, period: int, kind: str, time_zone: str | None
) -> str:
    """A cycle position as a person reads it: its name where the calendar gives one, its
    number (counted from 0) and the first time it falls on.

    >>> status = ["ok"]
    >>> months = np.array(["2020-01-01", "2020-02-01"], dtype="datetime64[us]").astype(np.int64)
    >>> grid = regularise(months, np.array([0, 2]), "date", status)
    >>> phase_text(grid, 0, 1, 12, "date", None)
    'February (cycle position 1 of 12, first at 2020-02-01)'
    """
    where = f"cycle position {phase} of {period}"
    if grid is None:
        return where
    code = int(_codes_at(grid, np.array([series]), np.array([phase]), kind, time_zone)[0])
    first = f"time {code}" if kind == "integer" else describe(code, kind)
    name = cycle_label(code, int(grid.unit[series]), int(grid.step[series]), period, kind)
    return f"{name} ({where}, first at {first})" if name else f"{where} (first at {first})"


def _codes_at(
    grid: Grid, series: np.ndarray, position: np.ndarray, kind: str, time_zone: str | None
) -> np.ndarray:
    """Time codes of grid positions ``position`` of the series ``series`` (one per row)."""
    unit = grid.unit[series]
    first = grid.first[series]
    out = first + position * grid.step[series]
    monthly = unit == UNIT_MONTH
    if monthly.any():
        month = out[monthly].astype("datetime64[M]")
        anchor = grid.anchor[series][monthly]
        start = month.astype("datetime64[us]").astype(np.int64)
        following = (month + 1).astype("datetime64[us]").astype(np.int64)
        end_of_month = following - US_PER_DAY + (-1 - anchor)
        out[monthly] = np.where(anchor >= 0, start + anchor, end_of_month)
    if kind == "timestamptz" and grid.local.any():
        rows = grid.local[series]
        out[rows] = _utc_codes(out[rows], time_zone)
    return out


def grid_codes_of(
    grid: Grid, series: np.ndarray, position: np.ndarray, kind: str, time_zone: str | None
) -> np.ndarray:
    """The time codes of grid points given by series and position (one per entry).

    >>> status = ["ok"]
    >>> grid = regularise(np.array([10, 12, 16]), np.array([0, 3]), "integer", status)
    >>> grid_codes_of(grid, np.array([0, 0]), np.array([0, 3]), "integer", None).tolist()
    [10, 16]
    """
    return _codes_at(grid, np.asarray(series), np.asarray(position), kind, time_zone)


def local_codes(codes: np.ndarray, time_zone: str | None) -> np.ndarray:
    """UTC microseconds to wall-clock microseconds in ``time_zone`` (unchanged for UTC).

    >>> local_codes(np.array([0]), "Europe/Paris").tolist()  # 1970-01-01 01:00 in Paris
    [3600000000]
    """
    return _local_codes(np.asarray(codes, dtype=np.int64), time_zone)


def estimate_period(values: np.ndarray, max_lag: int | None = None) -> int:
    """The first clear peak of the autocorrelation of the linearly detrended series, or 0.

    Common practice: a lag of at least 2 where the autocorrelation is a local maximum and
    above both 0.3 and the rough 95% band 2 / sqrt(n). Missing values are interpolated for
    this estimate only.

    >>> t = np.arange(120)
    >>> estimate_period(np.sin(2 * np.pi * t / 12) + 0.01 * t)
    12
    >>> estimate_period(np.random.default_rng(0).normal(size=120))
    0
    """
    y = np.asarray(values, dtype=float)
    good = np.isfinite(y)  # an infinite value is left out here; the split names it
    n = y.size
    if good.sum() < 8:
        return 0
    t = np.arange(n)
    y = np.interp(t, t[good], y[good])
    top = min(max_lag or n // 2, n - 2)
    acf = np.empty(top + 2)
    if not strengths.detrended_autocorrelations(y, top, acf):
        return 0
    threshold = max(PERIOD_PEAK_FLOOR, 2 / np.sqrt(n))
    for k in range(2, top + 1):
        if acf[k] > threshold and acf[k] >= acf[k - 1] and acf[k] >= acf[k + 1]:
            return k
    return 0


_MONTHS = (
    "January",
    "February",
    "March",
    "April",
    "May",
    "June",
    "July",
    "August",
    "September",
    "October",
    "November",
    "December",
)
_WEEKDAYS = ("Monday", "Tuesday", "Wednesday", "Thursday", "Friday", "Saturday", "Sunday")


def cycle_label(code: int, unit: int, step: int, period: int, kind: str) -> str | None:
    """A readable name for the cycle position of a time: month, weekday, hour or quarter.

    >>> cycle_label(0, UNIT_MONTH, 1, 12, "date")
    'January'
    >>> day = US_PER_DAY
    >>> cycle_label(4 * day, UNIT_MICROSECOND, day, 7, "date")
    'Monday'
    """
    if kind == "integer":
        return None
    stamp = np.datetime64(int(code), "us")
    if unit == UNIT_MONTH and step == 1 and period == 12:
        return _MONTHS[int(stamp.astype("datetime64[M]").astype(np.int64) % 12)]
    if unit == UNIT_MONTH and step == 3 and period == 4:
        return f"Q{int(stamp.astype('datetime64[M]').astype(np.int64) % 12) // 3 + 1}"
    if unit == UNIT_MICROSECOND and step == US_PER_DAY and period == 7:
        return _WEEKDAYS[(int(stamp.astype("datetime64[D]").astype(np.int64)) + 3) % 7]
    if unit == UNIT_MICROSECOND and step == US_PER_WEEK and period == 52:
        day = stamp.astype("datetime64[D]").astype(object)
        return f"week {day.isocalendar()[1]}"
    if unit == UNIT_MICROSECOND and period * step == US_PER_DAY:
        minutes = int(code // US_PER_MINUTE) % (24 * 60)
        return f"{minutes // 60:02d}:{minutes % 60:02d}"
    return None
