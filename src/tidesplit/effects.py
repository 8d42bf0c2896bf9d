"""Regression effects asked of a split: which columns, built from each series' times.

Calendar columns come from the regular grid of each series (``calendar.Grid``): the days
each grid point covers give weekday counts, the period's length and the share of the days
before Easter. Every calendar column is centred on its mean at the same place in the year
over the 400-year Gregorian cycle (years 2000 to 2399): what is left varies from year to
year only, so the seasonal part keeps the average calendar and the effect holds the
departures from it (the long-run mean is taken away for the same reason by Bell & Hillmer
1983). The numbers are computed in ``kernel.regression``.

Holiday columns count each named day's occurrences in the days a grid point covers, and
outside columns are the input's own numbers on the grid; both are centred per series (see
``build``). Calendar and holiday columns make the calendar effect, outside columns the
outside effect.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from . import calendar
from .errors import ParamError
from .kernel import regression
from .tuning import EASTER_WINDOW_DAYS

WEEKDAYS = "weekdays"
EASTER = "easter"
CALENDAR_WORDS = (WEEKDAYS, EASTER)
# The weekday contrasts' names (Sunday's coefficient is derived: minus the sum of these).
_CONTRASTS = tuple(f"weekday_{d}" for d in regression.WEEKDAYS[:6])
LENGTH = "period_length"
# where the long-run means are taken: one whole Gregorian cycle of 400 years
_CYCLE_START = 2000
_CYCLE_YEARS = 400


def parse_calendar(text: str | None) -> tuple[str, ...]:
    """The calendar effects named in ``calendar_effects`` (comma-separated), in our order.

    >>> parse_calendar("easter, weekdays"), parse_calendar("none")
    (('weekdays', 'easter'), ())
    >>> parse_calendar("weekday")
    Traceback (most recent call last):
    ...
    tidesplit.errors.ParamError: calendar_effects takes 'none' or any of weekdays, easter \
(comma-separated); got 'weekday'
    """
    words = [w.strip().lower() for w in (text or "none").split(",") if w.strip()]
    if words in ([], ["none"]):
        return ()
    wrong = [w for w in words if w not in CALENDAR_WORDS]
    if wrong:
        raise ParamError(
            f"calendar_effects takes 'none' or any of {', '.join(CALENDAR_WORDS)} "
            f"(comma-separated); got {wrong[0]!r}"
        )
    return tuple(w for w in CALENDAR_WORDS if w in words)


@dataclass(frozen=True)
class Request:
    """The effects one call asks for: calendar columns built from the times, holiday
    columns from named days, and outside columns taken from the input."""

    calendar: tuple[str, ...] = ()
    easter_days: int = EASTER_WINDOW_DAYS
    holidays: tuple[tuple[int, str], ...] = ()  # (day since 1970-01-01, name), sorted
    outside: tuple[str, ...] = ()  # input columns, in the order given

    @property
    def any(self) -> bool:
        return bool(self.calendar or self.holidays or self.outside)

    def holiday_names(self) -> tuple[str, ...]:
        """Each holiday name once, in the order of its first day."""
        return tuple(dict.fromkeys(name for _, name in self.holidays))

    def names(self) -> tuple[str, ...]:
        """The design's columns, in order: calendar, holidays, outside."""
        out: list[str] = []
        if WEEKDAYS in self.calendar:
            out += [*_CONTRASTS, LENGTH]
        if EASTER in self.calendar:
            out.append(EASTER)
        return (*out, *self.holiday_names(), *self.outside)

    def calendar_width(self) -> int:
        """How many of the first columns make up the calendar effect (holidays included)."""
        return len(self.names()) - len(self.outside)


