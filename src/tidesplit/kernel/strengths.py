"""Per-series summaries of split components: strengths, cycle shape and remainder
fences. Flat layout, NaN for missing, as elsewhere."""

from __future__ import annotations

import math

import numpy as np
from numba import njit


@njit(nogil=True, cache=True)
def _variance(x: np.ndarray, y: np.ndarray, use_y: bool) -> float:
    """Sample variance of x (+ y) over the points where both are defined."""
    count = 0
    total = 0.0
    for i in range(x.shape[0]):
        v = x[i] + (y[i] if use_y else 0.0)
        if not math.isnan(v):
            count += 1
            total += v
    if count < 2:
        return math.nan
    mean = total / count
    squares = 0.0
    for i in range(x.shape[0]):
        v = x[i] + (y[i] if use_y else 0.0)
        if not math.isnan(v):
            squares += (v - mean) ** 2
    return squares / (count - 1)


@njit(nogil=True, cache=True)
def strength(component: np.ndarray, remainder: np.ndarray) -> float:
    """max(0, 1 - Var(R) / Var(C + R)) over the points where R is defined (Wang, Smith &
    Hyndman 2006)."""
    joint = _variance(component, remainder, True)
    if not joint > 0.0:
        return math.nan
    return max(0.0, 1.0 - _variance(remainder, remainder, False) / joint)


@njit(nogil=True, cache=True)
def series_summary(
    trend: np.ndarray,
    seasonal: np.ndarray,
    remainder: np.ndarray,
    weight: np.ndarray,
    offsets: np.ndarray,
    periods: np.ndarray,
    active: np.ndarray,
    out: np.ndarray,
    peak: np.ndarray,
    trough: np.ndarray,
) -> None:
    """Per active series, into ``out`` columns: trend strength, seasonal strength, seasonal
    amplitude (range of the mean seasonal by cycle position), remainder sd, share of points
    with robustness weight below 0.5, lag-1 autocorrelation of the remainder; and the cycle
    positions of the seasonal peak and trough."""
    for s in range(offsets.shape[0] - 1):
        for c in range(out.shape[1]):
            out[s, c] = math.nan
        peak[s] = -1
        trough[s] = -1
        if not active[s]:
            continue
        lo = offsets[s]
        hi = offsets[s + 1]
        t = trend[lo:hi]
        se = seasonal[lo:hi]
        r = remainder[lo:hi]
        out[s, 0] = strength(t, r)
        out[s, 1] = strength(se, r)
        p = periods[s]
        sums = np.zeros(p)
        for i in range(hi - lo):
            sums[i % p] += se[i]
        counts = np.zeros(p)
        for i in range(hi - lo):
            counts[i % p] += 1.0
        best = 0
        worst = 0
        for k in range(p):
            sums[k] /= counts[k]
            if sums[k] > sums[best]:
                best = k
            if sums[k] < sums[worst]:
                worst = k
        peak[s] = best
        trough[s] = worst
        out[s, 2] = sums[best] - sums[worst]
        var_r = _variance(r, r, False)
        out[s, 3] = math.sqrt(var_r) if var_r == var_r else math.nan
        low = 0
        seen = 0
        for i in range(lo, hi):
            if not math.isnan(weight[i]):
                seen += 1
                if weight[i] < 0.5:
                    low += 1
        out[s, 4] = low / seen if seen else math.nan
        # lag-1 autocorrelation over consecutive defined pairs, about the overall mean
        total = 0.0
        count = 0
        for i in range(hi - lo):
            if not math.isnan(r[i]):
                total += r[i]
                count += 1
        if count > 2:
            mean = total / count
            num = 0.0
            den = 0.0
            for i in range(hi - lo):
                if not math.isnan(r[i]):
                    den += (r[i] - mean) ** 2
                    if i > 0 and not math.isnan(r[i - 1]):
                        num += (r[i] - mean) * (r[i - 1] - mean)
            out[s, 5] = num / den if den > 0 else math.nan


@njit(nogil=True, cache=True)
def remainder_fences(
    remainder: np.ndarray,
    offsets: np.ndarray,
    method: int,
    k: float,
    active: np.ndarray,
    out: np.ndarray,
) -> None:
    """Per active series, into ``out`` columns: lower fence, upper fence, centre, scale.

    method 0 (IQR): fences Q1 - k IQR and Q3 + k IQR, centre the median, scale the IQR;
    method 1 (MAD): centre the median, scale 1.4826 MAD, fences centre -/+ k scale.
    Quartiles interpolate linearly between order statistics (numpy's default).
    """
    for s in range(offsets.shape[0] - 1):
        for c in range(4):
            out[s, c] = math.nan
        if not active[s]:
            continue
        r = remainder[offsets[s] : offsets[s + 1]]
        values = r[~np.isnan(r)]
        if values.shape[0] < 4:
            continue
        values = np.sort(values)
        centre = np.quantile(values, 0.5)
        if method == 0:
            q1 = np.quantile(values, 0.25)
            q3 = np.quantile(values, 0.75)
            scale = q3 - q1
            out[s, 0] = q1 - k * scale
            out[s, 1] = q3 + k * scale
        else:
            scale = 1.4826 * np.median(np.abs(values - centre))
            out[s, 0] = centre - k * scale
            out[s, 1] = centre + k * scale
        out[s, 2] = centre
        out[s, 3] = scale


@njit(nogil=True, cache=True)
def detrended_autocorrelations(y: np.ndarray, top: int, acf: np.ndarray) -> bool:
    """Autocorrelations at lags ``0 .. top + 1`` of ``y`` (complete, finite) less its
    least-squares line, into ``acf``; False when nothing is left once the line is gone.

    Plain sums in index order, so the numbers depend on the series alone (BLAS's dot product
    does not promise that); the series is divided by its largest size first, so that values
    up to 1e308 do not overflow the squares.
    """
    n = y.shape[0]
    size = 0.0
    for i in range(n):
        size = max(size, abs(y[i]))
    if not size > 0.0:
        return False
    mean_t = (n - 1) / 2.0
    mean_y = 0.0
    for i in range(n):
        mean_y += y[i] / size
    mean_y /= n
    cross = 0.0
    spread = 0.0
    for i in range(n):
        cross += (i - mean_t) * (y[i] / size - mean_y)
        spread += (i - mean_t) ** 2
    slope = cross / spread
    z = np.empty(n)
    for i in range(n):
        z[i] = y[i] / size - (mean_y + slope * (i - mean_t))
    denom = 0.0
    for i in range(n):
        denom += z[i] * z[i]
    if not denom > 0.0:
        return False
    for k in range(top + 2):
        total = 0.0
        for i in range(n - k):
            total += z[i] * z[i + k]
        acf[k] = total / denom
    return True
