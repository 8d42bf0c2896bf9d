"""A self-check users can run: a sample of keys split again by statsmodels, compared.

statsmodels' ``STL`` is a port of the authors' reference routines and ``MSTL`` follows
Bandara, Hyndman & Bergmeir (2021); both take the same spans, degrees, jumps and loop
counts as ours. For each sampled series we give statsmodels its values on the regular grid,
on the transformed scale (the transform and Box-Cox lambda are ours: statsmodels' automatic
lambda is another criterion), and report the largest absolute difference of each
component. Where statsmodels cannot follow the same settings (missing values, a fixed
seasonal pattern, jumps that differ between periods), the status says so and no difference
is given, rather than the series being skipped in silence.
"""

from __future__ import annotations

import zlib
from dataclasses import dataclass

import numpy as np

from .keyed_split import RowsResult
from .params import ResolvedParams, SplitParams
from .status import is_split


@dataclass
class Audit:
    """One entry per series."""

    reference: list[str | None]
    compared: np.ndarray  # points compared
    gaps: np.ndarray  # series x (trend, seasonal, remainder): largest absolute difference
    status: list[str]


def sample_by_hash(labels: list[str], size: int) -> np.ndarray:
    """Indices of ``size`` series chosen by a hash of their labels: the same keys every run,
    spread over the table rather than its first rows.

    >>> sample_by_hash(["a", "b", "c", "d"], 2).tolist()
    [1, 2]
    """
    order = sorted(range(len(labels)), key=lambda i: zlib.crc32(labels[i].encode()))
    return np.sort(np.array(order[:size], dtype=np.int64))


def _statsmodels_spans(period: int, season_span: int) -> tuple[int, int]:
    """The trend and low-pass spans statsmodels' STL takes when none is given (its
    documented defaults: the paper's trend rule; the smallest odd number above the period)."""
    trend = int(np.ceil(1.5 * period / (1 - 1.5 / season_span)))
    low_pass = period + 1
    return trend + (trend % 2 == 0), low_pass + (low_pass % 2 == 0)


def _shared(params: ResolvedParams) -> tuple[dict[str, int], str | None]:
    """The STL settings statsmodels' MSTL shares between periods, or why it cannot."""
    cycles = params.cycles
    jumps = {c[4:] for c in cycles}
    if len(jumps) > 1:
        shown = "; ".join(f"period {c[0]}: {c[4]}, {c[5]}, {c[6]}" for c in cycles)
        return {}, (
            "statsmodels cannot follow: its MSTL shares one set of jumps between periods and "
            f"these differ ({shown}); give season_jump, trend_jump and lowpass_jump"
        )
    season_jump, trend_jump, lowpass_jump = next(iter(jumps))
    shared = {"seasonal_jump": season_jump, "trend_jump": trend_jump,
              "low_pass_jump": lowpass_jump}  # fmt: skip
    for name, index in (("trend", 2), ("low_pass", 3)):
        spans = {c[index] for c in cycles}
        if len(spans) == 1 and len(cycles) > 1:
            shared[name] = spans.pop()  # given once for every period
        elif any(c[index] != _statsmodels_spans(c[0], c[1])[index - 2] for c in cycles):
            return {}, (
                f"statsmodels cannot follow: its MSTL takes each period's own default {name} "
                "span, which differs from ours here; give trend_span and lowpass_span"
            )
    return shared, None


def _cannot_follow(params: ResolvedParams, values: np.ndarray) -> str | None:
    missing = int(np.isnan(values).sum())
    if missing:
        return (
            f"statsmodels cannot follow: {missing} missing value(s) on the series' grid (its "
            "splits need a complete series)"
        )
    if 0 in params.season_spans:
        return "statsmodels cannot follow: a fixed seasonal pattern (season_span 0)"
    if len(params.cycles) > 1:
        return _shared(params)[1]
    return None


def _reference(params: ResolvedParams, y: np.ndarray) -> tuple[np.ndarray, np.ndarray, str]:
    """statsmodels' trend and seasonal parts under the same settings."""
    from statsmodels.tsa.seasonal import MSTL, STL

    options = {
        "seasonal_deg": params.season_degree,
        "trend_deg": params.trend_degree,
        "low_pass_deg": params.lowpass_degree,
        "robust": params.robust,
    }
    loops = {"inner_iter": params.inner_loops, "outer_iter": params.outer_loops}
    if len(params.cycles) == 1:
        period, season, trend, lowpass, season_jump, trend_jump, lowpass_jump = params.cycles[0]
        fit = STL(
            y,
            period=period,
            seasonal=season,
            trend=trend,
            low_pass=lowpass,
            seasonal_jump=season_jump,
            trend_jump=trend_jump,
            low_pass_jump=lowpass_jump,
            **options,
        ).fit(**loops)
        return np.asarray(fit.trend), np.asarray(fit.seasonal), "statsmodels STL"
    shared, _ = _shared(params)
    fit = MSTL(
        y,
        periods=params.periods,
        windows=params.season_spans,
        iterate=params.iterations,
        stl_kwargs={**shared, **options, **loops},
    ).fit()
    seasonal = np.asarray(fit.seasonal).reshape(y.size, -1).sum(axis=1)
    return np.asarray(fit.trend), seasonal, "statsmodels MSTL"


def audit(result: RowsResult, params: SplitParams) -> Audit:
    """Split every series of ``result`` (a split on the regular grid) again with
    statsmodels under the settings it was split with, and compare.

    Examples
    --------
    >>> from tidesplit.keyed_split import split_rows
    >>> y = 10 + np.tile([1.0, -1.0, 2.0, -2.0], 8) + np.linspace(0, 1, 32)
    >>> params = SplitParams(period=4)
    >>> found = audit(split_rows(y, np.array([0, 32]), params), params)
    >>> found.reference, bool(found.gaps.max() < 1e-8), found.status
    (['statsmodels STL'], True, ['ok'])
    """
    offsets = result.offsets
    count = offsets.size - 1
    batch = result.batch
    gaps = np.full((count, 3), np.nan)
    compared = np.zeros(count, dtype=np.int64)
    reference: list[str | None] = [None] * count
    status = list(result.status)
    transformed = result.trend + result.seasonal + result.remainder
    for s in range(count):
        if not is_split(status[s]):
            continue
        lo, hi = int(offsets[s]), int(offsets[s + 1])
        if batch.series_periods is not None:
            settings = params.with_periods(batch.series_periods[s]).resolve()
        else:
            settings = params.with_period(int(batch.periods[s])).resolve()
        y = transformed[lo:hi]
        reason = _cannot_follow(settings, y)
        if reason:
            status[s] = reason
            continue
        try:
            trend, seasonal, reference[s] = _reference(settings, y)
        except ValueError as exc:  # a setting statsmodels does not take, in its own words
            status[s] = f"statsmodels cannot follow: {exc}"
            continue
        gaps[s, 0] = np.max(np.abs(trend - result.trend[lo:hi]))
        gaps[s, 1] = np.max(np.abs(seasonal - result.seasonal[lo:hi]))
        gaps[s, 2] = np.max(np.abs((y - trend - seasonal) - result.remainder[lo:hi]))
        compared[s] = hi - lo
    return Audit(reference, compared, gaps, status)
