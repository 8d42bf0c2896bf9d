"""Regression effects beside STL: calendar design columns, weighted least squares per series,
and the backfitting loop that alternates the two.

The model is ``value = X b + trend + seasonal + remainder``. It is fitted by backfitting
(Hastie & Tibshirani 1990, *Generalized Additive Models*, chapter 4 (from memory)): split
``value - X b`` with STL, regress ``value - trend - seasonal`` on ``X`` (weighted by the
robustness weights when the split is robust), and repeat until ``b`` settles. Calendar
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
from numba import njit

from . import linear
from .layout import COL_OUTER

# What the screening of a column found, per series and column.
KEPT = 0
ABSENT = 1  # the column does not apply to this series (the front says why)
NO_VARIATION = 2  # constant, or the same in every cycle: the trend or seasonal part holds it
COLLINEAR = 3  # a combination of the columns kept before it
TOO_FEW = 4  # fewer observed points than the columns and the split need

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
    sandwich: bool,
    coef: np.ndarray,
    cov: np.ndarray,
) -> float:
    """Weighted least squares of ``z`` on the kept columns of one series; returns the
    residual variance (NaN without residual degrees of freedom)."""
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
    if sandwich:
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
    else:
        found = scale * bread
    for c in range(m):
        coef[columns[c]] = solution[c]
        for d in range(m):
            cov[columns[c], columns[d]] = found[c, d]
    return scale


@njit(nogil=True, cache=True)
def fit_batch(
    z: np.ndarray,
    offsets: np.ndarray,
    X: np.ndarray,
    weight: np.ndarray,
    kept: np.ndarray,
    used: np.ndarray,
    sandwich: np.ndarray,
    active: np.ndarray,
    coef: np.ndarray,
    cov: np.ndarray,
    scale: np.ndarray,
) -> None:
    """Weighted least squares per active series: ``coef[s]`` (NaN for columns not kept),
    their covariance ``cov[s]`` and the residual variance ``scale[s]``.

    Points where ``z`` is NaN or the weight is 0 take no part. The residual variance is the
    weighted sum of squares over ``points - columns - used[s]``, where ``used`` counts the
    degrees of freedom the split took (0 gives the textbook regression's figure). Where
    ``sandwich[s]`` (robustness weights), the covariance is the sandwich form scaled by
    ``points / (points - columns - used[s])``; otherwise the residual variance times
    ``(X' W X)^-1``.
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
                sandwich[s],
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
    sandwich: np.ndarray | None = None,
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
    sandwich : (series,) bool, the sandwich covariance (robust splits; see ``fit_batch``).
    start : (points,) the effect to start from (a non-robust fit, before a robust one);
        zero when left out.
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
    sandwich = np.zeros(count, dtype=bool) if sandwich is None else sandwich
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
            z, offsets, X, fit_weight, kept, used, sandwich, todo, new_coef, new_cov, new_scale
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