def request(settings: dict[str, Any]) -> Request | None:
    """The effects asked for in a function's settings (``arguments.accept``), or None.

    >>> request({"calendar_effects": "weekdays", "easter_days": None}).names()[-1]
    'period_length'
    >>> request({"calendar_effects": "weekdays, easter", "easter_days": 8}).easter_days
    8
    >>> request({"calendar_effects": "none"}) is None
    True
    >>> request({"outside_columns": ("price",), "special_days": ((0, "opening"),)}).names()
    ('opening', 'price')
    """
    chosen = parse_calendar(settings.get("calendar_effects"))
    given = settings.get("easter_days")
    days = EASTER_WINDOW_DAYS if given is None else int(given)
    if days < 1:
        raise ParamError(f"easter_days must be at least 1, got {days}")
    if EASTER not in chosen and given is not None:
        # given without an Easter effect it would change nothing: refused, not ignored
        raise ParamError("easter_days goes with calendar_effects including 'easter'")
    found = Request(
        calendar=chosen,
        easter_days=days,
        holidays=tuple(settings.get("special_days") or ()),
        outside=tuple(settings.get("outside_columns") or ()),
    )
    # one coefficient per name: a holiday or an outside column named like another effect
    # would make two rows of one name in the profile
    seen: dict[str, str] = {}
    derived = ("weekday_sunday",) if WEEKDAYS in chosen else ()
    for name in (*found.names(), *derived):
        if name.lower() in seen:
            raise ParamError(
                f"two effects are named {name!r}; rename the holiday or the outside column "
                "(calendar effects' names: " + ", ".join((*_CONTRASTS, LENGTH, EASTER)) + ")"
            )
        seen[name.lower()] = name
    return found if found.any else None


@functools.lru_cache(maxsize=4096)
def easter_day(year: int) -> int:
    """Easter Sunday (Western, Gregorian) of ``year`` in days since 1970-01-01, from
    python-dateutil.

    >>> str(np.datetime64(easter_day(2024), "D"))
    '2024-03-31'
    """
    from dateutil.easter import EASTER_WESTERN, easter

    return int(np.datetime64(easter(year, EASTER_WESTERN), "D").astype(np.int64))


def _easter_days(first_year: int, last_year: int) -> np.ndarray:
    return np.array([easter_day(y) for y in range(first_year, last_year + 1)], dtype=np.int64)


def period_days(month_index: np.ndarray, step: int, ends: bool) -> tuple[np.ndarray, np.ndarray]:
    """First and last day (days since 1970-01-01) of the periods of ``step`` months named by
    their month index (months since 1970-01): the months from it on, or, for times stamped at
    month ends (``ends``), the months up to it.

    >>> first, last = period_days(np.array([600]), 3, ends=True)  # 2020-01, quarter ending
    >>> str(np.datetime64(int(first[0]), "D")), str(np.datetime64(int(last[0]), "D"))
    ('2019-11-01', '2020-01-31')
    """
    start = month_index - (step - 1 if ends else 0)
    first = start.astype("datetime64[M]").astype("datetime64[D]").astype(np.int64)
    last = (start + step).astype("datetime64[M]").astype("datetime64[D]").astype(np.int64) - 1
    return first, last


def _raw_columns(request: Request, first: np.ndarray, last: np.ndarray) -> np.ndarray:
    """Calendar columns before centring."""
    parts = []
    if WEEKDAYS in request.calendar:
        parts.append(regression.trading_day_columns(first, last))
    if EASTER in request.calendar:
        years = first.astype("datetime64[D]").astype("datetime64[Y]").astype(np.int64) + 1970
        lo = int(years.min()) if years.size else 1970
        hi = int(years.max()) + 1 if years.size else 1970
        shares = regression.easter_shares(first, last, _easter_days(lo, hi), request.easter_days)
        parts.append(shares[:, None])
    return np.hstack(parts) if parts else np.empty((first.size, 0))


@functools.lru_cache(maxsize=256)
def _long_run_means(request: Request, step: int, ends: bool) -> np.ndarray:
    """Each calendar column's mean at each of the 12 places in the year (by the month that
    names the period), over the 400-year Gregorian cycle."""
    months = np.arange(_CYCLE_YEARS * 12) + (_CYCLE_START - 1970) * 12
    first, last = period_days(months, step, ends)
    raw = _raw_columns(request, first, last)
    return raw.reshape(_CYCLE_YEARS, 12, raw.shape[1]).mean(axis=0)


