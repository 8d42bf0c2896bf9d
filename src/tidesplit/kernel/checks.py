"""One pass over a batch that finds, per series, the first reason it cannot be split.

Doing every check in one compiled loop keeps the checks cheap next to the split itself.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

# Reason codes, in the order they are checked.
FINE = 0
REPEATED_TIME = 1
TOO_SHORT = 2
INFINITE = 3
NOT_POSITIVE = 4
ALL_MISSING = 5
PHASE_UNSEEN = 6


@njit(nogil=True, cache=True)
def scan_batch(
    values: np.ndarray,
    offsets: np.ndarray,
    times: np.ndarray,
    periods: np.ndarray,
    needs_positive: np.ndarray,
    todo: np.ndarray,
    code: np.ndarray,
    where: np.ndarray,
) -> None:
    """For each series with ``todo`` set: ``code`` (a reason above) and ``where`` (the
    offending position in the series, or the unseen cycle position).

    ``times`` is empty when there are no times to check.
    """
    check_times = times.shape[0] > 0
    for s in range(offsets.shape[0] - 1):
        code[s] = FINE
        where[s] = -1
        if not todo[s]:
            continue
        lo = offsets[s]
        n = offsets[s + 1] - lo
        period = periods[s]
        if check_times:
            for i in range(1, n):
                if times[lo + i] == times[lo + i - 1]:
                    code[s] = REPEATED_TIME
                    where[s] = i
                    break
            if code[s] != FINE:
                continue
        if n < 2 * period:
            code[s] = TOO_SHORT
            continue
        observed = 0
        for i in range(n):
            v = values[lo + i]
            if math.isnan(v):
                continue
            observed += 1
            if math.isinf(v):
                code[s] = INFINITE
                where[s] = i
                break
            if needs_positive[s] and v <= 0.0:
                code[s] = NOT_POSITIVE
                where[s] = i
                break
        if code[s] != FINE:
            continue
        if observed == 0:
            code[s] = ALL_MISSING
            continue
        for phase in range(period):
            seen = False
            for i in range(phase, n, period):
                if not math.isnan(values[lo + i]):
                    seen = True
                    break
            if not seen:
                code[s] = PHASE_UNSEEN
                where[s] = phase
                break
