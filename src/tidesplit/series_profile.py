"""The profile of each series: strengths of trend and season (Wang, Smith & Hyndman 2006),
the cycle's shape and the remainder's spread, from a split on the regular grid."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import calendar
from .calendar import cycle_label
from .kernel import strengths
from .keyed_split import RowsResult
from .status import split_mask

# The profile's numeric values, in the order the kernel writes them.
PROFILE_COLUMNS = (
    "strength_of_trend",
    "strength_of_season",
    "seasonal_amplitude",
    "remainder_sd",
    "share_down_weighted",
    "remainder_acf1",
)


@dataclass
class Profile:
    """One entry per series."""

    points: np.ndarray  # observed values
    missing: np.ndarray  # missing values and inserted times on the grid
    step: list[str | None]
    values: np.ndarray  # series x PROFILE_COLUMNS
    peak: np.ndarray  # cycle position of the seasonal peak (shortest period), -1 if none
    trough: np.ndarray
    peak_label: list[str | None]
    trough_label: list[str | None]
    strength_by_period: list[dict[int, float]] | None


def profile(result: RowsResult, kind: str) -> Profile:
    """Strengths (Wang, Smith & Hyndman 2006), cycle shape and remainder summaries."""
    batch = result.batch
    offsets = result.offsets
    ok = split_mask(result.status)
    count = offsets.size - 1
    observed = ~np.isnan(result.remainder) | ~np.isnan(result.weight)
    points = np.add.reduceat(observed, offsets[:-1]) if observed.size else np.zeros(count)
    points = np.where(np.diff(offsets) > 0, points, 0)
    missing = np.diff(offsets) - points
    periods = np.where(batch.periods > 0, batch.periods, 1)
    values = np.empty((count, len(PROFILE_COLUMNS)))
    peak = np.empty(count, dtype=np.int64)
    trough = np.empty(count, dtype=np.int64)
    shortest = result.seasonal_parts[0] if result.seasonal_parts is not None else result.seasonal
    strengths.series_summary(
        result.trend,
        shortest,
        result.remainder,
        result.weight,
        offsets,
        periods,
        ok,
        values,
        peak,
        trough,
    )
    if result.seasonal_parts is not None:
        # with several periods, the seasonal strength is that of their sum
        joint = np.empty_like(values)
        strengths.series_summary(
            result.trend,
            result.seasonal,
            result.remainder,
            result.weight,
            offsets,
            periods,
            ok,
            joint,
            np.empty(count, np.int64),
            np.empty(count, np.int64),
        )
        values[:, 1] = joint[:, 1]
    grid = result.grid
    steps: list[str | None] = [None] * count
    peak_label: list[str | None] = [None] * count
    trough_label: list[str | None] = [None] * count
    for s in np.flatnonzero(ok):
        if grid is None:
            continue
        unit, step = int(grid.unit[s]), int(grid.step[s])
        steps[s] = calendar.describe_step(unit, step)
        if result.codes is not None:
            lo = int(offsets[s])
            for pos, labels in ((peak[s], peak_label), (trough[s], trough_label)):
                labels[s] = cycle_label(
                    int(result.codes[lo + pos]), unit, step, int(periods[s]), kind
                )
    by_period = None
    if result.seasonal_parts is not None:
        by_period = []
        for s in range(count):
            sl = slice(int(offsets[s]), int(offsets[s + 1]))
            kept = batch.series_periods[s]
            by_period.append(
                {
                    p: float(strengths.strength(result.seasonal_parts[k, sl], result.remainder[sl]))
                    for k, p in enumerate(kept)
                }
            )
    return Profile(
        points, missing, steps, values, peak, trough, peak_label, trough_label, by_period
    )
