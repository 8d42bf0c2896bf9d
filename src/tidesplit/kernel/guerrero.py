"""Guerrero's (1993) choice of the Box-Cox lambda, per series, compiled with numba.

Guerrero, V. M. (1993), "Time-series analysis supported by power transformations", Journal of
Forecasting 12: split the series into consecutive subseries of one period each, and choose
lambda to minimise the coefficient of variation of ``sd_h / mean_h ** (1 - lambda)`` over
the subseries ``h``.

The subseries are whole cycles counted back from the newest point, so the newest data
always counts; the oldest points left over (fewer than one period) are left out, because
the mean and sd of part of a cycle depend on which seasons it holds, not only on the
level the method compares them with.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

# The default search interval: from the log (0, a multiplicative split) to no transform
# (1, an additive split), the two readings an analyst goes between.
LOWER = 0.0
UPPER = 1.0
_GOLDEN = (math.sqrt(5.0) - 1.0) / 2.0
_TOLERANCE = 1e-7


@njit(nogil=True, cache=True)
def block_moments(y: np.ndarray, period: int, means: np.ndarray, sds: np.ndarray) -> int:
    """Mean and sample sd of each complete block of ``period`` points (NaN skipped), the
    blocks counted back from the last point (oldest block first; the oldest points left
    over, fewer than a period, are left out).

    Blocks with fewer than two observed points are left out. Returns how many were kept.
    """
    kept = 0
    start = y.shape[0] % period
    for b in range(y.shape[0] // period):
        total = 0.0
        count = 0
        first = start + b * period
        for i in range(first, first + period):
            if not math.isnan(y[i]):
                total += y[i]
                count += 1
        if count < 2:
            continue
        mean = total / count
        squares = 0.0
        for i in range(first, first + period):
            if not math.isnan(y[i]):
                squares += (y[i] - mean) ** 2
        means[kept] = mean
        sds[kept] = math.sqrt(squares / (count - 1))
        kept += 1
    return kept


@njit(nogil=True, cache=True)
def objective(lam: float, means: np.ndarray, sds: np.ndarray, count: int) -> float:
    """Coefficient of variation (sample sd / mean) of ``sd_h / mean_h ** (1 - lam)``."""
    total = 0.0
    for h in range(count):
        total += sds[h] / means[h] ** (1.0 - lam)
    centre = total / count
    squares = 0.0
    for h in range(count):
        squares += (sds[h] / means[h] ** (1.0 - lam) - centre) ** 2
    return math.sqrt(squares / (count - 1)) / centre


@njit(nogil=True, cache=True)
def _minimise(means: np.ndarray, sds: np.ndarray, count: int, lower: float, upper: float) -> float:
    """Golden-section search of the objective over [lower, upper]; a minimum within the
    search's tolerance of a bound is that bound exactly."""
    a = lower
    b = upper
    c = b - _GOLDEN * (b - a)
    d = a + _GOLDEN * (b - a)
    fc = objective(c, means, sds, count)
    fd = objective(d, means, sds, count)
    while b - a > _TOLERANCE:
        if fc < fd:
            b = d
            d = c
            fd = fc
            c = b - _GOLDEN * (b - a)
            fc = objective(c, means, sds, count)
        else:
            a = c
            c = d
            fc = fd
            d = a + _GOLDEN * (b - a)
            fd = objective(d, means, sds, count)
    found = 0.5 * (a + b)
    if found - lower < 10 * _TOLERANCE:
        return lower
    if upper - found < 10 * _TOLERANCE:
        return upper
    return found


@njit(nogil=True, cache=True)
def guerrero_batch(
    values: np.ndarray,
    offsets: np.ndarray,
    periods: np.ndarray,
    active: np.ndarray,
    bounds: np.ndarray,
    out: np.ndarray,
) -> None:
    """Lambda per active series into ``out``, searched within ``bounds[s]`` (lower, upper);
    NaN with fewer than two blocks or no spread."""
    for s in range(offsets.shape[0] - 1):
        out[s] = np.nan
        if not active[s]:
            continue
        y = values[offsets[s] : offsets[s + 1]]
        blocks = y.shape[0] // periods[s] + 1
        means = np.empty(blocks)
        sds = np.empty(blocks)
        count = block_moments(y, periods[s], means, sds)
        spread = 0.0
        for h in range(count):
            spread += sds[h]
        if count >= 2 and spread > 0.0:
            out[s] = _minimise(means, sds, count, bounds[s, 0], bounds[s, 1])
