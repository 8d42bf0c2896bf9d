"""The median of the absolute residuals, which STL's robustness weights scale by."""

from __future__ import annotations

import math

import numpy as np
from numba import njit

# Ranges this short are finished by insertion sort.
SHORT = 16


@njit(nogil=True, cache=True)
def _select(a: np.ndarray, count: int, k: int) -> float:
    """The ``k``-th smallest of ``a[:count]`` (0-based), reordering ``a`` in place so that
    every value before position ``k`` is at most it.

    Quickselect with the partitions done without branches: the values below the pivot
    (the median of three) are swapped to the front one by one whatever each value is,
    the count advancing by the comparison's result; then, among the rest, those equal to
    it. Hoare's partition, with a branch per value, mispredicted about every other one on
    residuals (1.9 us for 120 values, 5% of a robust split). np.median copied and sorted
    the residuals on every robustness pass.
    """
    lo = 0
    hi = count
    while hi - lo > SHORT:
        x = a[lo]
        y = a[(lo + hi) // 2]
        z = a[hi - 1]
        pivot = max(min(x, y), min(max(x, y), z))
        below = lo
        for i in range(lo, hi):
            value = a[i]
            a[i] = a[below]
            a[below] = value
            below += value < pivot
        if k < below:
            hi = below
            continue
        equal = below
        for i in range(below, hi):
            value = a[i]
            a[i] = a[equal]
            a[equal] = value
            equal += value == pivot
        if k < equal:
            return pivot
        lo = equal
    for i in range(lo + 1, hi):
        value = a[i]
        j = i - 1
        while j >= lo and a[j] > value:
            a[j + 1] = a[j]
            j -= 1
        a[j + 1] = value
    return a[k]


@njit(nogil=True, cache=True)
def _median(a: np.ndarray, count: int) -> float:
    """Median of ``a[:count]`` (the mean of the middle two for an even count), as
    np.median gives it, NaN if any value is; reorders ``a``."""
    for i in range(count):
        if math.isnan(a[i]):
            return math.nan
    upper = _select(a, count, count // 2)
    if count % 2:
        return upper
    lower = a[0]
    for i in range(1, count // 2):
        if a[i] > lower:
            lower = a[i]
    return 0.5 * (lower + upper)


# The median of the previous robustness pass guides the next one: the k-th smallest value
# lies, nearly always, among the few values within this factor of it.
GUIDE_BAND = 1.2


@njit(nogil=True, cache=True)
def _median_guided(a: np.ndarray, count: int, guess: float) -> float:
    """``_median(a, count)``, found among the values near ``guess`` when they hold it.

    The median is an order statistic, so any exact way to find it gives the same bits.
    Hoare's selection mispredicts about every other branch on random data (1.5 us for 120
    values, a third of a robust split's time once its fits ran in lanes). The values within
    ``GUIDE_BAND`` of the previous pass's median are moved to the front without branches,
    and when the middle ranks fall among them only those few are selected from; else, or
    without a guess (NaN), the whole selection runs. Reorders ``a``.
    """
    if not guess > 0.0:
        return _median(a, count)
    low = guess / GUIDE_BAND
    high = guess * GUIDE_BAND
    below = 0
    inside = 0
    unordered = 0
    for i in range(count):
        x = a[i]
        below += x < low
        unordered += x != x
        # branch-free partition: values in the band gather at the front, in place
        a[i] = a[inside]
        a[inside] = x
        inside += (x >= low) & (x <= high)
    upper_rank = count // 2
    lower_rank = upper_rank if count % 2 else upper_rank - 1
    if unordered or lower_rank < below or upper_rank >= below + inside:
        return _median(a, count)
    k = upper_rank - below
    upper = _select(a, inside, k)
    if count % 2:
        return upper
    lower = a[0]
    for i in range(1, k):
        if a[i] > lower:
            lower = a[i]
    return 0.5 * (lower + upper)
