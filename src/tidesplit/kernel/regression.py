"""Regression effects beside STL: calendar design columns, weighted least squares per series,
and the backfitting loop that alternates the two.

The model is ``value = X b + trend + seasonal + remainder``. It is fitted by backfitting
(Hastie & Tibshirani 1990, *Generalized Additive Models*, chapter 4 (from memory)): split
``value - X b`` with STL, regress ``value - trend - seasonal`` on ``X``, and repeat until
``b`` settles (``backfit``). With a robust split the robustness loop runs outside the
backfitting, each pass with its weights held fixed (``robust_batch``). Calendar
columns follow the regression approach to trading-day and moving-holiday effects of
Bell & Hillmer (1983), "Modeling time series with calendar variation", JASA 78, 526-534:
weekday counts in contrast form (each weekday's count minus Sunday's, so that the seven
daily effects sum to zero over a week), a length-of-period term, and the share of a window
of ``w`` days before Easter that falls in each period.

Days are whole days since 1970-01-01 (a Thursday). Nothing here knows of tables: the fronts
hand over day numbers, Easter days and flat arrays. The compiled loops run on the calling
thread (no numba threads): they cost little beside the split, and a database calls them
from several threads at once.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from numba import get_num_threads, njit, prange

from . import linear
from .layout import COL_ACTIVE, COL_OUTER, COL_PERIOD
from .stl import _robustness_weights, buffer_size, inner_passes_given_weights
from .threads import launch

# What the screening of a column found, per series and column.
KEPT = 0
ABSENT = 1  # the column does not apply to this series (the front says why)
NO_VARIATION = 2  # constant, or the same in every cycle: the trend or seasonal part holds it
COLLINEAR = 3  # a combination of the columns kept before it
TOO_FEW = 4  # fewer observed points than the columns and the split need

# How the covariance of the coefficients is estimated (``_fit_one``).
PLAIN_COVARIANCE = 0  # residual variance times (X' W X)^-1
SANDWICH_COVARIANCE = 1  # the bisquare M-estimate's sandwich, scaled by points / dof
HUBER_COVARIANCE = 2  # Huber's corrected form for M-estimates (see _fit_one)
# What robust fits report: of the forms compared on simulated series (README, "Calendar
# effects"; tests/test_effects.py), the one whose coverage came nearest the normal's.
ROBUST_COVARIANCE = HUBER_COVARIANCE

# Relative size below which a column counts as having nothing left after projection.
_TINY = 1e-9

WEEKDAYS = ("monday", "tuesday", "wednesday", "thursday", "friday", "saturday", "sunday")


def weekday_counts(first_day: np.ndarray, last_day: np.ndarray) -> np.ndarray:
    """How many Mondays, Tuesdays, ..., Sundays each period ``[first_day, last_day]`` holds.

    Parameters
    ----------
    first_day, last_day : int arrays
        The first and last day of each period (inclusive), in days since 1970-01-01.

    Returns
    -------
    ndarray of shape (periods, 7)
        Counts, Monday first.

    Examples
    --------
    >>> may_2020 = np.datetime64("2020-05-01").astype(int)  # a Friday, 31 days
    >>> weekday_counts(np.array([may_2020]), np.array([may_2020 + 30])).tolist()
    [[4, 4, 4, 4, 5, 5, 5]]
    """
    first = np.asarray(first_day, dtype=np.int64)[:, None]
    last = np.asarray(last_day, dtype=np.int64)[:, None]
    # day d is a Monday when (d + 3) % 7 == 0 (1970-01-01 was a Thursday)
    residue = (np.arange(7, dtype=np.int64) - 3) % 7
    return (last - residue) // 7 - (first - 1 - residue) // 7


def trading_day_columns(first_day: np.ndarray, last_day: np.ndarray) -> np.ndarray:
    """Six weekday contrasts (Monday to Saturday, each minus Sunday) and the period's length.

    The contrasts make the effect of a week sum to zero: the coefficient of Sunday is minus
    the sum of the six others (Bell & Hillmer 1983). Centring per position in the year is
    left to the caller (``centre_by_position``).

    >>> jan_2021 = np.datetime64("2021-01-01").astype(int)  # a Friday
    >>> trading_day_columns(np.array([jan_2021]), np.array([jan_2021 + 30])).tolist()
    [[-1.0, -1.0, -1.0, -1.0, 0.0, 0.0, 31.0]]
    """
    counts = weekday_counts(first_day, last_day).astype(np.float64)
    out = np.empty((counts.shape[0], 7))
    out[:, :6] = counts[:, :6] - counts[:, 6:7]
    out[:, 6] = np.asarray(last_day) - np.asarray(first_day) + 1
    return out


def easter_shares(
    first_day: np.ndarray, last_day: np.ndarray, easter_day: np.ndarray, window: int
) -> np.ndarray:
    """The share of the ``window`` days before Easter Sunday (Easter itself left out) that
    falls in each period (Bell & Hillmer 1983).

    Parameters
    ----------
    first_day, last_day : int arrays
        Each period's first and last day (inclusive), days since 1970-01-01.
    easter_day : int array
        Easter Sundays (days since 1970-01-01) of every year the periods touch, any order.
    window : int
        Days before Easter that the effect lasts, at least 1.

    Examples
    --------
    >>> easter = np.array([np.datetime64("2024-03-31").astype(int)])
    >>> march = np.datetime64("2024-03-01").astype(int)
    >>> easter_shares(np.array([march]), np.array([march + 30]), easter, 8).tolist()
    [1.0]
    """
    first = np.asarray(first_day, dtype=np.int64)[:, None]
    last = np.asarray(last_day, dtype=np.int64)[:, None]
    starts = np.asarray(easter_day, dtype=np.int64)[None, :] - window
    ends = np.asarray(easter_day, dtype=np.int64)[None, :] - 1
    overlap = np.minimum(last, ends) - np.maximum(first, starts) + 1
    return np.clip(overlap, 0, None).sum(axis=1) / float(window)


@njit(nogil=True, cache=True)
def _screen_one(
    X: np.ndarray,
    seen: np.ndarray,
    lo: int,
    hi: int,
    period: int,
    extra: float,
    verdict: np.ndarray,
) -> None:
    """Screen one series' columns in order (see ``screen_batch``)."""
    n = hi - lo
    k = X.shape[1]
    p = max(period, 1)
    observed = 0
    for i in range(n):
        if seen[lo + i]:
            observed += 1
    basis = np.zeros((n, k))
    kept = 0
    sums = np.zeros(p)
    counts = np.zeros(p)
    for j in range(k):
        if verdict[j] == ABSENT:
            continue
        # the column without its mean at each cycle position: what a trend or a seasonal
        # part cannot hold (a constant is such a mean too)
        sums[:] = 0.0
        counts[:] = 0.0
        size = 0.0
        for i in range(n):
            if seen[lo + i]:
                sums[i % p] += X[lo + i, j]
                counts[i % p] += 1.0
                size += X[lo + i, j] * X[lo + i, j]
        column = np.zeros(n)
        for i in range(n):
            if seen[lo + i]:
                column[i] = X[lo + i, j] - sums[i % p] / counts[i % p]
        left = np.sqrt(np.sum(column * column))
        if left <= _TINY * np.sqrt(size) or left == 0.0:
            verdict[j] = NO_VARIATION
            continue
        before = left
        for _ in range(2):  # Gram-Schmidt twice: one pass loses orthogonality
            for q in range(kept):
                column -= np.sum(column * basis[:, q]) * basis[:, q]
        left = np.sqrt(np.sum(column * column))
        if left <= 1e-7 * before:
            verdict[j] = COLLINEAR
            continue
        if observed < kept + 1 + extra + 1:
            verdict[j] = TOO_FEW
            continue
        basis[:, kept] = column / left
        kept += 1
        verdict[j] = KEPT


