"""Unusual points: our stepwise rule (a generalized extreme Studentized deviate test,
Rosner 1983, on departures from the neighbours after a refit without the points a robust
split set aside), or robust z-scores of the remainder, from a split on the regular grid."""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from . import arguments, transform
from .batch_split import split_batch
from .errors import ParamError
from .kernel import strengths
from .kernel import unusual as unusual_kernel
from .keyed_split import RowsResult
from .params import SplitParams
from .status import OK, split_mask
from .tuning import (
    CANDIDATE_SHARE,
    DEFAULT_MAD_THRESHOLD,
    DEFAULT_SIGNIFICANCE,
    NEIGHBOUR_REACH,
    PROBE_SEED,
    PROBES,
    SET_ASIDE_ROUNDS,
    SET_ASIDE_WEIGHT,
)

OUTLIER_RULES = next(a.choices for a in arguments.of(arguments.OUTLIERS) if a.name == "rule")


@dataclass
class Unusual:
    """Per grid row: score, flag, direction and the expected value."""

    score: np.ndarray
    flagged: np.ndarray
    direction: list[str | None]
    expected: np.ndarray  # trend + seasonal, original scale
    remainder: np.ndarray  # transformed value - (trend + seasonal) of the fit the rule reads


def stepwise_critical_values(
    observed: np.ndarray, tests: np.ndarray, significance: float | np.ndarray
) -> np.ndarray:
    """Critical values lambda_i of Rosner's (1983) generalized ESD procedure, one row per
    series of ``observed`` points, ``tests`` steps each (NaN beyond):
    lambda_i = (n - i) t / sqrt((n - i - 1 + t^2)(n - i + 1)), t the Student t quantile at
    1 - alpha / (2 (n - i + 1)) with n - i - 1 degrees of freedom; ``significance`` is
    alpha, one for all series or one per series.

    >>> stepwise_critical_values(np.array([25]), np.array([1]), 0.05).round(3).tolist()
    [[2.822]]
    """
    from scipy.stats import t as student_t

    width = max(int(tests.max(initial=0)), 1)
    out = np.full((observed.size, width), np.nan)
    step = np.arange(1, width + 1)
    significance = np.broadcast_to(np.asarray(significance, dtype=float), observed.shape)
    for n, a in set(zip(observed.tolist(), significance.tolist(), strict=True)):
        left = n - step + 1  # points left before step i
        usable = left >= 3
        quantile = student_t.ppf(1 - a / (2 * left[usable]), left[usable] - 2)
        values = np.full(width, np.nan)
        values[usable] = (
            (left[usable] - 1) * quantile / np.sqrt((left[usable] - 2 + quantile**2) * left[usable])
        )
        out[(observed == n) & (significance == a)] = values
    return out


def _refit_without(
    values: np.ndarray,
    offsets: np.ndarray,
    wanted: list[tuple[int, ...] | None],
    params: SplitParams,
    set_aside: np.ndarray,
    parallel: bool,
) -> np.ndarray:
    """trend + seasonal of a plain (non-robust) fit of the transformed ``values`` with the
    ``set_aside`` points left out (as missing), same spans; ``wanted`` holds each series'
    periods (None for a series that was not split, which keeps NaN). Where a series cannot
    be fitted so (a cycle position left empty), NaN."""
    fit = np.full(values.size, np.nan)
    kinds = sorted({w for w in wanted if w})
    if not kinds:
        return fit
    values = values.copy()
    values[set_aside] = np.nan
    # the values are already transformed: the refit takes them as they are
    plain = replace(
        params,
        robust=False,
        inner_loops=None,
        outer_loops=None,
        transform="none",
        boxcox_lambda=None,
        boxcox_bounds=None,
    )
    groups = np.array([kinds.index(w) if w else 0 for w in wanted], dtype=np.int64)
    group_params = [
        replace(plain, period=None, periods=w) if params.multi else replace(plain, period=w[0])
        for w in kinds
    ]
    refit = split_batch(
        values,
        offsets,
        group_params,
        groups,
        status=[OK if w else "not split" for w in wanted],
        on_error="keep",
        parallel=parallel,
    )
    fitted = np.repeat([st.startswith(OK) for st in refit.status], np.diff(offsets))
    fit[fitted] = (refit.trend + refit.seasonal)[fitted]
    return fit


def _probe_noise(lengths: np.ndarray, probes: int) -> np.ndarray:
    """``probes`` rounds of standard normal noise for series of these lengths, the same
    numbers for a series of a given length whatever else is in the batch (each round its
    own stream, and a series takes the stream's first values)."""
    longest = int(lengths.max(initial=0))
    rounds = [
        np.random.default_rng([PROBE_SEED, p]).standard_normal(longest) for p in range(probes)
    ]
    return np.concatenate([rounds[p][:n] for p in range(probes) for n in lengths])


