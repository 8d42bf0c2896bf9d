"""Regular grids of time codes, one pass per series (see ``tidesplit.calendar``)."""

from __future__ import annotations

import numpy as np
from numba import njit

FINE = 0
REPEATED = 1
UNEVEN = 2


@njit(nogil=True, cache=True)
def sorted_within(codes: np.ndarray, offsets: np.ndarray) -> bool:
    """Whether the codes of every series are in non-decreasing order.

    >>> sorted_within(np.array([1, 2, 0, 5]), np.array([0, 2, 4]))
    True
    """
    for s in range(offsets.shape[0] - 1):
        for i in range(offsets[s] + 1, offsets[s + 1]):
            if codes[i] < codes[i - 1]:
                return False
    return True


@njit(nogil=True, cache=True)
def fixed_grid(
    codes: np.ndarray,
    offsets: np.ndarray,
    active: np.ndarray,
    step: np.ndarray,
    first: np.ndarray,
    span: np.ndarray,
    problem: np.ndarray,
    where: np.ndarray,
    slots: np.ndarray,
) -> None:
    """Per active series: the step (smallest positive difference), the first code, the grid
    length, the grid slot of every row, and the first problem (a repeated code, or a
    difference that is not a whole number of steps) with the row where it shows."""
    big = np.iinfo(np.int64).max
    for s in range(offsets.shape[0] - 1):
        if not active[s]:
            continue
        lo = offsets[s]
        hi = offsets[s + 1]
        problem[s] = FINE
        where[s] = -1
        if hi == lo:
            step[s] = 1
            first[s] = 0
            span[s] = 0
            continue
        smallest = big
        for i in range(lo + 1, hi):
            d = codes[i] - codes[i - 1]
            if d == 0:
                if problem[s] == FINE:
                    problem[s] = REPEATED
                    where[s] = i
            elif 0 < d < smallest:
                smallest = d
        if smallest == big:
            smallest = 1
        step[s] = smallest
        first[s] = codes[lo]
        # slots step by one for consecutive rows; only gaps need a division
        slots[lo] = 0
        for i in range(lo + 1, hi):
            d = codes[i] - codes[i - 1]
            if d == smallest:
                slots[i] = slots[i - 1] + 1
            else:
                if d % smallest != 0 and problem[s] == FINE:
                    problem[s] = UNEVEN
                    where[s] = i
                slots[i] = slots[i - 1] + d // smallest
        span[s] = slots[hi - 1] + 1


@njit(nogil=True, cache=True)
def month_anchors(
    into_month: np.ndarray,
    month_end: np.ndarray,
    time_of_day: np.ndarray,
    offsets: np.ndarray,
    active: np.ndarray,
    by_month: np.ndarray,
    anchor: np.ndarray,
) -> None:
    """Per active series: whether every time sits at the same offset into its month, or
    every time is a month end at one time of day; ``anchor`` is that offset, or
    -1 - time of day for month ends."""
    for s in range(offsets.shape[0] - 1):
        by_month[s] = False
        lo = offsets[s]
        hi = offsets[s + 1]
        if not active[s] or hi - lo < 2:
            continue
        same = True
        ends = True
        same_tod = True
        for i in range(lo, hi):
            if into_month[i] != into_month[lo]:
                same = False
            if not month_end[i]:
                ends = False
            if time_of_day[i] != time_of_day[lo]:
                same_tod = False
        if same:
            by_month[s] = True
            anchor[s] = into_month[lo]
        elif ends and same_tod:
            by_month[s] = True
            anchor[s] = -1 - time_of_day[lo]