def calendar_columns(
    request: Request, month_index: np.ndarray, step: int, ends: bool
) -> np.ndarray:
    """The centred calendar columns of the periods named by ``month_index``.

    >>> one = Request(calendar=("weekdays",))
    >>> cols = calendar_columns(one, np.arange(600, 600 + 4800), 1, False)
    >>> bool(np.abs(cols.reshape(400, 12, 7).mean(axis=0)).max() < 1e-9)
    True
    """
    # a fleet's series share their months: each distinct month once
    months, back = np.unique(month_index, return_inverse=True)
    raw = _raw_columns(request, *period_days(months, step, ends))
    centred = raw - _long_run_means(request, step, ends)[months % 12]
    return centred[back.reshape(-1)]


@dataclass
class Design:
    """The regression design of a batch on its grid, and what the front says about it."""

    X: np.ndarray  # points x columns
    names: tuple[str, ...]
    calendar_width: int  # the first columns make the calendar effect, the rest the outside one
    absent: np.ndarray  # series x columns: the column does not apply
    notes: list[str] = field(default_factory=list)  # per series, why columns do not apply
    # per point: an outside value is unknown there (a gap, or NULL beside a NULL value), so
    # the outside effect is too
    unknown: np.ndarray | None = None


def holiday_counts(
    first_day: np.ndarray, last_day: np.ndarray, holidays: tuple[tuple[int, str], ...]
) -> np.ndarray:
    """How many days of each holiday name every period ``[first_day, last_day]`` holds.

    >>> days = ((5, "fair"), (9, "fair"), (6, "rest"))
    >>> holiday_counts(np.array([0, 5]), np.array([4, 11]), days).tolist()
    [[0.0, 0.0], [2.0, 1.0]]
    """
    names = tuple(dict.fromkeys(name for _, name in holidays))
    out = np.zeros((np.size(first_day), len(names)))
    for j, name in enumerate(names):
        days = np.array(sorted(d for d, n in holidays if n == name), dtype=np.int64)
        out[:, j] = np.searchsorted(days, last_day, side="right") - np.searchsorted(
            days, first_day, side="left"
        )
    return out


def _point_days(
    grid: calendar.Grid, series: np.ndarray, kind: str, time_zone: str | None
) -> tuple[np.ndarray, np.ndarray]:
    """The first and last local day each grid point of ``series`` covers (a point shorter
    than a day covers its own day), every point of those series in order."""
    lengths = np.diff(grid.offsets)[series]
    rows = np.repeat(series, lengths)
    position = np.arange(rows.size) - np.repeat(np.cumsum(lengths) - lengths, lengths)
    first = np.empty(rows.size, dtype=np.int64)
    last = np.empty(rows.size, dtype=np.int64)
    monthly = grid.unit[rows] == calendar.UNIT_MONTH
    if monthly.any():
        months = grid.first[rows[monthly]] + grid.step[rows[monthly]] * position[monthly]
        steps = grid.step[rows[monthly]]
        ends = grid.anchor[rows[monthly]] == -1
        for step in np.unique(steps):
            for end in (False, True):
                chosen = (steps == step) & (ends == end)
                if chosen.any():
                    f, l_ = period_days(months[chosen], int(step), end)
                    first[np.flatnonzero(monthly)[chosen]] = f
                    last[np.flatnonzero(monthly)[chosen]] = l_
    timed = ~monthly
    if timed.any():
        codes = calendar.grid_codes_of(grid, rows[timed], position[timed], kind, time_zone)
        if kind == "timestamptz":
            codes = calendar.local_codes(codes, time_zone)
        step = grid.step[rows[timed]]
        first[timed] = np.floor_divide(codes, calendar.US_PER_DAY)
        last[timed] = np.where(
            step >= calendar.US_PER_DAY,
            np.floor_divide(codes + step - 1, calendar.US_PER_DAY),
            first[timed],
        )
    return first, last


