"""From components to answers: per-series profiles, unusual points and short forecasts.

Each function takes a split on the regular grid (``split_rows(..., fill_gaps=True)``) and
returns plain numpy arrays; the fronts turn them into SQL rows or DataFrames.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from statistics import NormalDist
from typing import Any

import numpy as np

from . import calendar, transform
from .arguments import whole_number
from .calendar import cycle_label
from .errors import ParamError, SplitError
from .kernel import summary, threads
from .keyed_split import RowsResult
from .status import split_mask

PROFILE_COLUMNS = (
    "strength_of_trend",
    "strength_of_season",
    "seasonal_amplitude",
    "remainder_sd",
    "share_down_weighted",
    "remainder_acf1",
)
OUTLIER_METHODS = ("iqr", "mad")
FORECAST_METHODS = ("damped", "drift")


def _ok(result: RowsResult) -> np.ndarray:
    return split_mask(result.status)


@dataclass
class Profile:
    """One entry per series."""

    points: np.ndarray  # observed values
    missing: np.ndarray  # missing values and inserted times on the grid
    step: list[str | None]
    values: np.ndarray  # series x PROFILE_COLUMNS
    peak: np.ndarray  # cycle position of the seasonal peak (shortest period), -1 if none
    trough: np.ndarray
    peak_label: list[str | None]
    trough_label: list[str | None]
    strength_by_period: list[dict[int, float]] | None


def profile(result: RowsResult, kind: str) -> Profile:
    """Strengths (Wang, Smith & Hyndman 2006), cycle shape and remainder summaries."""
    batch = result.batch
    offsets = result.offsets
    ok = _ok(result)
    count = offsets.size - 1
    observed = ~np.isnan(result.remainder) | ~np.isnan(result.weight)
    points = np.add.reduceat(observed, offsets[:-1]) if observed.size else np.zeros(count)
    points = np.where(np.diff(offsets) > 0, points, 0)
    missing = np.diff(offsets) - points
    periods = np.where(batch.periods > 0, batch.periods, 1)
    values = np.empty((count, len(PROFILE_COLUMNS)))
    peak = np.empty(count, dtype=np.int64)
    trough = np.empty(count, dtype=np.int64)
    shortest = result.seasonal_parts[0] if result.seasonal_parts is not None else result.seasonal
    summary.series_summary(
        result.trend,
        shortest,
        result.remainder,
        result.weight,
        offsets,
        periods,
        ok,
        values,
        peak,
        trough,
    )
    if result.seasonal_parts is not None:
        # with several periods, the seasonal strength is that of their sum
        joint = np.empty_like(values)
        summary.series_summary(
            result.trend,
            result.seasonal,
            result.remainder,
            result.weight,
            offsets,
            periods,
            ok,
            joint,
            np.empty(count, np.int64),
            np.empty(count, np.int64),
        )
        values[:, 1] = joint[:, 1]
    grid = result.grid
    steps: list[str | None] = [None] * count
    peak_label: list[str | None] = [None] * count
    trough_label: list[str | None] = [None] * count
    for s in np.flatnonzero(ok):
        if grid is None:
            continue
        unit, step = int(grid.unit[s]), int(grid.step[s])
        steps[s] = calendar.describe_step(unit, step)
        if result.codes is not None:
            lo = int(offsets[s])
            for pos, labels in ((peak[s], peak_label), (trough[s], trough_label)):
                labels[s] = cycle_label(
                    int(result.codes[lo + pos]), unit, step, int(periods[s]), kind
                )
    by_period = None
    if result.seasonal_parts is not None:
        by_period = []
        for s in range(count):
            sl = slice(int(offsets[s]), int(offsets[s + 1]))
            kept = batch.series_periods[s]
            by_period.append(
                {
                    p: float(summary.strength(result.seasonal_parts[k, sl], result.remainder[sl]))
                    for k, p in enumerate(kept)
                }
            )
    return Profile(
        points, missing, steps, values, peak, trough, peak_label, trough_label, by_period
    )


@dataclass
class Unusual:
    """Per grid row: score, flag, direction and the expected value."""

    score: np.ndarray
    flagged: np.ndarray
    direction: list[str | None]
    expected: np.ndarray


def unusual_points(result: RowsResult, method: str = "iqr", threshold: float = 3.0) -> Unusual:
    """Points whose remainder lies outside fences (common practice: 3 IQR beyond the
    quartiles, or a robust z-score with the MAD scaled by 1.4826 for normal consistency).

    The score is (remainder - median) / scale, the scale being the IQR or 1.4826 MAD; the
    expected value is trend + seasonal, back on the original scale.
    """
    if method not in OUTLIER_METHODS:
        raise ValueError(f"method must be one of {', '.join(OUTLIER_METHODS)}, got {method!r}")
    offsets = result.offsets
    count = offsets.size - 1
    lengths = np.diff(offsets)
    fences = np.empty((count, 4))
    summary.remainder_fences(
        result.remainder,
        offsets,
        OUTLIER_METHODS.index(method),
        float(threshold),
        _ok(result),
        fences,
    )
    row = np.repeat(np.arange(count), lengths)
    lower, upper, centre, scale = (fences[row, c] for c in range(4))
    r = result.remainder
    with np.errstate(invalid="ignore", divide="ignore"):
        score = (r - centre) / scale
    high = r > upper
    low = r < lower
    flagged = high | low
    direction = np.where(high, "high", np.where(low, "low", None)).tolist()
    expected = result.trend + result.seasonal
    lambdas = np.repeat(result.batch.lambdas, lengths)
    moved = ~np.isnan(lambdas)
    if moved.any():
        expected[moved] = transform.inverse(expected[moved], lambdas[moved])
    return Unusual(score, flagged, direction, expected)


@dataclass
class Forecast:
    """Future points, ``horizon`` per forecast series, in series order."""

    offsets: np.ndarray
    step: np.ndarray  # 1 .. horizon
    codes: np.ndarray | None  # future time codes (calendar data)
    point: np.ndarray
    lower: np.ndarray
    upper: np.ndarray


def _seasonal_ahead(part: np.ndarray, lo: int, hi: int, period: int, horizon: int) -> np.ndarray:
    """The seasonal part carried forward from the last cycle."""
    last = part[hi - period : hi]
    return last[np.arange(horizon) % period]


def forecast(
    result: RowsResult,
    kind: str,
    time_zone: str | None,
    horizon: int = 12,
    level: float = 0.95,
    method: str = "damped",
    parallel: bool = True,
) -> Forecast:
    """Decomposition forecast: seasonal part carried forward from the last cycle, the
    seasonally adjusted series (trend + remainder) forecast by a damped trend or drift, added
    back and inverse-transformed; intervals from the adjusted series' forecast errors.
    """
    if method not in FORECAST_METHODS:
        raise ValueError(f"method must be one of {', '.join(FORECAST_METHODS)}, got {method!r}")
    if horizon < 1:
        raise ValueError(f"horizon must be at least 1, got {horizon}")
    if not 0 < level < 1:
        raise ValueError(f"level must be between 0 and 1, got {level}")
    offsets = result.offsets
    ok = _ok(result)
    count = offsets.size - 1
    y = result.trend + result.seasonal + result.remainder  # transformed observations
    adjusted = y - result.seasonal
    z = NormalDist().inv_cdf(0.5 + level / 2)
    h = np.arange(1, horizon + 1)
    point = np.full((count, horizon), np.nan)
    spread = np.full((count, horizon), np.nan)
    if method == "damped":
        fitted = np.empty((count, 6))
        launch = (
            (lambda *a: threads.launch(summary.damped_fit_batch, *a))
            if parallel
            else summary.damped_fit_serial
        )
        launch(
            adjusted,
            offsets,
            ok,
            np.linspace(0.05, 0.95, 19),
            np.array([0.001, 0.01, 0.05, 0.1, 0.2, 0.3, 0.5]),
            np.array([0.8, 0.85, 0.9, 0.95, 0.98]),
            fitted,
        )
        alpha, beta, phi, lvl, slope, var = (fitted[:, c : c + 1] for c in range(6))
        damp = np.cumsum(phi ** h[None, :], axis=1)  # phi + ... + phi^h
        point = lvl + damp * slope
        # ETS(A,Ad,N): var_h = var (1 + sum_{j<h} (alpha + beta (phi + ... + phi^j))^2)
        c = alpha + beta * damp[:, :-1]
        spread = np.sqrt(
            var * (1 + np.concatenate((np.zeros((count, 1)), np.cumsum(c**2, axis=1)), axis=1))
        )
    else:
        for s in np.flatnonzero(ok):
            a = adjusted[offsets[s] : offsets[s + 1]]
            seen = np.flatnonzero(~np.isnan(a))
            first, last = seen[0], seen[-1]
            drift = (a[last] - a[first]) / (last - first)
            steps = np.diff(a)
            sigma = np.nanstd(steps - drift, ddof=1)
            n = seen.size
            point[s] = a[last] + (h + (a.size - 1 - last)) * drift
            # random walk with drift: sigma_h = sigma sqrt(h (1 + h / T))
            spread[s] = sigma * np.sqrt(h * (1 + h / n))
    seasonal_future = np.zeros((count, horizon))
    for s in np.flatnonzero(ok):
        lo, hi = int(offsets[s]), int(offsets[s + 1])
        if result.seasonal_parts is not None:
            for k, p in enumerate(result.batch.series_periods[s]):
                seasonal_future[s] += _seasonal_ahead(result.seasonal_parts[k], lo, hi, p, horizon)
        else:
            seasonal_future[s] = _seasonal_ahead(
                result.seasonal, lo, hi, int(result.batch.periods[s]), horizon
            )
    centre = point + seasonal_future
    lower = centre - z * spread
    upper = centre + z * spread
    lambdas = result.batch.lambdas
    for s in np.flatnonzero(ok & ~np.isnan(lambdas)):
        lam = np.full(horizon, lambdas[s])
        centre[s], lower[s], upper[s] = (
            transform.inverse(v, lam) for v in (centre[s], lower[s], upper[s])
        )
    chosen = np.flatnonzero(ok)
    future_codes = None
    if result.grid is not None:
        future_codes = calendar.future_codes(result.grid, chosen, horizon, kind, time_zone)
    out_offsets = np.arange(chosen.size + 1) * horizon
    return Forecast(
        offsets=out_offsets,
        step=np.tile(h, chosen.size),
        codes=future_codes,
        point=centre[chosen].ravel(),
        lower=lower[chosen].ravel(),
        upper=upper[chosen].ravel(),
    )


def forecast_arguments(
    horizon: Any = 12, level: Any = 0.95, method: Any = "damped"
) -> tuple[int, float, str]:
    """The forecast's arguments checked before any series runs (``ParamError`` names the
    argument), a whole number of any numeric type taken as the horizon.

    >>> forecast_arguments(horizon=6.0)
    (6, 0.95, 'damped')
    >>> forecast_arguments(horizon=2.5)
    Traceback (most recent call last):
    ...
    tidesplit.errors.ParamError: horizon must be a whole number, got 2.5
    """
    steps = whole_number("horizon", horizon)
    if steps is None or steps < 1:
        raise ParamError(f"horizon must be at least 1, got {horizon!r}")
    if isinstance(level, bool) or not isinstance(level, (int, float, np.number)):
        raise ParamError(f"level must be a number between 0 and 1, got {level!r}")
    if not 0 < level < 1:
        raise ParamError(f"level must be between 0 and 1, got {level!r}")
    if method not in FORECAST_METHODS:
        raise ParamError(f"method must be one of {', '.join(FORECAST_METHODS)}, got {method!r}")
    return steps, float(level), method


def settle_forecast(
    result: RowsResult, ahead: Forecast, on_error: str, label: Callable[[int], str]
) -> np.ndarray:
    """Which series have a forecast. One whose forecast came out non-finite (a
    back-transform that overflows far ahead, say) gets a status saying so, or fails the
    call under ``on_error='raise'``; no series reports ``ok`` with a missing forecast."""
    ok = _ok(result)
    chosen = np.flatnonzero(ok)
    horizon = np.diff(ahead.offsets)
    bad_rows = ~(np.isfinite(ahead.point) & np.isfinite(ahead.lower) & np.isfinite(ahead.upper))
    if not bad_rows.any():
        return ok
    keep_rows = np.ones(bad_rows.size, dtype=bool)
    for k in np.flatnonzero(np.add.reduceat(bad_rows, ahead.offsets[:-1]) > 0):
        s = int(chosen[k])
        first = int(np.flatnonzero(bad_rows[ahead.offsets[k] : ahead.offsets[k + 1]])[0]) + 1
        result.status[s] = (
            f"the forecast is not finite from step {first} of {int(horizon[k])} on "
            "(too large for a float after the back-transform)"
        )
        if on_error == "raise":
            raise SplitError(f"series {label(s)}: {result.status[s]}")
        keep_rows[ahead.offsets[k] : ahead.offsets[k + 1]] = False
        ok[s] = False
    kept = np.flatnonzero(ok)
    ahead.offsets = np.arange(kept.size + 1) * int(horizon[0])
    for name in ("step", "point", "lower", "upper"):
        setattr(ahead, name, getattr(ahead, name)[keep_rows])
    if ahead.codes is not None:
        ahead.codes = ahead.codes[keep_rows]
    return ok