def _set_aside_spread(
    offsets: np.ndarray,
    wanted: list[tuple[int, ...] | None],
    params: SplitParams,
    set_aside: np.ndarray,
    observed: np.ndarray,
    parallel: bool,
) -> np.ndarray:
    """Per row, how much wider a set-aside point's departure spreads than a kept point's
    under white noise: the ratio of their standard deviations (1 where nothing was set
    aside).

    A kept point's remainder is in-sample: the fit leans towards it, so its spread is
    below the noise's. A set-aside point's is a prediction error: the fit never saw it, so
    its spread is the noise's plus the fit's own. With few cycles behind each seasonal
    value (several periods, short series) the gap is large, and left alone it makes set-
    aside noise points look unusual. Linear smoothers' leverage is the textbook account
    (Hastie & Tibshirani 1990, ch. 3); the plain fit with the set-aside points left out
    is linear in the data, so its spread is measured here by running it on ``PROBES``
    series of pure noise with the same points left out (a Monte Carlo estimate, with the
    noise's own part of a set-aside point's spread exact: that point is independent of
    the fit).
    """
    ratio = np.ones(set_aside.size)
    lengths = np.diff(offsets)
    owner = np.repeat(np.arange(lengths.size), lengths)
    asides = np.bincount(owner, weights=set_aside, minlength=lengths.size)
    series = np.array([s for s in np.flatnonzero(asides) if wanted[s]], dtype=np.int64)
    if series.size == 0:
        return ratio
    rows = np.concatenate([np.arange(offsets[s], offsets[s + 1]) for s in series])
    sub_lengths = lengths[series]
    noise = _probe_noise(sub_lengths, PROBES)
    tiled = np.tile(rows, PROBES)
    noise[~observed[tiled]] = np.nan
    probe_offsets = np.concatenate([[0], np.cumsum(np.tile(sub_lengths, PROBES))])
    fit = _refit_without(
        noise,
        probe_offsets,
        [wanted[s] for s in series] * PROBES,
        params,
        set_aside[tiled],
        parallel,
    )
    residual = noise - fit
    departure = np.empty(residual.size)
    unusual_kernel.departure_from_neighbours(residual, probe_offsets, NEIGHBOUR_REACH, departure)
    departure = departure.reshape(PROBES, rows.size)
    aside = set_aside[rows]
    # a set-aside point's departure is its noise less the fit and the neighbours' median,
    # which never saw it: 1 (the noise's variance) plus the rest's mean square
    own = noise.reshape(PROBES, rows.size)
    rest = own - departure
    aside_spread = 1.0 + np.mean(rest**2, axis=0)
    kept_square = np.where(~aside & ~np.isnan(departure), departure**2, 0.0).sum(axis=0)
    kept_count = (~aside & ~np.isnan(departure)).sum(axis=0)
    sub_offsets = np.concatenate([[0], np.cumsum(sub_lengths)])
    kept_spread = np.add.reduceat(kept_square, sub_offsets[:-1]) / np.maximum(
        np.add.reduceat(kept_count, sub_offsets[:-1]), 1
    )
    kept_spread = np.repeat(kept_spread, sub_lengths)
    with np.errstate(invalid="ignore", divide="ignore"):
        wider = np.sqrt(aside_spread / kept_spread)
    usable = aside & np.isfinite(wider) & (wider > 0)
    ratio[rows[usable]] = wider[usable]
    return ratio