@njit(nogil=True, cache=True)
def screen_batch(
    y: np.ndarray,
    offsets: np.ndarray,
    X: np.ndarray,
    periods: np.ndarray,
    extra: np.ndarray,
    verdict: np.ndarray,
) -> None:
    """Which columns each series can be regressed on, column by column in order.

    A column is dropped for a series (``verdict[s, j]`` set) when, over its observed points,
    nothing of it is left once its mean at each cycle position is taken away
    (``NO_VARIATION``: the trend or the seasonal part would hold it), when it is a
    combination of the columns kept before it (``COLLINEAR``), or when the observed points
    are too few for one more coefficient beside the ``extra`` degrees of freedom the split
    takes (``TOO_FEW``). ``verdict`` comes in with ``ABSENT`` where a column does not apply
    and ``KEPT`` elsewhere.
    """
    count = offsets.shape[0] - 1
    seen = ~np.isnan(y)
    for s in range(count):
        _screen_one(X, seen, offsets[s], offsets[s + 1], periods[s], extra[s], verdict[s])


@njit(nogil=True, cache=True)
def _inverse(matrix: np.ndarray) -> np.ndarray:
    """The inverse of a small square matrix by Gauss-Jordan elimination with partial
    pivoting; NaN throughout when it is singular. Hand-written: for the few columns of a
    calendar design a LAPACK call costs more than the arithmetic."""
    m = matrix.shape[0]
    work = matrix.copy()
    out = np.eye(m)
    for c in range(m):
        pivot = c
        for r in range(c + 1, m):
            if abs(work[r, c]) > abs(work[pivot, c]):
                pivot = r
        if work[pivot, c] == 0.0:
            out[:, :] = np.nan
            return out
        if pivot != c:
            for j in range(m):
                work[c, j], work[pivot, j] = work[pivot, j], work[c, j]
                out[c, j], out[pivot, j] = out[pivot, j], out[c, j]
        scale = 1.0 / work[c, c]
        for j in range(m):
            work[c, j] *= scale
            out[c, j] *= scale
        for r in range(m):
            if r != c and work[r, c] != 0.0:
                factor = work[r, c]
                for j in range(m):
                    work[r, j] -= factor * work[c, j]
                    out[r, j] -= factor * out[c, j]
    return out