def _centre(
    X: np.ndarray, columns: slice, offsets: np.ndarray, seen: np.ndarray, periods: np.ndarray
) -> None:
    """Each of ``columns`` less its mean at each cycle position of its series, over the
    observed points (``periods`` 1: the series' mean)."""
    lengths = np.diff(offsets)
    series = np.repeat(np.arange(lengths.size), lengths)
    position = np.arange(int(offsets[-1])) - np.repeat(offsets[:-1], lengths)
    period = np.maximum(periods, 1)
    slot_start = np.concatenate(([0], np.cumsum(period)))
    slot = slot_start[series] + position % period[series]
    counts = np.bincount(slot, weights=seen, minlength=int(slot_start[-1]))
    for j in range(*columns.indices(X.shape[1])):
        sums = np.bincount(slot, weights=np.where(seen, X[:, j], 0.0), minlength=counts.size)
        with np.errstate(invalid="ignore", divide="ignore"):
            means = np.where(counts > 0, sums / counts, 0.0)
        X[:, j] -= means[slot]


def build(
    request: Request,
    grid: calendar.Grid | None,
    offsets: np.ndarray,
    kind: str,
    *,
    time_zone: str | None = None,
    seen: np.ndarray | None = None,
    periods: np.ndarray | None = None,
    outside: np.ndarray | None = None,
) -> Design:
    """The design of every series on its grid (``offsets`` are the grid's).

    Calendar columns are centred on their long-run means (see the module's notes); holiday
    columns on their mean at each cycle position (``periods``) over the series' observed
    points (``seen``), so that the seasonal part keeps the holidays' average place in the
    cycle, as it keeps the average calendar; outside columns (``outside``, points x
    columns, on the grid) on the series' mean over its observed points, so that the trend
    keeps the level the series has at its average outside values.
    """
    names = request.names()
    width = request.calendar_width()
    count = offsets.size - 1
    lengths = np.diff(offsets)
    total = int(offsets[-1])
    X = np.zeros((total, len(names)))
    absent = np.zeros((count, len(names)), dtype=bool)
    notes = [""] * count
    seen = np.ones(total, dtype=bool) if seen is None else seen
    periods = np.ones(count, dtype=np.int64) if periods is None else periods
    timed = np.full(count, grid is not None and kind != "integer")
    calendar_names = width - len(request.holiday_names())
    if calendar_names:
        _calendar_part(request, grid, offsets, kind, timed, X, absent, notes, calendar_names)
    if request.holidays:
        columns = slice(calendar_names, width)
        for s in np.flatnonzero(~timed):
            absent[s, columns] = True
            notes[s] = _joined(notes[s], "no holiday effects: they need dates, the series has "
                               "integer times")  # fmt: skip
        chosen = np.flatnonzero(timed)
        if chosen.size:
            first, last = _point_days(grid, chosen, kind, time_zone)
            rows = np.repeat(timed, lengths)
            X[rows, columns] = holiday_counts(first, last, request.holidays)
            _centre(X, columns, offsets, seen, periods)
    unknown = None
    if request.outside:
        X[:, width:] = outside
        _centre(X, slice(width, len(names)), offsets, seen, np.ones(count, dtype=np.int64))
        unknown = ~np.isfinite(X[:, width:]).all(axis=1)
        X[unknown, width:] = np.where(np.isfinite(X[unknown, width:]), X[unknown, width:], 0.0)
    return Design(X, names, width, absent, notes, unknown)


def _joined(note: str, more: str) -> str:
    return more if not note else f"{note}; {more}"