def unusual_points(
    result: RowsResult,
    method: str,
    threshold: float | None = None,
    significance: float | None = None,
    params: SplitParams | None = None,
    parallel: bool = True,
) -> Unusual:
    """Points too far out to be ordinary noise.

    ``method='stepwise'`` (the default rule), ours: the split given (robust by default,
    one robustness pass) marks the points it sets aside (robustness weight below
    ``SET_ASIDE_WEIGHT``); a plain fit without them (same spans, ``params``) gives the
    expected value and the remainder; each remainder's departure from the median of its
    neighbours' (three places either side), a set-aside point's brought to a kept point's
    spread (see ``_set_aside_spread``), is tested by Rosner's (1983) generalized extreme
    Studentized deviate procedure, at most one point in ten tested. ``significance``
    (default 0.0005) is per point: the share of the points of pure Gaussian noise that are
    flagged, about that whatever the series' length (Rosner's alpha of a series of n
    points is set to n times it). The score is that departure in standard deviations of
    the series' unflagged departures.

    ``method='mad'``: beyond ``threshold`` (default 3.5) robust z-scores of the split's
    remainder, (remainder - median) / (1.4826 MAD), the MAD scaled for normal consistency;
    the score is that z-score.

    With regression effects (``calendar_effects``, ``special_days``, ``outside_columns``) the
    rule reads the remainder without them: a holiday's dip is expected, not unusual. The
    expected value is trend + seasonal (+ the effects), back on the original scale.
    """
    if method not in OUTLIER_RULES:
        raise ParamError(f"rule must be one of {', '.join(OUTLIER_RULES)}, got {method!r}")
    if method == "stepwise" and threshold is not None:
        raise ParamError("threshold goes with rule 'mad'; the stepwise test takes significance")
    if method == "mad" and significance is not None:
        raise ParamError("significance goes with rule 'stepwise'; rule 'mad' takes threshold")
    offsets = result.offsets
    count = offsets.size - 1
    lengths = np.diff(offsets)
    ok = split_mask(result.status)
    if method == "stepwise":
        alpha = DEFAULT_SIGNIFICANCE if significance is None else float(significance)
        if not 0 < alpha < 1:
            raise ParamError(f"significance must be between 0 and 1, got {alpha}")
        values = result.trend + result.seasonal + result.remainder
        params = params or SplitParams()
        # every series is refitted, whether or not it set points aside: a series' expected
        # values must not depend on what other series share its batch
        wanted = [w if k else None for w, k in zip(result.batch.periods_used(), ok, strict=True)]
        own_fit = result.trend + result.seasonal
        set_aside = result.weight < SET_ASIDE_WEIGHT  # NaN weights (missing) compare False
        for _ in range(SET_ASIDE_ROUNDS):
            fit = _refit_without(values, offsets, wanted, params, set_aside, parallel)
            # a series the refit cannot fit (a cycle position left empty) keeps its own
            fit = np.where(np.isnan(fit), own_fit, fit)
            r = values - fit
            # judged again against the refit: a big outlier bends the first fit, and the
            # points it bent away are set aside with it until a refit without it
            again = np.empty(r.size, dtype=bool)
            unusual_kernel.set_aside_points(r, offsets, SET_ASIDE_WEIGHT, again)
            if np.array_equal(again, set_aside):
                break
            set_aside = again
        departure = np.empty(r.size)
        unusual_kernel.departure_from_neighbours(r, offsets, NEIGHBOUR_REACH, departure)
        departure /= _set_aside_spread(
            offsets, wanted, params, set_aside, ~np.isnan(values), parallel
        )
        observed = (
            np.add.reduceat(~np.isnan(departure), offsets[:-1])
            if r.size
            else np.zeros(count, np.int64)
        )
        observed = np.where(lengths > 0, observed, 0)
        tests = np.where(ok, np.floor(observed * CANDIDATE_SHARE), 0).astype(np.int64)
        # Rosner's alpha is the chance of any flag in a series of pure noise; ours is per point
        # (the share of ordinary points flagged), so a series' alpha grows with its length:
        # each of its first steps then tests at about ``alpha`` two-sided, whatever the length
        critical = stepwise_critical_values(observed, tests, alpha * observed)
        flagged = np.empty(r.size, dtype=bool)
        score = np.empty(r.size)
        unusual_kernel.stepwise_extremes(departure, offsets, ok, critical, tests, flagged, score)
        high = flagged & (score > 0)
        low = flagged & (score < 0)
    else:
        k = DEFAULT_MAD_THRESHOLD if threshold is None else float(threshold)
        if not k > 0:
            raise ParamError(f"threshold must be positive, got {k}")
        r = result.remainder
        fit = result.trend + result.seasonal
        fences = np.empty((count, 4))
        strengths.remainder_fences(r, offsets, 1, k, ok, fences)
        row = np.repeat(np.arange(count), lengths)
        lower, upper, centre, scale = (fences[row, c] for c in range(4))
        with np.errstate(invalid="ignore", divide="ignore"):
            score = (r - centre) / scale
        high = r > upper
        low = r < lower
        flagged = high | low
    direction = np.where(high, "high", np.where(low, "low", None)).tolist()
    # the effects fitted beside the split (holidays, outside columns) are expected: the
    # rule reads the remainder without them, and the expected value holds them
    expected = fit + result.calendar_effect + result.outside_effect
    lambdas = np.repeat(result.batch.lambdas, lengths)
    moved = ~np.isnan(lambdas)
    if moved.any():
        expected[moved] = transform.inverse(expected[moved], lambdas[moved])
    return Unusual(score, flagged, direction, expected, r)