@njit(nogil=True, cache=True)
def _fit_one(
    z: np.ndarray,
    X: np.ndarray,
    w: np.ndarray,
    lo: int,
    hi: int,
    kept: np.ndarray,
    used: float,
    covariance: int,
    coef: np.ndarray,
    cov: np.ndarray,
) -> float:
    """Weighted least squares of ``z`` on the kept columns of one series; returns the
    residual variance (NaN without residual degrees of freedom). ``covariance`` is one of
    ``PLAIN_COVARIANCE``, ``SANDWICH_COVARIANCE``, ``HUBER_COVARIANCE``."""
    columns = np.flatnonzero(kept)
    m = columns.size
    rows = 0
    for i in range(lo, hi):
        if not np.isnan(z[i]) and w[i] > 0.0:
            rows += 1
    coef[:] = np.nan
    cov[:, :] = np.nan
    if m == 0 or rows < m:
        return np.nan
    A = np.empty((rows, m))
    b = np.empty(rows)
    r = 0
    for i in range(lo, hi):
        if not np.isnan(z[i]) and w[i] > 0.0:
            root = np.sqrt(w[i])
            for c in range(m):
                A[r, c] = root * X[i, columns[c]]
            b[r] = root * z[i]
            r += 1
    # the normal equations: the calendar columns are few and well conditioned, and the
    # m x m system is far cheaper per series than a QR of the rows (tests hold the
    # coefficients to statsmodels' pseudo-inverse within 1e-10)
    gram = np.zeros((m, m))
    right = np.zeros(m)
    for i in range(rows):
        for c in range(m):
            right[c] += A[i, c] * b[i]
            for d in range(c, m):
                gram[c, d] += A[i, c] * A[i, d]
    for c in range(m):
        for d in range(c):
            gram[c, d] = gram[d, c]
    bread = _inverse(gram)
    solution = np.zeros(m)
    for c in range(m):
        for d in range(m):
            solution[c] += bread[c, d] * right[d]
    residual = b.copy()
    for i in range(rows):
        for c in range(m):
            residual[i] -= A[i, c] * solution[c]
    dof = rows - m - used
    scale = np.sum(residual * residual) / dof if dof > 0 else np.nan
    if covariance == SANDWICH_COVARIANCE:
        # robustness weights make this an M-estimate (bisquare): its covariance is the
        # sandwich B^-1 M B^-1 with B = sum psi'(r) x x' and M = sum psi(r)^2 x x'
        # (Huber 1981, Robust Statistics, section 7.6, from memory), scaled by points /
        # residual degrees of freedom. With w = (1 - u^2)^2 the bisquare weight of
        # u = r / h, psi(r) = w r and psi'(r) = sqrt(w) (5 sqrt(w) - 4), so that
        # psi'(r) x x' = (5 - 4 / sqrt(w)) a a' for the weighted row a = sqrt(w) x.
        meat = np.zeros((m, m))
        slope = np.zeros((m, m))
        r = 0
        for i in range(lo, hi):
            if not np.isnan(z[i]) and w[i] > 0.0:
                shape = 5.0 - 4.0 / np.sqrt(w[i])
                for c in range(m):
                    for d in range(m):
                        meat[c, d] += residual[r] * residual[r] * A[r, c] * A[r, d]
                        slope[c, d] += shape * A[r, c] * A[r, d]
                r += 1
        slope_inv = _inverse(slope)
        found = slope_inv @ meat @ np.ascontiguousarray(slope_inv.T)
        found *= rows / dof if dof > 0 else np.nan
    elif covariance == HUBER_COVARIANCE:
        found = _huber_covariance(z, X, w, lo, hi, columns, solution, used)
    else:
        found = scale * bread
    for c in range(m):
        coef[columns[c]] = solution[c]
        for d in range(m):
            cov[columns[c], columns[d]] = found[c, d]
    return scale


@njit(nogil=True, cache=True)
def _huber_covariance(
    z: np.ndarray,
    X: np.ndarray,
    w: np.ndarray,
    lo: int,
    hi: int,
    columns: np.ndarray,
    solution: np.ndarray,
    used: float,
) -> np.ndarray:
    """The covariance of the bisquare M-estimate: Huber's second form with his correction
    for the number of parameters (Huber 1981, Robust Statistics, section 7.6, from memory),

        K [sum psi^2 / (n (1 - p / n)^2)] / mean(psi') (sum psi' x x')^-1,
        K = 1 + (p / n) var(psi') / mean(psi')^2,

    over the ``n`` observed points (those of weight 0 have psi = psi' = 0), with two
    changes of ours. ``p`` counts the degrees of freedom the split takes (``used``) beside
    the columns, as smoothers count them (Hastie & Tibshirani 1990, section 3.5): a split
    of monthly series takes about a third of them. And the squared psi are divided by
    ``n (1 - p/n)^2`` where Huber has ``n - p``: MacKinnon & White's (1985, J.
    Econometrics 29) jackknife-like correction (HC3, each squared residual over
    ``(1 - h)^2``), at the average leverage ``h = p / n``, since residuals of a fit that
    takes a third of the degrees of freedom understate the errors more than ``n - p``
    allows. Of the forms compared on simulated series this one came nearest the normal
    coverage (README, "Calendar effects"). psi(r) = w r and psi'(r) = sqrt(w) (5 sqrt(w)
    - 4) for the bisquare weight w = (1 - u^2)^2 of u = r / h. Where ``sum psi' x x'`` is
    not positive definite (many points far out), Huber's first form, with ``(X'X)^-1`` /
    mean(psi'), stands in for it.
    """
    m = columns.size
    n = 0
    psi_squares = 0.0
    slope_sum = 0.0
    slope_squares = 0.0
    slope = np.zeros((m, m))
    cross = np.zeros((m, m))
    for i in range(lo, hi):
        if np.isnan(z[i]):
            continue
        n += 1
        fitted = 0.0
        for c in range(m):
            fitted += X[i, columns[c]] * solution[c]
        psi = w[i] * (z[i] - fitted)
        root = np.sqrt(w[i])
        derivative = root * (5.0 * root - 4.0) if w[i] > 0.0 else 0.0
        psi_squares += psi * psi
        slope_sum += derivative
        slope_squares += derivative * derivative
        for c in range(m):
            for d in range(m):
                product = X[i, columns[c]] * X[i, columns[d]]
                cross[c, d] += product
                slope[c, d] += derivative * product
    p = m + used
    mean_slope = slope_sum / max(n, 1)
    if n - p <= 0 or mean_slope <= 0.0:
        return np.full((m, m), np.nan)
    spread = slope_squares / n - mean_slope * mean_slope
    K = 1.0 + p / n * max(spread, 0.0) / (mean_slope * mean_slope)
    level = psi_squares / (n * (1.0 - p / n) ** 2)
    found = K * level / mean_slope * _inverse(slope)
    for c in range(m):
        if not found[c, c] > 0.0:
            return K * K * level / (mean_slope * mean_slope) * _inverse(cross)
    return found


