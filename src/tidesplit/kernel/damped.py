"""Forecasts of the seasonally adjusted series: the damped trend's recursion and its grid
fit, random walks, and reductions per series. Flat layout, NaN for missing."""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange


@njit(nogil=True, cache=True)
def damped_path(
    a: np.ndarray, alpha: float, beta: float, phi: float, level0: float, slope0: float
) -> tuple[float, float, float, int]:
    """Additive damped-trend exponential smoothing (state space form, Gardner & McKenzie
    1985): l_t = l + phi b + alpha e, b_t = phi b + beta e, e = a_t - (l + phi b).

    Missing points advance the state without correction. Returns the final level and
    slope, the sum of squared one-step errors and their count.
    """
    level = level0
    slope = slope0
    sse = 0.0
    count = 0
    for i in range(a.shape[0]):
        forecast = level + phi * slope
        if math.isnan(a[i]):
            level = forecast
            slope = phi * slope
            continue
        error = a[i] - forecast
        sse += error * error
        count += 1
        level = forecast + alpha * error
        slope = phi * slope + beta * error
    return level, slope, sse, count


@njit(nogil=True, cache=True)
def _damped_grid(
    alphas: np.ndarray, betas: np.ndarray, phis: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Every (alpha, beta <= alpha, phi) of the grid, in the order the fit searches them."""
    size = 0
    for alpha in alphas:
        for beta in betas:
            if beta <= alpha:
                size += phis.shape[0]
    grid_alpha = np.empty(size)
    grid_beta = np.empty(size)
    grid_phi = np.empty(size)
    c = 0
    for alpha in alphas:
        for beta in betas:
            if beta > alpha:
                continue
            for phi in phis:
                grid_alpha[c] = alpha
                grid_beta[c] = beta
                grid_phi[c] = phi
                c += 1
    return grid_alpha, grid_beta, grid_phi


@njit(nogil=True, cache=True)
def damped_fit_serial(
    adjusted: np.ndarray,
    offsets: np.ndarray,
    active: np.ndarray,
    alphas: np.ndarray,
    betas: np.ndarray,
    phis: np.ndarray,
    out: np.ndarray,
) -> None:
    """``damped_fit_batch`` on the calling thread (for callers with threads of their own)."""
    grid_alpha, grid_beta, grid_phi = _damped_grid(alphas, betas, phis)
    for s in range(offsets.shape[0] - 1):
        _damped_fit_one(adjusted, offsets, active, grid_alpha, grid_beta, grid_phi, out, s)


@njit(nogil=True, parallel=True, cache=True)
def damped_fit_batch(
    adjusted: np.ndarray,
    offsets: np.ndarray,
    active: np.ndarray,
    alphas: np.ndarray,
    betas: np.ndarray,
    phis: np.ndarray,
    out: np.ndarray,
) -> None:
    """Fit the damped trend per active series by the smallest one-step squared error over a
    grid of (alpha, beta <= alpha, phi); start from the first value and first difference.

    ``out`` columns: alpha, beta, phi, final level, final slope, residual variance.
    """
    grid_alpha, grid_beta, grid_phi = _damped_grid(alphas, betas, phis)
    for s in prange(offsets.shape[0] - 1):
        _damped_fit_one(adjusted, offsets, active, grid_alpha, grid_beta, grid_phi, out, s)


@njit(nogil=True, cache=True)
def _damped_fit_one(
    adjusted: np.ndarray,
    offsets: np.ndarray,
    active: np.ndarray,
    grid_alpha: np.ndarray,
    grid_beta: np.ndarray,
    grid_phi: np.ndarray,
    out: np.ndarray,
    s: int,
) -> None:
    """Grid fit of one series (see ``damped_fit_batch``).

    Every grid point runs ``damped_path``'s recursion, but all of them advance together,
    one time step at a time: the inner loop over grid points has no branches and runs on
    the CPU's vector units (several times faster than one path after another). Each
    path's arithmetic, and so its result, is the same as ``damped_path``'s.
    """
    for c in range(6):
        out[s, c] = math.nan
    if not active[s]:
        return
    a = adjusted[offsets[s] : offsets[s + 1]]
    first = -1
    second = -1
    for i in range(a.shape[0]):
        if not math.isnan(a[i]):
            if first < 0:
                first = i
            elif second < 0:
                second = i
                break
    if second < 0:
        return
    size = grid_alpha.shape[0]
    level = np.full(size, a[first])
    slope = np.full(size, (a[second] - a[first]) / (second - first))
    sse = np.zeros(size)
    count = 0
    for i in range(first + 1, a.shape[0]):
        value = a[i]
        if math.isnan(value):
            for c in range(size):
                level[c] = level[c] + grid_phi[c] * slope[c]
                slope[c] = grid_phi[c] * slope[c]
            continue
        count += 1
        for c in range(size):
            forecast = level[c] + grid_phi[c] * slope[c]
            error = value - forecast
            sse[c] += error * error
            level[c] = forecast + grid_alpha[c] * error
            slope[c] = grid_phi[c] * slope[c] + grid_beta[c] * error
    best = -1
    smallest = math.inf
    for c in range(size):
        if sse[c] < smallest:  # the first of equal errors wins, as in the grid's order
            best = c
            smallest = sse[c]
    if best < 0:
        return
    out[s, 0] = grid_alpha[best]
    out[s, 1] = grid_beta[best]
    out[s, 2] = grid_phi[best]
    out[s, 3] = level[best]
    out[s, 4] = slope[best]
    out[s, 5] = sse[best] / max(count - 3, 1)


@njit(nogil=True, cache=True)
def walk_fit(
    adjusted: np.ndarray, offsets: np.ndarray, active: np.ndarray, out: np.ndarray
) -> None:
    """Random walks of the seasonally adjusted series, per active series, into ``out``
    columns: last observed value, steps from it to the series' end, drift (mean step
    between the first and last observed values), sd of the steps about the drift, sd of
    the steps about zero, number of observed values. NaN with fewer than three observed.
    """
    for s in range(offsets.shape[0] - 1):
        for c in range(out.shape[1]):
            out[s, c] = math.nan
        if not active[s]:
            continue
        a = adjusted[offsets[s] : offsets[s + 1]]
        first = -1
        last = -1
        seen = 0
        for i in range(a.shape[0]):
            if not math.isnan(a[i]):
                if first < 0:
                    first = i
                last = i
                seen += 1
        if seen < 3:
            continue
        drift = (a[last] - a[first]) / (last - first)
        steps = 0
        about_drift = 0.0
        about_zero = 0.0
        for i in range(1, a.shape[0]):
            if not (math.isnan(a[i]) or math.isnan(a[i - 1])):
                d = a[i] - a[i - 1]
                about_drift += (d - drift) ** 2
                about_zero += d * d
                steps += 1
        if steps < 2:
            continue
        out[s, 0] = a[last]
        out[s, 1] = a.shape[0] - 1 - last
        out[s, 2] = drift
        out[s, 3] = math.sqrt(about_drift / (steps - 1))
        out[s, 4] = math.sqrt(about_zero / steps)
        out[s, 5] = seen


@njit(nogil=True, cache=True)
def rows_by_series(values: np.ndarray, series: np.ndarray, level: float, out: np.ndarray) -> None:
    """Per series, over the finite entries of its rows of ``values`` (rows x columns; rows
    sorted by ``series``): their mean when ``level`` is negative, else the
    ceil((m + 1) level)-th smallest of the m entries (the largest when there are too few),
    the quantile split conformal prediction takes. NaN for a series with no entry."""
    for s in range(out.shape[0]):
        out[s] = math.nan
    start = 0
    rows = series.shape[0]
    while start < rows:
        stop = start
        while stop < rows and series[stop] == series[start]:
            stop += 1
        chosen = values[start:stop].ravel()
        chosen = chosen[np.isfinite(chosen)]
        m = chosen.shape[0]
        if m > 0:
            if level < 0:
                out[series[start]] = chosen.mean()
            else:
                rank = min(math.ceil((m + 1) * level), m)
                out[series[start]] = np.sort(chosen)[rank - 1]
        start = stop


@njit(nogil=True, cache=True)
def damped_run_serial(
    adjusted: np.ndarray,
    offsets: np.ndarray,
    active: np.ndarray,
    alpha: np.ndarray,
    beta: np.ndarray,
    phi: np.ndarray,
    out: np.ndarray,
) -> None:
    """``damped_fit_serial`` with the parameters given per series instead of searched:
    the same start, recursion and ``out`` columns."""
    for s in range(offsets.shape[0] - 1):
        _damped_fit_one(
            adjusted, offsets, active, alpha[s : s + 1], beta[s : s + 1], phi[s : s + 1], out, s
        )
