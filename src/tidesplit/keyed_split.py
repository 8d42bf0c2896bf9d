"""Rows of a keyed table (values and times per series) through the calendar to a split.

The fronts hand over each series' rows sorted by time; here we put them on their regular
grid (gaps become missing values), choose periods where none were given, split, and map the
components back to the input rows, or keep the whole grid when gaps are to be filled.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from . import calendar, memory
from . import effects as effects_front
from .answers import COMPONENTS
from .batch_split import BatchResult, split_batch
from .params import SplitParams
from .status import OK


@dataclass
class RowsResult:
    """Components per output row: the input rows, or the whole grid with ``fill_gaps``."""

    batch: BatchResult  # on the grid, one entry per series
    offsets: np.ndarray  # output rows of each series
    trend: np.ndarray
    seasonal: np.ndarray
    remainder: np.ndarray
    adjusted: np.ndarray
    weight: np.ndarray
    calendar_effect: np.ndarray
    outside_effect: np.ndarray
    adjusted_season_only: np.ndarray
    seasonal_parts: np.ndarray | None  # periods x output rows, with several periods
    inserted: np.ndarray  # per output row: a time inserted into a gap
    source: np.ndarray | None  # per output row: its input row, -1 if inserted (fill_gaps)
    codes: np.ndarray | None  # per output row: time code (fill_gaps)
    grid: calendar.Grid | None = None  # the regular grid, when times were given

    @property
    def status(self) -> list[str]:
        return self.batch.status


def _choose_periods(
    params: SplitParams,
    grid_values: np.ndarray,
    grid: calendar.Grid | None,
    kind: str,
    status: list[str],
) -> tuple[list[SplitParams], np.ndarray]:
    """One parameter set per distinct period (or period list) the series need."""
    count = len(status)
    automatic = params.period is None and (not params.multi or params.periods == ())
    if not automatic:
        return [params], np.zeros(count, dtype=np.int64)
    wanted: list[tuple[int, ...]] = []
    for s in range(count):
        if status[s] != OK:
            wanted.append(())
            continue
        if grid is not None and kind != "integer":
            unit, step = int(grid.unit[s]), int(grid.step[s])
            found = (
                calendar.periods_for_step(unit, step)
                if params.multi
                else tuple(p for p in [calendar.period_for_step(unit, step)] if p)
            )
            if not found:
                status[s] = (
                    f"no seasonal period is implied by a step of "
                    f"{calendar.describe_step(unit, step)}; give one"
                )
        else:
            lo, hi = (grid.offsets[s], grid.offsets[s + 1]) if grid else (0, grid_values.size)
            estimate = calendar.estimate_period(grid_values[lo:hi])
            found = (estimate,) if estimate else ()
            if not found:
                status[s] = "no seasonal cycle found in the data; give period"
        wanted.append(found)
    distinct = sorted({w for w in wanted if w})
    index = {w: i for i, w in enumerate(distinct)}
    groups = np.array([index.get(w, 0) for w in wanted], dtype=np.int64)
    if not distinct:
        # every series already failed; any valid period keeps split_batch's bookkeeping
        return [params.with_period(2)], groups
    sets = [params.with_periods(w) if params.multi else params.with_period(w[0]) for w in distinct]
    return sets, groups


def _outside_on_grid(
    values: np.ndarray,
    offsets: np.ndarray,
    outside: np.ndarray | None,
    names: tuple[str, ...],
    positions: np.ndarray | None,
    size: int,
    status: list[str],
    describe: Callable[[int, int], str],
    grid_offsets: np.ndarray,
) -> np.ndarray:
    """The outside columns on the grid (NaN in gaps); a series with an observed value whose
    outside value is missing or infinite gets a status that names the column and the time."""
    if outside is None or outside.shape != (values.size, len(names)):
        raise ValueError("outside must hold one value per row for each outside column")
    bad = ~np.isfinite(outside) & ~np.isnan(values)[:, None]
    if bad.any():
        rows, columns = np.nonzero(bad)
        series = np.searchsorted(offsets, rows, side="right") - 1
        first = np.unique(series, return_index=True)[1]
        for row, column, s in zip(rows[first], columns[first], series[first], strict=True):
            if status[s] != OK:
                continue
            where = row - offsets[s] if positions is None else positions[row] - grid_offsets[s]
            word = "missing" if np.isnan(outside[row, column]) else "not finite"
            status[s] = (
                f"the outside column {names[column]!r} is {word} at {describe(s, int(where))}, "
                "where the value is observed"
            )
    if positions is None:
        return np.array(outside, dtype=np.float64)
    placed = np.full((size, len(names)), np.nan)
    placed[positions] = outside
    return placed


def split_rows(
    values: np.ndarray,
    offsets: np.ndarray,
    params: SplitParams,
    *,
    codes: np.ndarray | None = None,
    kind: str = "integer",
    time_zone: str | None = None,
    label: Callable[[int], str] = lambda i: f"#{i}",
    status: list[str] | None = None,
    on_error: str = "raise",
    parallel: bool = True,
    fill_gaps: bool = False,
    effects: effects_front.Request | None = None,
    outside: np.ndarray | None = None,
) -> RowsResult:
    """Split series given as rows sorted by time (``codes``), gaps and calendars included.

    Without ``codes`` the rows are taken as consecutive points. A period left out is implied
    by the step (see ``calendar.period_for_step``), or estimated from the data for integer
    times; ``params.periods == ()`` asks for several periods implied by the step.
    ``outside`` holds the values of ``effects.outside``'s columns per row (rows x columns,
    NaN for NULL): a series with an observed value whose outside value is missing or not
    finite is not split (its status says which column and when).

    >>> out = split_rows(np.array([1.0, 3, 1, 3, 1, 3, 1, 3]), np.array([0, 8]),
    ...                  SplitParams(period=2), codes=np.array([0, 1, 2, 3, 4, 6, 7, 8]),
    ...                  fill_gaps=True)
    >>> out.inserted.tolist()
    [False, False, False, False, False, True, False, False, False]
    """
    params.check()  # an argument no series can be split with fails before any series runs
    values = np.ascontiguousarray(values, dtype=np.float64)
    offsets = np.ascontiguousarray(offsets, dtype=np.int64)
    count = offsets.size - 1
    status = [OK] * count if status is None else list(status)
    lengths = np.diff(offsets)
    grid = None
    grid_values = values
    grid_offsets = offsets
    positions = None
    if codes is not None:
        calendar.refuse_far_apart(codes, offsets, kind, status)
        grid = calendar.regularise(codes, offsets, kind, status, time_zone)
        grid_offsets = grid.offsets
        if not grid.complete:
            positions = np.repeat(grid.offsets[:-1], lengths) + grid.slots
            grid_values = memory.full(grid.offsets[-1], np.nan)
            grid_values[positions] = values
    sets, groups = _choose_periods(params, grid_values, grid, kind, status)
    design = None
    if effects is not None and effects.any:
        grid_outside = None
        if effects.outside:
            grid_outside = _outside_on_grid(
                values, offsets, outside, effects.outside, positions, grid_values.size,
                status, lambda s, i: calendar.point_text(grid, s, i, kind, time_zone),
                grid_offsets,
            )  # fmt: skip
        design = effects_front.build(
            effects, grid, grid_offsets, kind,
            time_zone=time_zone,
            seen=~np.isnan(grid_values),
            periods=np.array([sets[g].period or 1 for g in groups], dtype=np.int64),
            outside=grid_outside,
        )  # fmt: skip
    batch = split_batch(
        grid_values,
        grid_offsets,
        sets,
        groups,
        label=label,
        describe_point=lambda s, i: calendar.point_text(grid, s, i, kind, time_zone),
        describe_phase=lambda s, k, p: calendar.phase_text(grid, s, k, p, kind, time_zone),
        status=status,
        on_error=on_error,
        parallel=parallel,
        design=design,
    )
    parts = batch.seasonal_parts
    if fill_gaps and positions is not None:
        inserted = np.ones(grid_values.size, dtype=bool)
        inserted[positions] = False
        source = memory.full(grid_values.size, -1, dtype=np.int64)
        source[positions] = np.arange(values.size)
        out = {name: getattr(batch, name) for name in COMPONENTS}
        return RowsResult(
            batch=batch,
            offsets=grid_offsets,
            seasonal_parts=parts,
            inserted=inserted,
            source=source,
            codes=calendar.grid_codes(grid, kind, time_zone),
            grid=grid,
            **out,
        )
    if positions is not None:
        out = {name: getattr(batch, name)[positions] for name in COMPONENTS}
        parts = None if parts is None else parts[:, positions]
    else:
        out = {name: getattr(batch, name) for name in COMPONENTS}
    return RowsResult(
        batch=batch,
        offsets=offsets,
        seasonal_parts=parts,
        inserted=np.zeros(values.size, dtype=bool),
        source=np.arange(values.size, dtype=np.int64) if fill_gaps else None,
        codes=codes if fill_gaps else None,
        grid=grid,
        **out,
    )