@njit(nogil=True, cache=True)
def fit_batch(
    z: np.ndarray,
    offsets: np.ndarray,
    X: np.ndarray,
    weight: np.ndarray,
    kept: np.ndarray,
    used: np.ndarray,
    covariance: np.ndarray,
    active: np.ndarray,
    coef: np.ndarray,
    cov: np.ndarray,
    scale: np.ndarray,
) -> None:
    """Weighted least squares per active series: ``coef[s]`` (NaN for columns not kept),
    their covariance ``cov[s]`` and the residual variance ``scale[s]``.

    Points where ``z`` is NaN or the weight is 0 take no part. The residual variance is the
    weighted sum of squares over ``points - columns - used[s]``, where ``used`` counts the
    degrees of freedom the split took (0 gives the textbook regression's figure).
    ``covariance[s]`` says how the covariance is estimated: ``PLAIN_COVARIANCE`` (0) the
    residual variance times ``(X' W X)^-1``; for robustness weights
    ``SANDWICH_COVARIANCE`` (1) the M-estimate's sandwich scaled by
    ``points / (points - columns - used[s])``, or ``HUBER_COVARIANCE`` (2), Huber's
    corrected form (``_huber_covariance``).
    """
    count = offsets.shape[0] - 1
    for s in range(count):
        if active[s]:
            scale[s] = _fit_one(
                z,
                X,
                weight,
                offsets[s],
                offsets[s + 1],
                kept[s],
                used[s],
                covariance[s],
                coef[s],
                cov[s],
            )


@njit(nogil=True, cache=True)
def start_batch(
    rest: np.ndarray,
    X: np.ndarray,
    X_rest: np.ndarray,
    offsets: np.ndarray,
    kept: np.ndarray,
    active: np.ndarray,
    coef: np.ndarray,
) -> None:
    """Where backfitting with a linear split ``L`` settles, solved directly: the
    coefficients with ``X' (X - L X) b = X' (y - L y)`` over the observed points
    (``rest = y - L y``, NaN where ``y`` is missing; ``X_rest = X - L X``). Backfitting
    started there has (nearly) nothing left to do. NaN where the system is singular.
    """
    for s in range(offsets.shape[0] - 1):
        if not active[s]:
            continue
        columns = np.flatnonzero(kept[s])
        m = columns.size
        if m == 0:
            continue
        system = np.zeros((m, m))
        right = np.zeros(m)
        for i in range(offsets[s], offsets[s + 1]):
            if np.isnan(rest[i]):
                continue
            for c in range(m):
                right[c] += X[i, columns[c]] * rest[i]
                for d in range(m):
                    system[c, d] += X[i, columns[c]] * X_rest[i, columns[d]]
        inverse = _inverse(system)
        for c in range(m):
            total = 0.0
            for d in range(m):
                total += inverse[c, d] * right[d]
            coef[s, columns[c]] = total


def split_degrees(n: int, settings: np.ndarray) -> float:
    """The degrees of freedom a split of ``n`` points takes from the remainder:
    ``tr(2 L - L L')`` of its linear map ``L`` (trend plus seasonal), the residual
    degrees of freedom of a linear smoother (Hastie & Tibshirani 1990, section 3.5, from
    memory).

    The map is that of the non-robust split of a complete series; past ``linear.MAX_POINTS``
    points the figure of the longest such series is scaled up in proportion (ours: the
    loess spans are fixed, so the degrees grow with the length).

    >>> from tidesplit.params import SplitParams
    >>> row = SplitParams(period=12).resolve().settings_row()
    >>> 10 < split_degrees(120, row) < 60
    True
    """
    row = np.array(settings, dtype=np.int64)
    row[COL_OUTER] = 0
    size = min(n, linear.MAX_POINTS)
    trend_op, seasonal_op = linear.operators(size, row)
    both = trend_op + seasonal_op
    degrees = 2.0 * np.trace(both) - float(np.sum(both * both))
    return float(degrees * n / size)


@njit(nogil=True, cache=True)
def _update_effect(
    X: np.ndarray,
    offsets: np.ndarray,
    coef: np.ndarray,
    active: np.ndarray,
    effect: np.ndarray,
    moved: np.ndarray,
) -> None:
    """``effect = X b`` on the points of each active series (columns with a NaN
    coefficient count as 0), and in ``moved`` the largest change of each."""
    k = X.shape[1]
    for s in range(offsets.shape[0] - 1):
        if not active[s]:
            continue
        largest = 0.0
        for i in range(offsets[s], offsets[s + 1]):
            total = 0.0
            for j in range(k):
                if not np.isnan(coef[s, j]):
                    total += X[i, j] * coef[s, j]
            largest = max(largest, abs(total - effect[i]))
            effect[i] = total
        moved[s] = largest


def effect_of(
    X: np.ndarray, offsets: np.ndarray, coef: np.ndarray, active: np.ndarray, out: np.ndarray
) -> None:
    """``out = X b`` on the points of each active series (a NaN coefficient counts as 0).

    >>> out = np.zeros(3)
    >>> effect_of(np.ones((3, 2)), np.array([0, 3]), np.array([[1.0, np.nan]]),
    ...           np.ones(1, bool), out)
    >>> out.tolist()
    [1.0, 1.0, 1.0]
    """
    _update_effect(X, offsets, coef, active, out, np.zeros(offsets.size - 1))