def _calendar_part(
    request: Request,
    grid: calendar.Grid | None,
    offsets: np.ndarray,
    kind: str,
    timed: np.ndarray,
    X: np.ndarray,
    absent: np.ndarray,
    notes: list[str],
    width: int,
) -> None:
    """The weekday and Easter columns (the first ``width``), monthly and quarterly only."""
    count = offsets.size - 1
    lengths = np.diff(offsets)
    if grid is not None and kind != "integer":
        monthly = (grid.unit == calendar.UNIT_MONTH) & np.isin(grid.step, (1, 3))
    else:
        monthly = np.zeros(count, dtype=bool)
    for s in np.flatnonzero(~monthly):
        absent[s, :width] = True
        step = (
            "integer times"
            if not timed[s]
            else f"a step of {calendar.describe_step(int(grid.unit[s]), int(grid.step[s]))}"
        )
        notes[s] = (
            f"no calendar effects: they need monthly or quarterly dates, the series has {step}"
        )
    if not monthly.any():
        return
    # the calendar's own request: its long-run means are cached by it
    own = Request(calendar=request.calendar, easter_days=request.easter_days)
    # one pass per kind of calendar (step, stamped at month ends or not), every point of
    # its series at once
    series_of = np.repeat(np.arange(count), lengths)
    position = np.arange(int(offsets[-1])) - np.repeat(offsets[:-1], lengths)
    for step_months in (1, 3):
        for ends in (False, True):
            chosen = monthly & (grid.step == step_months) & ((grid.anchor == -1) == ends)
            if not chosen.any():
                continue
            rows = chosen[series_of]
            months = grid.first[series_of[rows]] + step_months * position[rows]
            X[rows, :width] = calendar_columns(own, months, step_months, ends)


def coefficient_rows(
    names: tuple[str, ...], coef: np.ndarray, cov: np.ndarray
) -> list[tuple[str, float, float, float]]:
    """One series' coefficients as (name, coefficient, standard error, t-value), fitted
    columns only; with all six weekday contrasts, Sunday's too (minus their sum, its
    variance that of the sum).

    >>> names = ("a", "b")
    >>> coefficient_rows(names, np.array([2.0, np.nan]), np.diag([0.25, np.nan]))
    [('a', 2.0, 0.5, 4.0)]
    """
    return coefficient_tables(names, coef[None, :], cov[None, :, :])[0]


def coefficient_tables(
    names: tuple[str, ...], coef: np.ndarray, cov: np.ndarray
) -> list[list[tuple[str, float, float, float]]]:
    """``coefficient_rows`` of every series (``coef``: series x columns, ``cov``: series
    x columns x columns), computed for all series at once."""
    count, k = coef.shape
    variance = np.diagonal(cov, axis1=1, axis2=2)
    shown = list(names)
    values = [coef[:, j] for j in range(k)]
    variances = [variance[:, j] for j in range(k)]
    order = list(range(k))
    if all(c in names for c in _CONTRASTS):
        index = [names.index(c) for c in _CONTRASTS]
        values.append(-coef[:, index].sum(axis=1))
        variances.append(cov[:, index][:, :, index].sum(axis=(1, 2)))
        shown.append("weekday_sunday")
        # Sunday right after Saturday
        order.insert(order.index(index[-1]) + 1, k)
    table = np.column_stack([values[j] for j in order]) if order else np.empty((count, 0))
    var = np.column_stack([variances[j] for j in order]) if order else np.empty((count, 0))
    labels = [shown[j] for j in order]
    with np.errstate(invalid="ignore", divide="ignore"):
        error = np.sqrt(np.where(var >= 0, var, np.nan))
        t = np.where(error > 0, table / error, np.nan)
    fitted = ~np.isnan(table)
    rows_out = []
    for c_row, e_row, t_row, f_row in zip(
        table.tolist(), error.tolist(), t.tolist(), fitted.tolist(), strict=True
    ):
        found = [(labels[j], c_row[j], e_row[j], t_row[j]) for j in range(len(labels)) if f_row[j]]
        rows_out.append(found)
    return rows_out


def _row(name: str, value: float, variance: float) -> tuple[str, float, float, float]:
    error = float(np.sqrt(variance)) if variance >= 0 else float("nan")
    t = float(value / error) if error > 0 else float("nan")
    return (name, float(value), error, t)


VERDICT_WORDS = {
    regression.NO_VARIATION: "it does not vary beyond the seasonal pattern",
    regression.COLLINEAR: "it is a combination of the effects before it",
    regression.TOO_FEW: "too few observed points for one more coefficient",
}
