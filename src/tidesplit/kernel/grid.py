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
def sort_within(
    codes: np.ndarray, values: np.ndarray, offsets: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Each series' rows in order of their codes, ties in the order they came (a stable
    sort, as ``np.lexsort((codes, series))`` gives): the input row of each sorted row, and
    the codes and values sorted.

    A series in order is taken as it is; one whose codes are distinct and fill a range
    (a regular grid without gaps, the usual case) has each row put in its place in one
    pass; the others are sorted on their own. DuckDB's ``list()`` hands long series back
    as several sorted runs, and for such calls (a million points) one ``np.lexsort`` and
    numpy's gathers and scatters took 0.14 s, holding the GIL, against a kernel of 0.7 s.

    >>> order, codes, values = sort_within(
    ...     np.array([2, 1, 5, 7, 5]), np.array([0.2, 0.1, 0.5, 0.7, 0.6]), np.array([0, 2, 5]))
    >>> order.tolist(), codes.tolist(), values.tolist()
    ([1, 0, 2, 4, 3], [1, 2, 5, 5, 7], [0.1, 0.2, 0.5, 0.6, 0.7])
    """
    order = np.empty(codes.shape[0], dtype=np.int64)
    for s in range(offsets.shape[0] - 1):
        lo = offsets[s]
        hi = offsets[s + 1]
        ordered = True
        low = codes[lo] if hi > lo else 0
        high = low
        for i in range(lo + 1, hi):
            ordered &= codes[i] >= codes[i - 1]
            low = min(low, codes[i])
            high = max(high, codes[i])
        if ordered:
            for i in range(lo, hi):
                order[i] = i
            continue
        span = high - low  # negative only where the subtraction wrapped around
        placed = span >= 0 and span == hi - lo - 1  # as many slots as rows
        if placed:
            order[lo:hi] = -1
            for i in range(lo, hi):
                slot = lo + codes[i] - low
                if order[slot] != -1:  # a repeated code: not one row per slot
                    placed = False
                    break
                order[slot] = i
        if not placed:
            order[lo:hi] = lo + np.argsort(codes[lo:hi], kind="mergesort")
    sorted_codes = np.empty_like(codes)
    sorted_values = np.empty_like(values)
    for i in range(codes.shape[0]):
        sorted_codes[i] = codes[order[i]]
        sorted_values[i] = values[order[i]]
    return order, sorted_codes, sorted_values


@njit(nogil=True, cache=True)
def place(order: np.ndarray, sorted_rows: np.ndarray, out: np.ndarray) -> None:
    """``out[order] = sorted_rows``: values of the sorted rows back at their input rows.

    >>> out = np.empty(3)
    >>> place(np.array([2, 0, 1]), np.array([1.0, 2.0, 3.0]), out)
    >>> out.tolist()
    [2.0, 3.0, 1.0]
    """
    for i in range(order.shape[0]):
        out[order[i]] = sorted_rows[i]


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