def backfit(
    y: np.ndarray,
    offsets: np.ndarray,
    X: np.ndarray,
    kept: np.ndarray,
    active: np.ndarray,
    split: Callable[[np.ndarray, np.ndarray], tuple[np.ndarray, np.ndarray, np.ndarray]],
    used: np.ndarray,
    covariance: np.ndarray | None = None,
    start: np.ndarray | None = None,
    *,
    tolerance: float = 1e-8,
    most_rounds: int = 50,
) -> dict[str, np.ndarray]:
    """Fit ``y = X b + trend + seasonal + remainder`` per series by backfitting.

    Parameters
    ----------
    y : float array, NaN for missing values, all series end to end.
    offsets : int array of ``series + 1`` boundaries.
    X : (points, columns) design, the same columns for every series.
    kept : (series, columns) bool, the columns each series is regressed on
        (``screen_batch``).
    active : (series,) bool, the series to fit; the others are left NaN.
    split : ``split(values, which)`` returns trend, seasonal and robustness weights (points
        long) of the series ``which``; NaN elsewhere.
    used : (series,) degrees of freedom the split takes (``split_degrees``).
    covariance : (series,) int, how the covariance is estimated (see ``fit_batch``);
        ``PLAIN_COVARIANCE`` for all when left out. (Robust splits are fitted by
        ``robust_batch``.)
    start : (points,) the effect to start from (where backfitting with the plain split
        settles, ``start_batch``); zero when left out.
    tolerance : a series has settled when no fitted effect moved by more than this share
        of the spread (standard deviation) of its values in the last round.
    most_rounds : the cap on rounds.

    Returns
    -------
    dict
        ``trend``, ``seasonal``, ``weight``, ``effect`` (X b per point), ``coef``,
        ``cov``, ``scale`` and ``rounds``, plus ``settled`` (bool per series) and
        ``last_move`` (the last round's largest change of the effect, as a share of the
        spread).

    Examples
    --------
    >>> from tidesplit.kernel.stl import stl_batch_serial
    >>> from tidesplit.params import SplitParams
    >>> row = SplitParams(period=4).resolve().settings_row()
    >>> def split(v, which):
    ...     t, s, w = np.empty(v.size), np.empty(v.size), np.empty(v.size)
    ...     stl_batch_serial(v, np.array([0, v.size]), row[None, :], t, s, w)
    ...     return t, s, w
    >>> x = np.tile([1.0, -1.0, 0.5, 0.0, 0.0, -0.5, 0.0, 0.0], 5)[:, None]
    >>> y = np.tile([1.0, 2.0, 3.0, 4.0], 10) + 3.0 * x[:, 0]
    >>> out = backfit(y, np.array([0, 40]), x, np.ones((1, 1), bool), np.ones(1, bool),
    ...               split, np.zeros(1))
    >>> round(float(out["coef"][0, 0]), 3)
    3.0
    """
    count = offsets.size - 1
    k = X.shape[1]
    lengths = np.diff(offsets)
    series_of = np.repeat(np.arange(count), lengths)
    trend = np.full(y.size, np.nan)
    seasonal = np.full(y.size, np.nan)
    weight = np.full(y.size, np.nan)
    effect = np.zeros(y.size) if start is None else np.where(active[series_of], start, 0.0)
    coef = np.full((count, k), np.nan)
    cov = np.full((count, k, k), np.nan)
    scale = np.full(count, np.nan)
    rounds = np.zeros(count, dtype=np.int64)
    last_move = np.zeros(count)
    # the spread the tolerance is measured against: the values' standard deviation
    seen = ~np.isnan(y)
    filled = np.where(seen, y, 0.0)
    n_seen = np.maximum(np.bincount(series_of, weights=seen, minlength=count), 1)
    mean = np.bincount(series_of, weights=filled, minlength=count) / n_seen
    spread = np.sqrt(
        np.bincount(
            series_of, weights=np.where(seen, (y - mean[series_of]) ** 2, 0.0), minlength=count
        )
        / n_seen
    )
    spread = np.where(spread > 0, spread, 1.0)
    if covariance is None:
        covariance = np.full(count, PLAIN_COVARIANCE, dtype=np.int64)
    todo = active.copy()
    settled = ~active
    for _ in range(most_rounds):
        if not todo.any():
            break
        rows = todo[series_of]
        t, s, w = split(y - effect, todo)
        trend[rows], seasonal[rows], weight[rows] = t[rows], s[rows], w[rows]
        z = y - trend - seasonal
        fit_weight = np.where(np.isnan(weight), 0.0, weight)
        new_coef = np.full((count, k), np.nan)
        new_cov = np.full((count, k, k), np.nan)
        new_scale = np.full(count, np.nan)
        fit_batch(
            z, offsets, X, fit_weight, kept, used, covariance, todo, new_coef, new_cov, new_scale
        )
        moved = np.zeros(count)
        _update_effect(X, offsets, new_coef, todo, effect, moved)
        coef[todo], cov[todo], scale[todo] = new_coef[todo], new_cov[todo], new_scale[todo]
        rounds[todo] += 1
        last_move[todo] = moved[todo] / spread[todo]
        done = todo & (moved <= tolerance * spread)
        settled |= done
        todo &= ~done
    return {
        "trend": trend,
        "seasonal": seasonal,
        "weight": weight,
        "effect": effect,
        "coef": coef,
        "cov": cov,
        "scale": scale,
        "rounds": rounds,
        "settled": settled,
        "last_move": last_move,
    }


# ---------------------------------------------------------------------------------------
# robust fits: the robustness loop outside the backfitting


