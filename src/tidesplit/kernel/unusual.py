"""The stepwise test of unusual points: departures from the neighbours, points set aside
by weight, and the generalized extreme Studentized deviate procedure. Flat layout."""

from __future__ import annotations

import math

import numpy as np
from numba import njit


@njit(nogil=True, cache=True)
def stepwise_extremes(
    remainder: np.ndarray,
    offsets: np.ndarray,
    active: np.ndarray,
    critical: np.ndarray,
    tests: np.ndarray,
    flagged: np.ndarray,
    score: np.ndarray,
) -> None:
    """Rosner's (1983) generalized extreme Studentized deviate procedure, per series.

    Of the observed remainders of a series, test up to ``tests[s]`` candidates: at step i
    the point farthest from the mean of those not yet removed, its distance in their sample
    standard deviations (R_i), is removed; ``critical[s, i]`` is the critical value
    lambda_i of the step. The points removed up to the last step with R_i > lambda_i are
    flagged. Every observed point gets the score (r - mean) / sd, mean and sd those of the
    unflagged points; NaN where the remainder is missing or the series is inactive.

    The farthest point from the mean is always the smallest or the largest left, so one
    sort and running sums give each step in constant time.
    """
    for s in range(offsets.shape[0] - 1):
        lo = offsets[s]
        hi = offsets[s + 1]
        for i in range(lo, hi):
            flagged[i] = False
            score[i] = math.nan
        if not active[s]:
            continue
        r = remainder[lo:hi]
        where = np.flatnonzero(~np.isnan(r))
        n = where.shape[0]
        if n < 3:
            continue
        order = where[np.argsort(r[where])]
        shift = r[order[n // 2]]  # sums about the median: no cancellation
        total = 0.0
        squares = 0.0
        for j in range(n):
            d = r[order[j]] - shift
            total += d
            squares += d * d
        low = 0
        high = n - 1
        found = 0
        removed = np.empty(max(tests[s], 1), dtype=np.int64)
        kept_total = total
        kept_squares = squares
        for step in range(tests[s]):
            m = n - step
            if m < 3:
                break
            mean = total / m
            var = (squares - total * mean) / (m - 1)
            if not var > 0.0:
                break
            below = mean - (r[order[low]] - shift)
            above = (r[order[high]] - shift) - mean
            if above >= below:
                pick = order[high]
                high -= 1
                distance = above
            else:
                pick = order[low]
                low += 1
                distance = below
            removed[step] = pick
            d = r[pick] - shift
            total -= d
            squares -= d * d
            if distance / math.sqrt(var) > critical[s, step]:
                found = step + 1
                kept_total = total
                kept_squares = squares
        for k in range(found):
            flagged[lo + removed[k]] = True
        m = n - found
        mean = kept_total / m
        var = (kept_squares - kept_total * mean) / (m - 1)
        sd = math.sqrt(var) if var > 0.0 else math.nan
        for j in range(n):
            i = where[j]
            score[lo + i] = (r[i] - shift - mean) / sd


@njit(nogil=True, cache=True)
def departure_from_neighbours(
    remainder: np.ndarray, offsets: np.ndarray, reach: int, out: np.ndarray
) -> None:
    """Each remainder less the median of the observed remainders within ``reach`` places on
    either side (NaN where the remainder is missing or no neighbour is observed).

    A lone spike departs from its neighbours by its full size; a run of high remainders
    (a level shift the trend has not caught up with yet) hardly departs from its own.
    """
    window = np.empty(2 * reach)
    for s in range(offsets.shape[0] - 1):
        lo = offsets[s]
        hi = offsets[s + 1]
        for i in range(lo, hi):
            out[i] = math.nan
            if math.isnan(remainder[i]):
                continue
            # insertion sort into a small buffer: np.sort here allocated once per point
            # and took most of the time
            k = 0
            for j in range(max(lo, i - reach), min(hi, i + reach + 1)):
                x = remainder[j]
                if j == i or math.isnan(x):
                    continue
                m = k
                while m > 0 and window[m - 1] > x:
                    window[m] = window[m - 1]
                    m -= 1
                window[m] = x
                k += 1
            if k == 0:
                continue
            middle = window[k // 2] if k % 2 else 0.5 * (window[k // 2 - 1] + window[k // 2])
            out[i] = remainder[i] - middle


@njit(nogil=True, cache=True)
def set_aside_points(
    remainder: np.ndarray, offsets: np.ndarray, below: float, out: np.ndarray
) -> None:
    """Per series, mark the points whose bisquare robustness weight, (1 - u^2)^2 with
    u = |remainder| / (6 median |remainder|) as in STL's robustness passes (Cleveland et
    al. 1990), is below ``below`` (missing remainders are not marked)."""
    for s in range(offsets.shape[0] - 1):
        lo = offsets[s]
        hi = offsets[s + 1]
        r = remainder[lo:hi]
        seen = np.abs(r[~np.isnan(r)])
        for i in range(lo, hi):
            out[i] = False
        if seen.shape[0] == 0:
            continue
        cut = 6.0 * np.median(seen)
        # weight < below  <=>  u^2 > 1 - sqrt(below)
        limit = cut * math.sqrt(1.0 - math.sqrt(below))
        for i in range(lo, hi):
            if not math.isnan(remainder[i]) and abs(remainder[i]) > limit:
                out[i] = True
