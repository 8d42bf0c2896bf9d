"""Per-series summaries of split components: strengths, cycle shape, remainder fences and
forecasts of the seasonally adjusted series. Flat layout, NaN for missing, as elsewhere."""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange


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
            k = 0
            for j in range(max(lo, i - reach), min(hi, i + reach + 1)):
                if j != i and not math.isnan(remainder[j]):
                    window[k] = remainder[j]
                    k += 1
            if k == 0:
                continue
            ordered = np.sort(window[:k])
            middle = ordered[k // 2] if k % 2 else 0.5 * (ordered[k // 2 - 1] + ordered[k // 2])
            out[i] = remainder[i] - middle


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