@njit(nogil=True, cache=True)
def _solve_given_weights(
    y: np.ndarray,
    X: np.ndarray,
    columns: np.ndarray,
    pw: np.ndarray,
    settings: np.ndarray,
    trend: np.ndarray,
    seasonal: np.ndarray,
    b: np.ndarray,
    buf: np.ndarray,
    column: np.ndarray,
    column_trend: np.ndarray,
    column_seasonal: np.ndarray,
) -> bool:
    """Where backfitting settles with the point weights ``pw`` held fixed, solved directly.

    With the weights fixed, STL's inner passes from a starting trend ``t0`` (passed in
    ``trend``) are linear: ``split(v) = L v + M t0``. The fixed point of "split ``y - X b``,
    regress ``y - trend - seasonal`` on ``X`` weighted by ``pw``" solves
    ``X' W (X - L X) b = X' W (y - split(y))`` (as ``start_batch`` does for the plain
    split): one split of ``y`` and one of each column from a zero trend (``L x``). Writes
    ``b[columns]`` and, by linearity from the splits already made, the trend and seasonal
    part of ``y - X b``; returns False (``b`` and the parts untouched beyond the split of
    ``y``) where the system is singular.
    """
    n = y.shape[0]
    m = columns.size
    inner_passes_given_weights(y, pw, settings, trend, seasonal, buf)
    for c in range(m):
        for i in range(n):
            # missing where y is, so that the column goes through the same map as y
            column[i] = np.nan if np.isnan(y[i]) else X[i, columns[c]]
        trend_c = column_trend[c]
        trend_c[:] = 0.0
        inner_passes_given_weights(column, pw, settings, trend_c, column_seasonal[c], buf)
    system = np.zeros((m, m))
    right = np.zeros(m)
    rest = np.empty(m)
    for i in range(n):
        if pw[i] <= 0.0:
            continue
        for d in range(m):
            rest[d] = X[i, columns[d]] - column_trend[d, i] - column_seasonal[d, i]
        for c in range(m):
            xc = pw[i] * X[i, columns[c]]
            right[c] += xc * (y[i] - trend[i] - seasonal[i])
            for d in range(m):
                system[c, d] += xc * rest[d]
    inverse = _inverse(system)
    solution = np.zeros(m)
    for c in range(m):
        for d in range(m):
            solution[c] += inverse[c, d] * right[d]
        if np.isnan(solution[c]):
            return False
    for c in range(m):
        b[columns[c]] = solution[c]
        for i in range(n):
            trend[i] -= solution[c] * column_trend[c, i]
            seasonal[i] -= solution[c] * column_seasonal[c, i]
    return True


@njit(nogil=True, cache=True)
def _weighted_least_squares(
    z: np.ndarray, X: np.ndarray, w: np.ndarray, columns: np.ndarray, b: np.ndarray
) -> None:
    """``b[columns]``, the least squares of ``z`` on those columns weighted by ``w``, by
    the normal equations as ``_fit_one`` (without its covariance, for the rounds between
    a robust fit's first and last pass); ``b`` is left alone where they are singular."""
    m = columns.size
    gram = np.zeros((m, m))
    right = np.zeros(m)
    for i in range(z.shape[0]):
        if w[i] <= 0.0 or np.isnan(z[i]):
            continue
        for c in range(m):
            xc = w[i] * X[i, columns[c]]
            right[c] += xc * z[i]
            for d in range(c, m):
                gram[c, d] += xc * X[i, columns[d]]
    for c in range(m):
        for d in range(c):
            gram[c, d] = gram[d, c]
    inverse = _inverse(gram)
    solution = np.zeros(m)
    for c in range(m):
        for d in range(m):
            solution[c] += inverse[c, d] * right[d]
        if np.isnan(solution[c]):
            return
    for c in range(m):
        b[columns[c]] = solution[c]


@njit(nogil=True, cache=True)
def _without_effect(y: np.ndarray, X: np.ndarray, b: np.ndarray, out: np.ndarray) -> None:
    """``out = y - X b`` (a column with coefficient 0 adds nothing)."""
    for i in range(y.shape[0]):
        total = y[i]
        for j in range(b.size):
            if b[j] != 0.0:
                total -= b[j] * X[i, j]
        out[i] = total


