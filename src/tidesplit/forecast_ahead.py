"""Short forecasts by components: the seasonal part carried forward, the seasonally adjusted
series forecast by a damped trend or a random walk, intervals calibrated on each series' own
past (rolling origins), from a split on the regular grid."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, replace
from statistics import NormalDist
from typing import Any

import numpy as np

from . import arguments, calendar, transform
from . import effects as effects_front
from .arguments import whole_number
from .batch_split import split_batch
from .errors import ParamError, SplitError
from .kernel import damped, threads
from .keyed_split import RowsResult
from .params import SplitParams
from .status import OK, split_mask
from .tuning import (
    ROLLING_ORIGINS,
)

TREND_MODELS = next(a.choices for a in arguments.of(arguments.FORECAST) if a.name == "trend_model")
SELECTABLE = ("damped", "drift", "flat")  # what 'select' chooses from, per series


@dataclass
class Forecast:
    """Future points, ``horizon`` per forecast series, in series order."""

    offsets: np.ndarray
    step: np.ndarray  # 1 .. horizon
    codes: np.ndarray | None  # future time codes (calendar data)
    point: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    method: list[str]  # per forecast series, the method used


def _seasonal_ahead(
    seasonal: np.ndarray,
    parts: np.ndarray | None,
    offsets: np.ndarray,
    ok: np.ndarray,
    periods: np.ndarray,
    series_periods: list[tuple[int, ...]] | None,
    horizon: int,
) -> np.ndarray:
    """The seasonal part (each period's, with several) carried forward from its last cycle."""
    count = offsets.size - 1
    ahead = np.zeros((count, horizon))
    steps = np.arange(horizon)
    if parts is None:
        chosen = np.flatnonzero(ok)
        p = periods[chosen][:, None]
        where = offsets[chosen + 1][:, None] - p + steps[None, :] % p
        ahead[chosen] = seasonal[where]
        return ahead
    for s in np.flatnonzero(ok):
        hi = int(offsets[s + 1])
        for k, p in enumerate(series_periods[s]):
            ahead[s] += parts[k, hi - p + steps % p]
    return ahead


def _adjusted_ahead(
    adjusted: np.ndarray,
    offsets: np.ndarray,
    ok: np.ndarray,
    horizon: int,
    method: str,
    parallel: bool,
    given: np.ndarray | None = None,
) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
    """Point forecasts and their standard deviations, series x horizon, of the seasonally
    adjusted series (transformed scale) by one method, and the damped trend's parameters
    (series x 3: alpha, beta, phi; None for the other methods); NaN where it cannot be
    fitted. ``given``: the damped trend's parameters per series, run rather than
    searched."""
    count = offsets.size - 1
    h = np.arange(1, horizon + 1)
    if method == "damped":
        fitted = np.empty((count, 6))
        if given is not None:
            damped.damped_run_serial(
                adjusted,
                offsets,
                ok,
                *(np.ascontiguousarray(given[:, c]) for c in range(3)),
                fitted,
            )
        else:
            launch = (
                (lambda *a: threads.launch(damped.damped_fit_batch, *a))
                if parallel
                else damped.damped_fit_serial
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
        return point, spread, fitted[:, :3]
    fitted = np.empty((count, 6))
    damped.walk_fit(adjusted, offsets, ok, fitted)
    last, behind, drift, sd_drift, sd_level, seen = (fitted[:, c : c + 1] for c in range(6))
    if method == "drift":
        point = last + (h[None, :] + behind) * drift
        # random walk with drift: sigma_h = sigma sqrt(h (1 + h / T))
        return point, sd_drift * np.sqrt(h[None, :] * (1 + h[None, :] / seen)), None
    # level: a random walk without drift, sigma_h = sigma sqrt(h)
    return np.repeat(last, horizon, axis=1), sd_level * np.sqrt(h[None, :] + behind), None


def _series_periods(result_batch: object, ok: np.ndarray) -> list[tuple[int, ...]]:
    """Each series' periods (one, or several with MSTL); () for a series not split."""
    series_periods = getattr(result_batch, "series_periods", None)
    periods = result_batch.periods  # type: ignore[attr-defined]
    return [
        (tuple(series_periods[s]) if series_periods is not None else (int(periods[s]),))
        if ok[s]
        else ()
        for s in range(ok.size)
    ]


@dataclass
class _Past:
    """Rolling-origin errors of one batch: per origin row its series, and per method the
    errors (origin rows x horizon, NaN where no value was held out) and their
    standardised versions (error / the method's own standard deviation)."""

    series: np.ndarray
    errors: dict[str, np.ndarray]
    standardised: dict[str, np.ndarray]


def _rolling_origins(
    y: np.ndarray,
    offsets: np.ndarray,
    ok: np.ndarray,
    wanted: list[tuple[int, ...]],
    params: SplitParams,
    horizon: int,
    methods: tuple[str, ...],
    parallel: bool,
    fitted: dict[str, np.ndarray | None],
) -> _Past:
    """Forecast each series from ``ROLLING_ORIGINS`` earlier ends of its own past, a
    (shortest) cycle apart, with the same split and each method, and compare with what
    followed. An origin needs at least three cycles before it."""
    lengths = np.diff(offsets)
    shortest = np.array([min(w) if w else 1 for w in wanted], dtype=np.int64)
    longest = np.array([max(w) if w else 1 for w in wanted], dtype=np.int64)
    gap = np.maximum(1, shortest)
    room = lengths - horizon - 3 * longest  # how far back the earliest end may go
    origins = np.where(ok & (room >= 0), np.minimum(ROLLING_ORIGINS, room // gap + 1), 0)
    series = np.repeat(np.arange(lengths.size), origins)
    back = np.arange(series.size) - np.repeat(np.cumsum(origins) - origins, origins)
    ends = lengths[series] - horizon - back * gap[series]
    empty = np.empty((0, horizon))
    if series.size == 0:
        return _Past(series, dict.fromkeys(methods, empty), dict.fromkeys(methods, empty))
    starts = offsets[series]
    cut_offsets = np.concatenate(([0], np.cumsum(ends))).astype(np.int64)
    take = np.repeat(starts - cut_offsets[:-1], ends) + np.arange(cut_offsets[-1])
    values = y[take]
    kinds = sorted({wanted[s] for s in np.unique(series)})
    group_of = np.array([kinds.index(w) if w in kinds else 0 for w in wanted], dtype=np.int64)
    groups = group_of[series]
    plain = replace(params, transform="none", boxcox_lambda=None, boxcox_bounds=None)
    group_params = [
        replace(plain, period=None, periods=w) if params.multi else replace(plain, period=w[0])
        for w in kinds
    ]
    cut = split_batch(
        values,
        cut_offsets,
        group_params,
        groups,
        on_error="keep",
        parallel=parallel,
    )
    cut_ok = np.array([st.startswith(OK) for st in cut.status], dtype=bool)
    seasonal = _seasonal_ahead(
        cut.seasonal,
        cut.seasonal_parts,
        cut_offsets,
        cut_ok,
        cut.periods,
        cut.series_periods,
        horizon,
    )
    adjusted = values - cut.seasonal
    steps = np.arange(horizon)
    place = ends[:, None] + steps[None, :]
    inside = place < lengths[series][:, None]
    actual = np.full((series.size, horizon), np.nan)
    actual[inside] = y[(starts[:, None] + place)[inside]]
    errors, standardised = {}, {}
    for method in methods:
        given = fitted[method]
        point, spread, _ = _adjusted_ahead(
            adjusted,
            cut_offsets,
            cut_ok,
            horizon,
            method,
            parallel,
            None if given is None else given[series],
        )
        error = actual - (point + seasonal)
        error[~cut_ok] = np.nan
        errors[method] = error
        with np.errstate(invalid="ignore", divide="ignore"):
            standardised[method] = error / spread
    return _Past(series, errors, standardised)


def _per_series(values: np.ndarray, series: np.ndarray, count: int, reduce: str) -> np.ndarray:
    """A reduction of each series' finite values over its origin rows (``series``, sorted),
    NaN for none: the mean, or a level's quantile taken as split conformal prediction does
    (Vovk, Gammerman & Shafer 2005; Lei et al. 2018): the ceil((m + 1) level)-th smallest
    of m values, so that a new value exchangeable with them falls below it with at least
    that chance (the largest when there are too few)."""
    out = np.full(count, np.nan)
    if series.size == 0:
        return out
    rows = np.ascontiguousarray(values, dtype=np.float64).reshape(series.size, -1)
    damped.rows_by_series(rows, series, -1.0 if reduce == "mean" else float(reduce), out)
    return out


def _effects_ahead(
    result: RowsResult,
    effects: effects_front.Request,
    horizon: int,
    kind: str,
    time_zone: str | None,
) -> np.ndarray:
    """The fitted calendar effects at the ``horizon`` grid points after each series' end
    (series x horizon; 0 for a series without them). The design is built on the grid
    extended by the horizon, with the fit's observed points, so that holiday columns are
    centred exactly as in the fit."""
    grid = result.grid
    count = result.offsets.size - 1
    if grid is None:
        return np.zeros((count, horizon))
    lengths = np.diff(result.offsets)
    extended = np.concatenate(([0], np.cumsum(lengths + horizon))).astype(np.int64)
    shift = np.repeat(extended[:-1] - result.offsets[:-1], lengths)
    fitted_rows = np.arange(int(result.offsets[-1])) + shift
    seen = np.zeros(int(extended[-1]), dtype=bool)
    seen[fitted_rows] = ~np.isnan(result.trend + result.seasonal + result.remainder)
    # centred as in the fit (keyed_split.split_rows): per position of the period, or on
    # the series' mean with several periods
    if result.batch.series_periods is not None:
        periods = np.ones(count, dtype=np.int64)
    else:
        periods = np.maximum(result.batch.periods, 1)
    design = effects_front.build(
        effects, replace(grid, offsets=extended), extended, kind,
        time_zone=time_zone, seen=seen, periods=periods,
    )  # fmt: skip
    future = (extended[1:] - horizon)[:, None] + np.arange(horizon)[None, :]
    coef = np.where(np.isnan(result.batch.effect_coef), 0.0, result.batch.effect_coef)
    return np.einsum("shk,sk->sh", design.X[future], coef)


def forecast(
    result: RowsResult,
    kind: str,
    time_zone: str | None,
    horizon: int,
    level: float,
    method: str,
    parallel: bool = True,
    params: SplitParams | None = None,
    effects: effects_front.Request | None = None,
) -> Forecast:
    """Decomposition forecast: seasonal part carried forward from the last cycle, the
    seasonally adjusted series (trend + remainder) forecast by a damped trend, a random walk
    with drift or one without (``'damped'``, ``'drift'``, ``'flat'``), added back and
    inverse-transformed. ``'select'`` (the default) takes, per series, the one of the three
    with the smallest mean absolute error on its own past (rolling origins, see
    ``_rolling_origins``).

    Intervals: the method's own standard deviations, widened by the series' own past where
    that shows them too narrow: the factor is the ``level`` quantile of the rolling-origin
    errors in those standard deviations, over the normal quantile, never below 1. Where the
    past is too short for rolling origins (fewer than three cycles before the end), the
    method's own intervals stand.

    With calendar effects (``effects``: weekdays, Easter, holidays) the series is forecast
    without them (what ``remainder`` + ``trend`` + ``seasonal`` add up to) and their
    coefficients times their columns at the future times are added back: the calendar is
    known ahead. The intervals treat the effects as known.
    """
    if method not in TREND_MODELS:
        raise ValueError(f"method must be one of {', '.join(TREND_MODELS)}, got {method!r}")
    if horizon < 1:
        raise ValueError(f"horizon must be at least 1, got {horizon}")
    if not 0 < level < 1:
        raise ValueError(f"level must be between 0 and 1, got {level}")
    offsets = result.offsets
    ok = split_mask(result.status)
    count = offsets.size - 1
    y = result.trend + result.seasonal + result.remainder  # transformed observations
    adjusted = y - result.seasonal
    z = NormalDist().inv_cdf(0.5 + level / 2)
    methods = SELECTABLE if method == "select" else (method,)
    wanted = result.batch.periods_used()
    fits = {m: _adjusted_ahead(adjusted, offsets, ok, horizon, m, parallel) for m in methods}
    past = _rolling_origins(
        y,
        offsets,
        ok,
        wanted,
        params or SplitParams(),
        horizon,
        methods,
        parallel,
        {m: fit[2] for m, fit in fits.items()},
    )
    chosen_method = np.zeros(count, dtype=np.int64)
    if len(methods) > 1:
        scores = np.column_stack(
            [_per_series(np.abs(past.errors[m]), past.series, count, "mean") for m in methods]
        )
        scored = ~np.isnan(scores).any(axis=1)
        chosen_method[scored] = np.argmin(scores[scored], axis=1)
    point = np.full((count, horizon), np.nan)
    spread = np.full((count, horizon), np.nan)
    widen = np.ones(count)
    for k, m in enumerate(methods):
        members = ok & (chosen_method == k)
        if not members.any():
            continue
        point[members], spread[members] = fits[m][0][members], fits[m][1][members]
        mine = members[past.series]
        quantile = _per_series(
            np.abs(past.standardised[m][mine]), past.series[mine], count, str(level)
        )
        found = members & ~np.isnan(quantile)
        widen[found] = quantile[found] / z
    seasonal_future = _seasonal_ahead(
        result.seasonal,
        result.seasonal_parts,
        offsets,
        ok,
        result.batch.periods,
        result.batch.series_periods,
        horizon,
    )
    centre = point + seasonal_future
    if effects is not None and result.batch.effect_coef is not None:
        centre += _effects_ahead(result, effects, horizon, kind, time_zone)
    lower = centre - widen[:, None] * z * spread
    upper = centre + widen[:, None] * z * spread
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
    h = np.arange(1, horizon + 1)
    return Forecast(
        offsets=out_offsets,
        step=np.tile(h, chosen.size),
        codes=future_codes,
        point=centre[chosen].ravel(),
        lower=lower[chosen].ravel(),
        upper=upper[chosen].ravel(),
        method=[methods[chosen_method[s]] for s in chosen],
    )


def forecast_arguments(steps_ahead: Any, coverage: Any, trend_model: Any) -> tuple[int, float, str]:
    """The forecast's arguments checked before any series runs (``ParamError`` names the
    argument), a whole number of any numeric type taken as the steps ahead.

    >>> forecast_arguments(6.0, 0.95, "damped")
    (6, 0.95, 'damped')
    >>> forecast_arguments(2.5, 0.95, "damped")
    Traceback (most recent call last):
    ...
    tidesplit.errors.ParamError: steps_ahead must be a whole number, got 2.5
    """
    steps = whole_number("steps_ahead", steps_ahead)
    if steps is None or steps < 1:
        raise ParamError(f"steps_ahead must be at least 1, got {steps_ahead!r}")
    if isinstance(coverage, bool) or not isinstance(coverage, (int, float, np.number)):
        raise ParamError(f"coverage must be a number between 0 and 1, got {coverage!r}")
    if not 0 < coverage < 1:
        raise ParamError(f"coverage must be between 0 and 1, got {coverage!r}")
    if trend_model not in TREND_MODELS:
        raise ParamError(
            f"trend_model must be one of {', '.join(TREND_MODELS)}, got {trend_model!r}"
        )
    return steps, float(coverage), trend_model


def _times_out_of_range(result: RowsResult, ahead: Forecast, chosen: np.ndarray) -> np.ndarray:
    """Per forecast row: its time wrapped past the largest 64-bit time code (it then comes
    before the series' last time, or before the step before it)."""
    late = np.zeros(ahead.point.size, dtype=bool)
    if ahead.codes is None or result.codes is None or not chosen.size:
        return late
    last = result.codes[result.offsets[chosen + 1] - 1]
    before = np.repeat(last, np.diff(ahead.offsets))
    starts = ahead.offsets[:-1]
    before[1:] = np.where(np.isin(np.arange(1, before.size), starts), before[1:], ahead.codes[:-1])
    return ahead.codes <= before


def settle_forecast(
    result: RowsResult, ahead: Forecast, on_error: str, label: Callable[[int], str]
) -> np.ndarray:
    """Which series have a forecast. One whose forecast came out non-finite (a
    back-transform that overflows far ahead, say) gets a status saying so, or fails the
    call under ``on_error='raise'``; no series reports ``ok`` with a missing forecast."""
    ok = split_mask(result.status)
    chosen = np.flatnonzero(ok)
    horizon = np.diff(ahead.offsets)
    bad_rows = ~(np.isfinite(ahead.point) & np.isfinite(ahead.lower) & np.isfinite(ahead.upper))
    late = _times_out_of_range(result, ahead, chosen)
    if not (bad_rows.any() or late.any()):
        return ok
    keep_rows = np.ones(bad_rows.size, dtype=bool)
    per_series = np.add.reduceat(bad_rows | late, ahead.offsets[:-1]) if bad_rows.size else []
    for k in np.flatnonzero(np.asarray(per_series) > 0):
        s = int(chosen[k])
        block = slice(int(ahead.offsets[k]), int(ahead.offsets[k + 1]))
        if late[block].any():
            first = int(np.flatnonzero(late[block])[0]) + 1
            result.status[s] = (
                f"the forecast's times run past the largest time the column holds from step "
                f"{first} of {int(horizon[k])} on"
            )
        else:
            first = int(np.flatnonzero(bad_rows[block])[0]) + 1
            result.status[s] = (
                f"the forecast is not finite from step {first} of {int(horizon[k])} on "
                "(too large for a float after the back-transform)"
            )
        if on_error == "raise":
            raise SplitError(f"series {label(s)}: {result.status[s]}")
        keep_rows[ahead.offsets[k] : ahead.offsets[k + 1]] = False
        ok[s] = False
    ahead.method = [m for m, keep in zip(ahead.method, ok[chosen], strict=True) if keep]
    kept = np.flatnonzero(ok)
    ahead.offsets = np.arange(kept.size + 1) * int(horizon[0])
    for name in ("step", "point", "lower", "upper"):
        setattr(ahead, name, getattr(ahead, name)[keep_rows])
    if ahead.codes is not None:
        ahead.codes = ahead.codes[keep_rows]
    return ok
