"""Loess building blocks of STL, compiled with numba.

Positions are the integers ``0 .. n-1``; a missing observation is a NaN in ``y`` and a zero
in the point weights ``pw``. Each function mirrors one step of Cleveland, Cleveland, McRae &
Terpenning (1990), section 2, as it is spelled out in the authors' reference routines that
were published with the paper (where the two differ, we follow the routines, as statsmodels
does, and say so beside the line).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

# Tricube and bisquare cut-offs of the reference routines: a distance below 0.001 of the
# bandwidth gets weight 1 exactly, one above 0.999 gets weight 0.
NEAR = 0.001
FAR = 0.999


@njit(nogil=True, cache=True)
def fit_at(
    y: np.ndarray,
    pw: np.ndarray,
    n: int,
    span: int,
    degree: int,
    xs: float,
    nleft: int,
    nright: int,
) -> tuple[float, bool]:
    """Local regression of degree 0 or 1 at position ``xs`` over ``y[nleft..nright]``.

    Tricube weights of the distance, times the point weights ``pw`` (robustness times
    presence). Returns the fitted value and whether any point had weight (paper, eq. 2.1).

    One pass accumulates the weighted moments in coordinates centred on ``xs``; the fitted
    value of the weighted line follows from them. This is the reference routines' fit
    (normalise the weights, shift them by the slope term, sum) rearranged so that nothing
    is stored, which makes it several times faster; it agrees to rounding.
    """
    full_range = n - 1.0
    h = max(xs - nleft, nright - xs)
    if span > n:
        # Reference routines: a span longer than the series widens the bandwidth by half
        # the excess (the paper's text only says "multiply by (q/n)").
        h += (span - n) // 2
    h_far = FAR * h
    h_near = NEAR * h
    inv_h = 1.0 / h if h > 0.0 else 0.0
    total = 0.0  # sum w
    first = 0.0  # sum w u, with u = j - xs
    second = 0.0  # sum w u^2
    value = 0.0  # sum w y
    cross = 0.0  # sum w y u
    for j in range(nleft, nright + 1):
        u = j - xs
        r = abs(u)
        if r <= h_far:
            if r <= h_near:
                wj = pw[j]
            else:
                q = r * inv_h
                q = 1.0 - q * q * q
                wj = q * q * q * pw[j]
            if wj != 0.0:  # a missing y (NaN) always has weight 0 and must not poison sums
                total += wj
                first += wj * u
                second += wj * u * u
                value += wj * y[j]
                cross += wj * y[j] * u
    if total <= 0.0:
        return 0.0, False
    mean_y = value / total
    if h > 0.0 and degree > 0:
        centre = first / total
        spread = second / total - centre * centre
        if math.sqrt(max(spread, 0.0)) > NEAR * full_range:
            # line through the weighted centre, evaluated at u = 0
            slope = (cross / total - centre * mean_y) / spread
            return mean_y - slope * centre, True
    return mean_y, True


@njit(nogil=True, cache=True)
def fill_unfitted(ys: np.ndarray, n: int) -> None:
    """Linear interpolation over NaN runs of ``ys[:n]``; ends carry the nearest value.

    A loess fit at a missing point whose whole neighbourhood is missing has nothing to fit;
    the paper leaves such points to interpolation of the fitted curve.
    """
    last = -1
    for i in range(n):
        if not math.isnan(ys[i]):
            if last == -1 and i > 0:
                for j in range(i):
                    ys[j] = ys[i]
            elif last >= 0 and i - last > 1:
                step = (ys[i] - ys[last]) / (i - last)
                for j in range(last + 1, i):
                    ys[j] = ys[last] + step * (j - last)
            last = i
    if last >= 0:
        for j in range(last + 1, n):
            ys[j] = ys[last]


@njit(nogil=True, cache=True)
def smooth(
    y: np.ndarray,
    pw: np.ndarray,
    n: int,
    span: int,
    degree: int,
    jump: int,
    ys: np.ndarray,
) -> None:
    """Loess smoothing of ``y[:n]`` into ``ys[:n]``, fitted every ``jump``-th point.

    Points between fits are linearly interpolated (paper, section 2.6 on computation).
    """
    if n < 2:
        ys[0] = y[0]
        return
    step = min(jump, n - 1)
    any_unfitted = False
    nleft = 0
    nright = n - 1
    if span >= n:
        for i in range(0, n, step):
            value, ok = fit_at(y, pw, n, span, degree, float(i), nleft, nright)
            ys[i] = value if ok else y[i]
    elif step == 1:
        half = (span + 1) // 2
        nright = span - 1
        for i in range(n):
            if i >= half and nright != n - 1:
                nleft += 1
                nright += 1
            value, ok = fit_at(y, pw, n, span, degree, float(i), nleft, nright)
            ys[i] = value if ok else y[i]
    else:
        half = (span + 1) // 2
        for i in range(0, n, step):
            if i + 1 < half:
                nleft = 0
                nright = span - 1
            elif i + 1 >= n - half + 1:
                nleft = n - span
                nright = n - 1
            else:
                nleft = i + 1 - half
                nright = span + i - half
            value, ok = fit_at(y, pw, n, span, degree, float(i), nleft, nright)
            ys[i] = value if ok else y[i]
    if step != 1:
        for i in range(0, n - step, step):
            delta = (ys[i + step] - ys[i]) / step
            for j in range(i + 1, i + step):
                ys[j] = ys[i] + delta * (j - i)
        last_fit = ((n - 1) // step) * step
        if last_fit != n - 1:
            # Reference routines: the last point is fitted with the neighbourhood left
            # over from the final jump, then the tail is interpolated.
            value, ok = fit_at(y, pw, n, span, degree, float(n - 1), nleft, nright)
            ys[n - 1] = value if ok else y[n - 1]
            if last_fit != n - 2:
                delta = (ys[n - 1] - ys[last_fit]) / (n - 1 - last_fit)
                for j in range(last_fit + 1, n - 1):
                    ys[j] = ys[last_fit] + delta * (j - last_fit)
    for i in range(n):
        if math.isnan(ys[i]):
            any_unfitted = True
            break
    if any_unfitted:
        fill_unfitted(ys, n)