@njit(nogil=True, cache=True)
def _robust_one(
    y: np.ndarray,
    X: np.ndarray,
    verdict: np.ndarray,
    begin: np.ndarray,
    settings: np.ndarray,
    used: float,
    covariance: int,
    tolerance: float,
    most_rounds: int,
    trend: np.ndarray,
    seasonal: np.ndarray,
    weight: np.ndarray,
    effect: np.ndarray,
    coef: np.ndarray,
    cov: np.ndarray,
    found: np.ndarray,
) -> None:
    """One robust series (see ``robust_batch``); ``y``, ``X`` and the outputs are its own
    rows. ``verdict`` comes screened on the observed points and leaves screened on those
    the last weights keep; ``begin`` holds the coefficients to start from (NaN: solved
    here). ``found`` receives the residual variance, the confirming
    rounds, 1.0 if they settled and the last round's largest move of the effect as a share
    of the values' standard deviation."""
    n = y.shape[0]
    k = X.shape[1]
    outer = settings[COL_OUTER]
    period = settings[COL_PERIOD]
    buf = np.empty(buffer_size(n, period))
    column = np.empty(n)
    column_trend = np.empty((k, n))
    column_seasonal = np.empty((k, n))
    pw = np.empty(n)
    start = np.zeros(n)  # the trend each pass starts from, as in STL's own loop
    rest = np.empty(n)
    fitted = np.empty(n)
    scratch = np.empty(n)
    given = verdict.copy()
    b = np.zeros(k)
    # the spread the tolerance is measured against: the values' standard deviation
    total = 0.0
    seen = 0
    for i in range(n):
        pw[i] = 0.0 if np.isnan(y[i]) else 1.0
        if pw[i] > 0.0:
            seen += 1
            total += y[i]
    mean = total / max(seen, 1)
    squares = 0.0
    for i in range(n):
        if pw[i] > 0.0:
            squares += (y[i] - mean) * (y[i] - mean)
    spread = np.sqrt(squares / max(seen, 1))
    spread = spread if spread > 0.0 else 1.0
    screened = np.zeros(n, dtype=np.bool_)  # the points the columns were screened on
    columns = np.flatnonzero(verdict == KEPT)
    median = np.nan  # the previous pass's, to guide the next (median._median_guided)
    for r in range(outer + 1):
        # the columns on the points that keep weight (a weight of 0 on the leap-year
        # Februaries leaves the period's length nothing to tell), screened again whenever
        # those points change
        changed = r == 0
        for i in range(n):
            if (pw[i] > 0.0) != screened[i]:
                changed = True
                screened[i] = pw[i] > 0.0
        if changed:
            verdict[:] = given
            _screen_one(X, screened, 0, n, period, used, verdict)
            for j in range(k):
                if verdict[j] != KEPT:
                    b[j] = 0.0
            columns = np.flatnonzero(verdict == KEPT)
        trend[:] = start
        given_start = r == 0 and columns.size > 0
        for c in columns:
            given_start = given_start and not np.isnan(begin[c])
        if given_start:
            # the first pass from the caller's start, which is where backfitting with
            # unit weights settles (solved by the caller with the plain split's linear
            # map, cheaper than here): the split of y - X b alone
            for c in columns:
                b[c] = begin[c]
            _without_effect(y, X, b, rest)
            inner_passes_given_weights(rest, pw, settings, trend, seasonal, buf)
        elif r == 0 or r == outer:
            # the first pass (unit weights; from no effect at all, the points an effect
            # moves most would look like outliers) and the last (the answer's weights):
            # b where backfitting with these weights settles, solved directly
            solved = _solve_given_weights(
                y, X, columns, pw, settings, trend, seasonal, b, buf, column, column_trend,
                column_seasonal,
            )  # fmt: skip
            if not solved:  # singular: the split of y - X b as it stands
                _without_effect(y, X, b, rest)
                trend[:] = start
                inner_passes_given_weights(rest, pw, settings, trend, seasonal, buf)
        else:
            # between them, as STL's own loop does with its parts: one round with these
            # weights, the split of y - X b from the trend so far, then least squares
            _without_effect(y, X, b, rest)
            inner_passes_given_weights(rest, pw, settings, trend, seasonal, buf)
            for i in range(n):
                rest[i] = y[i] - trend[i] - seasonal[i]
            _weighted_least_squares(rest, X, pw, columns, b)
        if r == outer:
            break
        # the robustness weights from the whole remainder, as STL computes them
        _without_effect(y, X, b, rest)
        for i in range(n):
            fitted[i] = trend[i] + seasonal[i]
        median = _robustness_weights(rest, fitted, n, pw, scratch, median)
        start[:] = trend
    # confirm: split y - X b with the last weights from the last pass's start, regress;
    # with b solved directly the first round moves it by rounding only
    kept = verdict == KEPT
    rounds = 0
    moved = 0.0
    scale = np.nan
    while rounds < most_rounds:
        _without_effect(y, X, b, rest)
        trend[:] = start
        inner_passes_given_weights(rest, pw, settings, trend, seasonal, buf)
        for i in range(n):
            rest[i] = y[i] - trend[i] - seasonal[i]
        scale = _fit_one(rest, X, pw, 0, n, kept, used, covariance, coef, cov)
        rounds += 1
        step = np.zeros(k)
        for j in range(k):
            step[j] = (0.0 if np.isnan(coef[j]) else coef[j]) - b[j]
            b[j] += step[j]
        moved = 0.0
        for i in range(n):
            change = 0.0
            for j in range(k):
                if step[j] != 0.0:
                    change += step[j] * X[i, j]
            moved = max(moved, abs(change))
        if moved <= tolerance * spread:
            break
    for i in range(n):
        total = 0.0
        for j in range(k):
            if not np.isnan(coef[j]):
                total += coef[j] * X[i, j]
        effect[i] = total
        weight[i] = pw[i]
    found[0] = scale
    found[1] = rounds
    found[2] = 1.0 if moved <= tolerance * spread else 0.0
    found[3] = moved / spread


@njit(nogil=True, cache=True)
def _robust_range(
    y: np.ndarray,
    offsets: np.ndarray,
    X: np.ndarray,
    verdict: np.ndarray,
    begin: np.ndarray,
    settings: np.ndarray,
    used: np.ndarray,
    covariance: int,
    tolerance: float,
    most_rounds: int,
    first: int,
    stop: int,
    trend: np.ndarray,
    seasonal: np.ndarray,
    weight: np.ndarray,
    effect: np.ndarray,
    coef: np.ndarray,
    cov: np.ndarray,
    found: np.ndarray,
) -> None:
    """Series ``first .. stop-1`` of ``robust_batch``."""
    for s in range(first, stop):
        if not settings[s, COL_ACTIVE]:
            continue
        lo = offsets[s]
        hi = offsets[s + 1]
        _robust_one(
            y[lo:hi], X[lo:hi], verdict[s], begin[s], settings[s], used[s], covariance, tolerance,
            most_rounds, trend[lo:hi], seasonal[lo:hi], weight[lo:hi], effect[lo:hi],
            coef[s], cov[s], found[s],
        )  # fmt: skip


@njit(nogil=True, parallel=True, cache=True)
def _robust_parallel(
    y: np.ndarray,
    offsets: np.ndarray,
    X: np.ndarray,
    verdict: np.ndarray,
    begin: np.ndarray,
    settings: np.ndarray,
    used: np.ndarray,
    covariance: int,
    tolerance: float,
    most_rounds: int,
    chunks: int,
    trend: np.ndarray,
    seasonal: np.ndarray,
    weight: np.ndarray,
    effect: np.ndarray,
    coef: np.ndarray,
    cov: np.ndarray,
    found: np.ndarray,
) -> None:
    count = offsets.shape[0] - 1
    for c in prange(chunks):
        _robust_range(
            y, offsets, X, verdict, begin, settings, used, covariance, tolerance, most_rounds,
            c * count // chunks, (c + 1) * count // chunks, trend, seasonal, weight, effect,
            coef, cov, found,
        )  # fmt: skip


