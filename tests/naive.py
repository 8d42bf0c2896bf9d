"""A slow, literal STL written straight from the paper's steps, for checking the kernel.

Cleveland, Cleveland, McRae & Terpenning (1990), "STL: A Seasonal-Trend Decomposition
Procedure Based on Loess", Journal of Official Statistics 6(1), section 2: the inner loop
(detrend, cycle-subseries smoothing, low-pass filtering, detrend the seasonal,
deseasonalise, trend smoothing) and the outer loop (robustness weights). Each loess fit is a
weighted least-squares problem solved with numpy on the q nearest points, not the reference
routines' running-update form, so agreement with the kernel is a real check. Where the paper
leaves details to its reference routines we take those (the bandwidth of a span longer than
the series, the 0.001 / 0.999 cut-offs, the two extra subseries points). Missing values
(NaN) get weight zero; a point whose neighbourhood has no weight is interpolated from the
fitted curve.
"""

from __future__ import annotations

import numpy as np


def tricube(u: np.ndarray) -> np.ndarray:
    w = np.where(u <= 0.001, 1.0, (1 - u**3) ** 3)
    return np.where(u <= 0.999, w, 0.0)


def bisquare(u: np.ndarray) -> np.ndarray:
    w = np.where(u <= 0.001, 1.0, (1 - u**2) ** 2)
    return np.where(u <= 0.999, w, 0.0)


def loess_at(
    y: np.ndarray, pw: np.ndarray, x: float, q: int, degree: int, near: float | None = None
) -> float:
    """The loess value at x from the q points nearest to ``near`` (default x) of 0..n-1.

    NaN when no point has weight.
    """
    n = y.size
    positions = np.arange(n)
    near = x if near is None else near
    if q >= n:
        window = positions
    else:
        # q nearest points; for x outside the series, the q first or last ones
        left = int(min(max(round(near) - (q - 1) // 2, 0), n - q))
        window = positions[left : left + q]
    h = np.abs(window - x).max()
    if q > n:
        h += (q - n) // 2
    u = np.abs(window - x) / h if h > 0 else np.zeros(window.size)
    w = tricube(u) * pw[window]
    if w.sum() <= 0:
        return np.nan
    w = w / w.sum()
    yw = np.where(w > 0, y[window], 0.0)
    if degree == 0 or h <= 0:
        return float(np.sum(w * yw))
    centre = np.sum(w * window)
    spread = np.sum(w * (window - centre) ** 2)
    if np.sqrt(spread) <= 0.001 * (n - 1):
        return float(np.sum(w * yw))  # the reference routines' guard: too little spread
    slope = np.sum(w * (window - centre) * yw) / spread
    return float(np.sum(w * yw) + slope * (x - centre))


def loess(y: np.ndarray, pw: np.ndarray, q: int, degree: int, jump: int) -> np.ndarray:
    """Loess at every jump-th point and the last, linear interpolation between them."""
    n = y.size
    if n == 1:
        return y.copy()
    step = min(jump, n - 1)
    at = list(range(0, n, step))
    fitted = [loess_at(y, pw, i, q, degree) for i in at]
    if at[-1] != n - 1:
        # The reference routines fit the last point on the neighbourhood of the last
        # jump point (it differs from the last point's own only when jump > span / 2).
        fitted.append(loess_at(y, pw, n - 1, q, degree, near=at[-1]))
        at.append(n - 1)
    fitted = np.array(fitted)
    unfit = np.isnan(fitted) & ~np.isnan(y[at])
    fitted[unfit] = y[at][unfit]  # no weight at an observed point: keep the observation
    out = np.interp(np.arange(n), at, fitted) if step > 1 else fitted
    if np.isnan(out).any():
        good = ~np.isnan(out)
        out = np.interp(np.arange(n), np.flatnonzero(good), out[good])
    return out


def cycle_subseries(d: np.ndarray, pw: np.ndarray, p: int, q: int, degree: int, jump: int):
    """Step 2: smooth each cycle-subseries, with one extra point before and after it."""
    n = d.size
    out = np.empty(n + 2 * p)
    for phase in range(p):
        sub = d[phase::p]
        sw = pw[phase::p]
        k = sub.size
        if q == 0:  # infinite span: the weighted mean, the same at every position
            good = sw > 0
            level = np.sum(sw[good] * sub[good]) / np.sum(sw[good])
            values = np.full(k + 2, level)
        else:
            inner = loess(sub, sw, q, degree, jump)
            before = loess_at(sub, sw, -1.0, q, degree)
            after = loess_at(sub, sw, float(k), q, degree)
            before = inner[0] if np.isnan(before) else before
            after = inner[-1] if np.isnan(after) else after
            values = np.concatenate(([before], inner, [after]))
        out[phase::p][: k + 2] = values
    return out


def moving_average(x: np.ndarray, length: int) -> np.ndarray:
    return np.convolve(x, np.ones(length) / length, mode="valid")


def stl(
    y,
    period,
    season_span,
    trend_span,
    lowpass_span,
    season_degree=1,
    trend_degree=1,
    lowpass_degree=1,
    season_jump=1,
    trend_jump=1,
    lowpass_jump=1,
    inner=2,
    outer=0,
):
    """Trend, seasonal and robustness weights of y (NaN marks missing values)."""
    y = np.asarray(y, dtype=float)
    n = y.size
    present = ~np.isnan(y)
    rw = present.astype(float)
    trend = np.zeros(n)
    seasonal = np.zeros(n)
    for it in range(outer + 1):
        for _ in range(inner):
            cycle = cycle_subseries(y - trend, rw, period, season_span, season_degree, season_jump)
            low = moving_average(moving_average(moving_average(cycle, period), period), 3)
            low = loess(low, np.ones(n), lowpass_span, lowpass_degree, lowpass_jump)
            seasonal = cycle[period : period + n] - low
            trend = loess(y - seasonal, rw, trend_span, trend_degree, trend_jump)
        if it < outer:
            r = np.abs(y - trend - seasonal)
            h = 6 * np.median(r[present])
            rw = np.where(present, bisquare(np.where(present, r, 0.0) / h), 0.0)
    return trend, seasonal, rw
