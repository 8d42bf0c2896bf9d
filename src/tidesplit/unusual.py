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
    observed: np.ndarray, tests: np.ndarray, significance: float
) -> np.ndarray:
    """Critical values lambda_i of Rosner's (1983) generalized ESD procedure, one row per
    series of ``observed`` points, ``tests`` steps each (NaN beyond):
    lambda_i = (n - i) t / sqrt((n - i - 1 + t^2)(n - i + 1)), t the Student t quantile at
    1 - significance / (2 (n - i + 1)) with n - i - 1 degrees of freedom.

    >>> stepwise_critical_values(np.array([25]), np.array([1]), 0.05).round(3).tolist()
    [[2.822]]
    """
    from scipy.stats import t as student_t

    width = max(int(tests.max(initial=0)), 1)
    out = np.full((observed.size, width), np.nan)
    step = np.arange(1, width + 1)
    for n in np.unique(observed):
        left = n - step + 1  # points left before step i
        usable = left >= 3
        quantile = student_t.ppf(1 - significance / (2 * left[usable]), left[usable] - 2)
        values = np.full(width, np.nan)
        values[usable] = (
            (left[usable] - 1) * quantile / np.sqrt((left[usable] - 2 + quantile**2) * left[usable])
        )
        out[observed == n] = values
    return out


def _refit_without(
    result: RowsResult, params: SplitParams, set_aside: np.ndarray, parallel: bool
) -> np.ndarray:
    """trend + seasonal of a plain (non-robust) fit of the transformed series with the
    ``set_aside`` points left out (as missing), same spans and periods; where a series
    cannot be fitted so (a cycle position left empty), its own fit."""
    values = result.trend + result.seasonal + result.remainder
    fit = result.trend + result.seasonal
    if not set_aside.any():
        return fit
    values[set_aside] = np.nan
    ok = split_mask(result.status)
    wanted = result.batch.periods_used()
    kinds = sorted({w for w in wanted if w})
    if not kinds:
        return fit
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
        result.offsets,
        group_params,
        groups,
        status=[OK if k else "not split" for k in ok],
        on_error="keep",
        parallel=parallel,
    )
    lengths = np.diff(result.offsets)
    fitted = np.repeat([st.startswith(OK) for st in refit.status], lengths)
    fit[fitted] = (refit.trend + refit.seasonal)[fitted]
    return fit


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
    neighbours' (two places either side) is tested by Rosner's (1983) generalized extreme
    Studentized deviate procedure at ``significance`` (default 0.05: on a series of pure
    Gaussian noise, the chance that any point is flagged is about that), at most one point
    in ten tested. The score is that departure in standard deviations of the series'
    unflagged departures.

    ``method='mad'``: beyond ``threshold`` (default 3.5) robust z-scores of the split's
    remainder, (remainder - median) / (1.4826 MAD), the MAD scaled for normal consistency;
    the score is that z-score.

    The expected value is trend + seasonal, back on the original scale.
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
        set_aside = result.weight < SET_ASIDE_WEIGHT  # NaN weights (missing) compare False
        for _ in range(SET_ASIDE_ROUNDS):
            fit = _refit_without(result, params or SplitParams(), set_aside, parallel)
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
        observed = (
            np.add.reduceat(~np.isnan(departure), offsets[:-1])
            if r.size
            else np.zeros(count, np.int64)
        )
        observed = np.where(lengths > 0, observed, 0)
        tests = np.where(ok, np.floor(observed * CANDIDATE_SHARE), 0).astype(np.int64)
        critical = stepwise_critical_values(observed, tests, alpha)
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
    expected = fit.copy()
    lambdas = np.repeat(result.batch.lambdas, lengths)
    moved = ~np.isnan(lambdas)
    if moved.any():
        expected[moved] = transform.inverse(expected[moved], lambdas[moved])
    return Unusual(score, flagged, direction, expected, r)