def robust_batch(
    y: np.ndarray,
    offsets: np.ndarray,
    X: np.ndarray,
    verdict: np.ndarray,
    settings: np.ndarray,
    used: np.ndarray,
    start: np.ndarray | None = None,
    *,
    tolerance: float = 1e-8,
    most_rounds: int = 50,
    parallel: bool = False,
) -> dict[str, np.ndarray]:
    """Fit ``y = X b + trend + seasonal + remainder`` per series with a robust split:
    the robustness loop outside the backfitting.

    STL's robustness passes (``settings[s, COL_OUTER]`` of them after the first) each
    hold the robustness weights fixed while the inner passes run, and compute new ones
    from the remainder between passes (Cleveland et al. 1990, section 2.4: bisquare of
    remainder / (6 median |remainder|)). Here each pass does the same with the effect
    beside it: with the weights fixed, the split and the weighted least squares of
    ``y - trend - seasonal`` on ``X`` are backfitted (in the first and the last pass to
    where they settle, solved directly: ``_solve_given_weights``; in between one round, as
    STL does one inner pass), and the weights come from the whole remainder
    ``y - X b - trend - seasonal``: the reweighting loop wraps the backfitting, as in
    Hastie & Tibshirani's robust fits of additive models (1990, from memory). The earlier
    route, a whole robust split inside every round, recomputed the weights from scratch
    each time and often did not settle in 25 rounds; this one settles in the first
    confirming round. With no column kept it is STL's own robust loop, to the bit
    (tested). The first pass starts from ``start`` when given (the plain fit's solution,
    which ``start_batch`` gets cheaply from the linear maps) and solves it otherwise.

    Parameters
    ----------
    y, offsets, X : as for ``backfit``.
    verdict : (series, columns) int64, screened on the observed points (``screen_batch``);
        rewritten in place with each series' columns screened again on the points its
        last robustness weights keep (a column left with nothing to tell is dropped).
    settings : (series, N_SETTINGS) kernel settings; series with ``COL_ACTIVE`` 0 are left
        NaN.
    used : (series,) degrees of freedom the split takes (``split_degrees``).
    start : (series, columns) coefficients where backfitting with the plain split
        (unit weights, ``COL_OUTER`` 0) settles, from ``start_batch``; NaN or left out:
        solved here with the series' own splits (the same to rounding).
    tolerance, most_rounds : the last pass is confirmed by rounds (split ``y - X b``,
        regress) until the effect moves by at most ``tolerance`` of the values' standard
        deviation, at most ``most_rounds`` of them.
    parallel : spread the series over numba's threads.

    Returns
    -------
    dict
        As ``backfit``: ``trend``, ``seasonal``, ``weight`` (the last pass's), ``effect``,
        ``coef``, ``cov``, ``scale``, ``rounds`` (confirming rounds), ``settled``,
        ``last_move``.

    Examples
    --------
    >>> from tidesplit.params import SplitParams
    >>> row = SplitParams(period=12, robust=True).resolve().settings_row()
    >>> rng = np.random.default_rng(1)
    >>> x = rng.normal(size=(96, 1))
    >>> t = np.arange(96)
    >>> y = np.sin(t * np.pi / 6) + 0.02 * t + 2.0 * x[:, 0] + rng.normal(0, 0.1, 96)
    >>> y[40] += 30.0  # an outlier
    >>> out = robust_batch(y, np.array([0, 96]), x, np.zeros((1, 1), np.int64), row[None, :],
    ...                    np.zeros(1))
    >>> round(float(out["coef"][0, 0]), 2), float(out["weight"][40]), bool(out["settled"][0])
    (1.99, 0.0, True)
    """
    count = offsets.size - 1
    k = X.shape[1]
    trend = np.full(y.size, np.nan)
    seasonal = np.full(y.size, np.nan)
    weight = np.full(y.size, np.nan)
    effect = np.zeros(y.size)
    coef = np.full((count, k), np.nan)
    cov = np.full((count, k, k), np.nan)
    found = np.zeros((count, 4))
    found[:, 0] = np.nan
    args = (
        np.ascontiguousarray(y, dtype=np.float64),
        np.ascontiguousarray(offsets, dtype=np.int64),
        np.ascontiguousarray(X, dtype=np.float64),
        verdict,
        np.full((count, k), np.nan) if start is None else np.ascontiguousarray(start, np.float64),
        np.ascontiguousarray(settings, dtype=np.int64),
        np.ascontiguousarray(used, dtype=np.float64),
        ROBUST_COVARIANCE,
        float(tolerance),
        int(most_rounds),
    )
    outputs = (trend, seasonal, weight, effect, coef, cov, found)
    if parallel and count > 1:
        chunks = max(1, min(count, 4 * get_num_threads()))
        launch(_robust_parallel, *args, chunks, *outputs)
    else:
        _robust_range(*args, 0, count, *outputs)
    active = np.asarray(settings)[:, COL_ACTIVE] == 1
    return {
        "trend": trend,
        "seasonal": seasonal,
        "weight": weight,
        "effect": effect,
        "coef": coef,
        "cov": cov,
        "scale": found[:, 0],
        "rounds": found[:, 1].astype(np.int64),
        "settled": (found[:, 2] > 0) | ~active,
        "last_move": found[:, 3],
    }
