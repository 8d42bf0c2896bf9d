"""A batch of series through checks, transform, kernel and back: the one path every front uses.

Input is the flat layout of an Arrow list array (values plus offsets); output is the same
layout. Fronts (Python API, DuckDB functions, CLI) only convert to and from it.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
from numba import get_num_threads

from . import effects as effects_front
from . import memory, span_choice, transform
from .errors import ParamError, SplitError
from .kernel import checks, linear, regression
from .kernel.lanes import SERIES
from .kernel.layout import (
    COL_ACTIVE,
    COL_INNER,
    COL_OUTER,
    COL_PERIOD,
    COL_SEASON_SPAN,
    COL_TREND_SPAN,
    N_SETTINGS,
)
from .kernel.mstl import mstl_batch_parallel, mstl_batch_serial
from .kernel.stl import stl_batch_parallel, stl_batch_serial
from .params import ON_ERROR, ResolvedParams, SplitParams
from .status import OK, split_mask, with_note
from .tuning import LARGEST_MAGNITUDE, LAUNCH_SERIES, LAUNCH_WORK


@dataclass
class BatchResult:
    """Components in the input's flat layout, plus one entry per series."""

    offsets: np.ndarray
    trend: np.ndarray
    seasonal: np.ndarray
    remainder: np.ndarray
    adjusted: np.ndarray
    weight: np.ndarray
    lambdas: np.ndarray  # Box-Cox lambda used per series; NaN when not transformed
    periods: np.ndarray  # (shortest) period used per series; 0 where none was resolved
    status: list[str]  # "ok" or the reason the series was left unsplit
    # With several periods (MSTL): the periods kept per series, and one seasonal part per
    # period (row k of seasonal_parts belongs to the k-th period of each series).
    series_periods: list[tuple[int, ...]] | None = None
    seasonal_parts: np.ndarray | None = None
    # The season and trend span used per series (of its shortest period; given, default or
    # chosen with choose_spans); -1 where the series was not split.
    season_spans: np.ndarray | None = None
    trend_spans: np.ndarray | None = None
    # Regression effects (``effects``): the calendar effect per point (0 without), the
    # value without its seasonal part only, and per series its coefficients as
    # (name, coefficient, standard error, t-value); None where no effects were asked.
    calendar_effect: np.ndarray | None = None
    outside_effect: np.ndarray | None = None  # the outside columns' effect per point
    adjusted_season_only: np.ndarray | None = None
    coefficients: list[list[tuple[str, float, float, float]] | None] | None = None
    effect_coef: np.ndarray | None = None  # series x design columns (NaN: not fitted)

    def series(self, i: int) -> slice:
        return slice(int(self.offsets[i]), int(self.offsets[i + 1]))

    def periods_used(self) -> list[tuple[int, ...]]:
        """Each series' periods (one, or several with MSTL); () for a series not split."""
        ok = split_mask(self.status)
        return [
            (
                tuple(self.series_periods[s])
                if self.series_periods is not None
                else (int(self.periods[s]),)
            )
            if ok[s]
            else ()
            for s in range(ok.size)
        ]


def segment_counts(mask: np.ndarray, offsets: np.ndarray) -> np.ndarray:
    """How many ``True`` entries each segment of ``mask`` holds (empty segments give 0).

    >>> segment_counts(np.array([True, False, True, True]), np.array([0, 1, 1, 4])).tolist()
    [1, 0, 2]
    """
    running = np.concatenate(([0], np.cumsum(mask, dtype=np.int64)))
    return running[offsets[1:]] - running[offsets[:-1]]


def _point_text(describe_point: Callable[[int, int], str] | None, s: int, i: int) -> str:
    return describe_point(s, i) if describe_point else f"position {i}"


def _phase_text(
    describe_phase: Callable[[int, int, int], str] | None, s: int, phase: int, period: int
) -> str:
    return (
        describe_phase(s, phase, period)
        if describe_phase
        else (f"cycle position {phase} of {period}")
    )


def _check_series(
    values: np.ndarray,
    offsets: np.ndarray,
    periods: np.ndarray,
    needs_positive: np.ndarray,
    transform_names: dict[int, str],
    status: list[str],
    describe_point: Callable[[int, int], str] | None,
    describe_phase: Callable[[int, int, int], str] | None,
) -> None:
    """Write a reason into ``status`` for each series that cannot be split with ``periods``.

    One compiled pass finds the failing series; only those are visited here, to word it.
    """
    count = offsets.size - 1
    if status.count(OK) == count:  # the common case, without a pass in Python
        todo = periods > 0
    else:
        todo = np.array([st == OK for st in status], dtype=bool) & (periods > 0)
    code = np.empty(count, dtype=np.int64)
    where = np.empty(count, dtype=np.int64)
    checks.scan_batch(
        values, offsets, periods, LARGEST_MAGNITUDE, needs_positive, todo, code, where
    )
    for s in np.flatnonzero(code != checks.FINE):
        lo, n, period, at = int(offsets[s]), int(offsets[s + 1] - offsets[s]), periods[s], where[s]
        if code[s] == checks.TOO_SHORT:
            status[s] = f"has {n} points; at least two periods ({2 * period}) are needed"
        elif code[s] == checks.INFINITE:
            status[s] = f"infinite value at {_point_text(describe_point, s, at)}"
        elif code[s] == checks.TOO_LARGE:
            status[s] = (
                f"value {values[lo + at]:g} at {_point_text(describe_point, s, at)} is beyond "
                f"{LARGEST_MAGNITUDE:g} in size, the largest tidesplit splits"
            )
        elif code[s] == checks.NOT_POSITIVE:
            status[s] = (
                f"value {values[lo + at]:g} at {_point_text(describe_point, s, at)} is not "
                f"positive, which the {transform_names[s]} transform needs"
            )
        elif code[s] == checks.ALL_MISSING:
            status[s] = "every value is missing"
        else:
            status[s] = f"no value is observed at {_phase_text(describe_phase, s, at, period)}"


def _check_transformed(
    y: np.ndarray,
    offsets: np.ndarray,
    transformed: np.ndarray,
    lambdas: np.ndarray,
    status: list[str],
    describe_point: Callable[[int, int], str] | None,
) -> None:
    """A transform can carry a finite value out of range (Box-Cox of a tiny value with a
    negative lambda, say): name the first such value of each series."""
    out_of_range = ~(np.abs(y) <= LARGEST_MAGNITUDE) & ~np.isnan(y)
    if not out_of_range.any():
        return
    for s in np.flatnonzero((segment_counts(out_of_range, offsets) > 0) & transformed):
        if status[s] != OK:
            continue
        lo, hi = int(offsets[s]), int(offsets[s + 1])
        at = int(np.flatnonzero(out_of_range[lo:hi])[0])
        status[s] = (
            f"the Box-Cox transform with lambda {lambdas[s]:g} takes the value at "
            f"{_point_text(describe_point, s, at)} to {y[lo + at]:g}, beyond "
            f"{LARGEST_MAGNITUDE:g} in size"
        )


def _check_output(
    values: np.ndarray,
    offsets: np.ndarray,
    broken: np.ndarray,
    settings: np.ndarray,
    status: list[str],
    describe_phase: Callable[[int, int, int], str] | None,
) -> np.ndarray:
    """Series whose split came out non-finite somewhere (``broken``, from
    ``checks.finish_points``), each given a reason in ``status``.

    The checks before the split rule out what can be foreseen; this is the net under them,
    so that no series reports ``ok`` with a missing trend or seasonal value.
    """
    failed = np.flatnonzero(broken & (settings[:, 0, COL_ACTIVE] == 1))
    for s in failed:
        lo, hi = int(offsets[s]), int(offsets[s + 1])
        period = int(settings[s, 0, COL_PERIOD])
        if settings[s, 0, COL_OUTER] > 0:
            seen = ~np.isnan(values[lo:hi])
            per_phase = np.bincount(np.arange(hi - lo) % period, weights=seen, minlength=period)
            phase = int(np.argmin(per_phase))
            status[s] = (
                "the robust fit broke down: it left no weight on some cycle position "
                f"(the fewest values, {int(per_phase[phase])}, are observed at "
                f"{_phase_text(describe_phase, s, phase, period)}); split it without "
                "robust or give it more data"
            )
        else:
            status[s] = "the split gave non-finite components"
    return failed


def _note_unreachable(
    values: np.ndarray,
    offsets: np.ndarray,
    adjusted: np.ndarray,
    lambdas: np.ndarray,
    back: np.ndarray,
    status: list[str],
    describe_point: Callable[[int, int], str] | None,
) -> None:
    """Say where the seasonally adjusted value has no value on the original scale.

    With a Box-Cox lambda above 0, transformed values below -1 / lambda (and with one below
    0, above it) are reached by no number; a low value in a high season can fall there once
    its seasonal part is taken away. Such a point's adjusted value stays NULL and the
    series' status says where, so no number goes missing with a plain ``ok``.
    """
    unreachable = back & np.isnan(adjusted) & ~np.isnan(values)
    if not unreachable.any():
        return
    for s in np.flatnonzero(segment_counts(unreachable, offsets)):
        lo, hi = int(offsets[s]), int(offsets[s + 1])
        where = np.flatnonzero(unreachable[lo:hi])
        status[s] = with_note(
            status[s],
            f"adjusted is NULL at {where.size} point(s), first at "
            f"{_point_text(describe_point, s, int(where[0]))}: without its seasonal part the "
            f"value lies outside what the Box-Cox transform with lambda {lambdas[s]:g} reaches",
        )


def _settle(status: list[str], on_error: str, label: Callable[[int], str]) -> np.ndarray:
    """Which series may go on (status ``ok``); raises on the first bad one unless keeping."""
    ok = split_mask(status)
    bad = np.flatnonzero(~ok)
    if on_error == "raise" and bad.size:
        first = int(bad[0])
        more = f" (and {bad.size - 1} more series)" if bad.size > 1 else ""
        raise SplitError(f"series {label(first)}: {status[first]}{more}")
    return ok


def _equal_shape_groups(
    members: np.ndarray, lengths: np.ndarray, settings: np.ndarray
) -> list[tuple[np.ndarray, int, np.ndarray]]:
    """Split ``members`` into groups of one length and one settings row."""
    if members.size == 0:
        return []
    rows = settings[members]
    if (rows == rows[0]).all():
        setting_ids = np.zeros(members.size, dtype=np.int64)
        distinct_rows = rows[:1]
    else:
        distinct_rows, setting_ids = np.unique(rows, axis=0, return_inverse=True)
        setting_ids = setting_ids.reshape(-1)
    distinct_lengths, length_ids = np.unique(lengths[members], return_inverse=True)
    combined = setting_ids * distinct_lengths.size + length_ids
    groups = []
    for key in np.unique(combined):
        chosen = members[combined == key]
        groups.append(
            (
                chosen,
                int(distinct_lengths[key % distinct_lengths.size]),
                distinct_rows[key // distinct_lengths.size],
            )
        )
    return groups


def _run_kernel(
    y: np.ndarray,
    offsets: np.ndarray,
    settings: np.ndarray,
    parallel: bool,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Trend, seasonal and weights of every active series (NaN elsewhere)."""
    trend = memory.empty(y.size)
    seasonal = memory.empty(y.size)
    weight = memory.empty(y.size)
    lengths = np.diff(offsets)
    idle = settings[:, COL_ACTIVE] == 0
    if idle.any():  # every active series is written below; the others are NaN
        rows = np.repeat(idle, lengths)
        trend[rows] = seasonal[rows] = weight[rows] = np.nan
    gaps = np.isnan(y)
    if gaps.any():
        complete = segment_counts(gaps, offsets) == 0
    else:
        complete = np.ones(offsets.size - 1, dtype=bool)
    direct = settings.copy()
    # The linear-map shortcut for complete, non-robust, short series. Whether a series takes
    # it depends on its own length and settings only (linear.eligible), never on how many
    # others share its shape or on the matrices already built: the two routes differ in the
    # last bits, and a series' numbers must not depend on its batch.
    candidates = np.flatnonzero((settings[:, COL_ACTIVE] == 1) & complete)
    for members, n, row in _equal_shape_groups(candidates, lengths, settings):
        if not linear.eligible(n, row):
            continue
        starts = offsets[members]
        linear.apply_flat(y, starts, n, row, trend, seasonal, parallel)
        if (np.diff(starts) == n).all():  # one run of adjacent series, the common case
            weight[starts[0] : starts[0] + n * members.size] = 1.0
        else:
            weight[np.repeat(starts, n) + np.tile(np.arange(n), members.size)] = 1.0
        direct[members, COL_ACTIVE] = 0
    if direct[:, COL_ACTIVE].any():
        run = stl_batch_parallel if parallel else stl_batch_serial
        passes = direct[:, COL_INNER] * (direct[:, COL_OUTER] + 1) * direct[:, COL_ACTIVE]
        for first, stop in _launches(lengths, passes):
            run(y, offsets[first : stop + 1], direct[first:stop], trend, seasonal, weight)
    return trend, seasonal, weight


def _launches(lengths: np.ndarray, passes: np.ndarray) -> list[tuple[int, int]]:
    """Runs of consecutive series, ``(first, stop)``, of about LAUNCH_WORK point-passes each,
    and (but the last) of LAUNCH_SERIES series at least, or of one lane group per numba
    thread where that is more, in whole lane groups per thread.

    A compiled kernel does not return to Python until it is done, so Python can raise a
    KeyboardInterrupt (Ctrl-C) only between launches; bounded launches make a long batch
    stoppable. The least count keeps long series (an hourly year, robust: ten of them make
    the work) running side by side in the kernel's lanes, eight of one shape at a time, on
    every thread. A series' numbers do not depend on the launch it falls in.

    >>> _launches(np.array([3, 4, 5]), np.array([1, 1, 1]))
    [(0, 3)]
    """
    work = lengths * passes
    if work.size == 0:
        return []
    # a launch (but the last) holds a whole number of lane groups per thread, so that the
    # threads' shares come out even: 21 long series on two threads were a group on one
    # and two on the other, a third of the time with a core idle
    group = SERIES * get_num_threads()
    least = max(LAUNCH_SERIES, group)
    before = np.cumsum(work) - work
    ids = before // LAUNCH_WORK
    edges = [0]
    for cut in (np.flatnonzero(np.diff(ids)) + 1).tolist():
        size = cut - edges[-1]
        if size >= least:
            rounded = edges[-1] - (-size // group) * group
            if rounded < work.size:
                edges.append(rounded)
    if work.size - edges[-1] < least and len(edges) > 1:
        edges.pop()  # a short tail joins the launch before it
    edges.append(work.size)
    return [(edges[i], edges[i + 1]) for i in range(len(edges) - 1)]


def split_batch(
    values: np.ndarray,
    offsets: np.ndarray,
    params: SplitParams | Sequence[SplitParams],
    groups: np.ndarray | None = None,
    *,
    label: Callable[[int], str] = lambda i: f"#{i}",
    describe_point: Callable[[int, int], str] | None = None,
    describe_phase: Callable[[int, int, int], str] | None = None,
    status: list[str] | None = None,
    on_error: str = "raise",
    parallel: bool = True,
    design: effects_front.Design | None = None,
) -> BatchResult:
    """Split every series of a flat batch.

    Parameters
    ----------
    values : float64 array, NaN for missing values, all series end to end.
    offsets : int64 array of ``n_series + 1`` boundaries into ``values``.
    params : one parameter set for all series, or one per group (see ``groups``).
    groups : index into ``params`` per series, when several parameter sets are given.
    label : names series ``i`` in error messages (for example its key).
    describe_point : ``(series, position)`` to readable text for messages (its time);
        positions are named as such without it.
    describe_phase : ``(series, cycle position, period)`` to readable text (a month,
        weekday or hour, with the first time it occurs).
    status : reasons already known per series (``"ok"`` for none), from the front.
    on_error : ``"raise"`` stops at the first bad series; ``"keep"`` leaves it unsplit
        (NaN components) with the reason in ``status``.
    parallel : spread series over numba's threads; pass False when the caller brings
        its own threads (a database running UDF calls in parallel).
    design : regression columns on the same layout (``effects.build``), fitted beside the
        split by backfitting (``kernel.regression.backfit``); None fits none, and the path
        is the plain split's.

    Returns
    -------
    BatchResult
        Components in the input's layout; NaN throughout for a series whose status is not
        ``ok``.

    Examples
    --------
    >>> y = 10 + np.tile([1.0, -1.0, 2.0, -2.0], 6)
    >>> out = split_batch(y, np.array([0, 24]), SplitParams(period=4))
    >>> out.status, bool(np.allclose(out.trend + out.seasonal + out.remainder, y))
    (['ok'], True)
    """
    if on_error not in ON_ERROR:
        raise ParamError(f"on_error must be one of {', '.join(ON_ERROR)}, got {on_error!r}")
    values = np.ascontiguousarray(values, dtype=np.float64)
    offsets = np.ascontiguousarray(offsets, dtype=np.int64)
    count = offsets.size - 1
    lengths = np.diff(offsets)
    if isinstance(params, SplitParams):
        params.check()  # an argument no series can be split with fails the call
        params = [params]
        groups = None
    if groups is None:
        groups = np.zeros(count, dtype=np.int64)
    status = [OK] * count if status is None else list(status)
    plan = _plan(params, groups, lengths, status)
    _check_inputs(values, offsets, plan, status, describe_point, describe_phase)
    _choose_lambdas(values, offsets, plan, status)
    ok = _settle(status, on_error, label)
    y, back = _transform(values, offsets, plan, ok, status, describe_point)
    if back is not None:
        ok = _settle(status, on_error, label)
    plan.settings[:, :, COL_ACTIVE] = ok[:, None]
    if plan.choose.any():
        span_choice.choose(
            y, offsets, plan.settings[:, 0], plan.choose, plan.fixed, _run_kernel, parallel
        )
    fitted = None
    if design is not None and plan.multi:
        if (plan.settings[:, :, COL_OUTER] > 0).any():
            raise ParamError(
                "regression effects with several periods are fitted without robustness: "
                "leave robust out, or split with one period"
            )
        trend, seasonal, weight, fitted, parts = _run_effects_multi(
            y, offsets, plan, params, groups, design, parallel
        )
    elif design is not None:
        trend, seasonal, weight, fitted = _run_effects(y, offsets, plan, design, parallel)
        parts = None
    else:
        trend, seasonal, weight, parts = _run(y, offsets, plan, params, groups, parallel)
    remainder, adjusted, calendar = (memory.empty(y.size) for _ in range(3))
    broken = np.empty(count, dtype=bool)
    checks.finish_points(
        values, y, offsets, trend, seasonal, weight, remainder, adjusted, calendar, broken
    )
    if _check_output(values, offsets, broken, plan.settings, status, describe_phase).size:
        ok = _settle(status, on_error, label)
        rows = np.repeat(~ok, lengths)
        for points in (trend, seasonal, weight, remainder, adjusted, calendar):
            points[rows] = np.nan
        if parts is not None:
            parts[:, rows] = np.nan
    result = _assemble(
        values, offsets, trend, seasonal, weight, remainder, adjusted, parts, plan, ok, back,
        status, describe_point,
    )  # fmt: skip
    if fitted is not None:
        _add_effects(result, y, fitted, design, plan, ok, back, status, describe_point)
    else:
        result.calendar_effect = calendar
        result.outside_effect = calendar
        result.adjusted_season_only = result.adjusted
    return result


@dataclass
class _Plan:
    """What each series is split with: kernel settings rows and what comes before them."""

    settings: np.ndarray  # series x periods x N_SETTINGS
    n_periods: np.ndarray  # periods kept per series (MSTL drops the long ones)
    periods: np.ndarray  # (shortest) period per series, 0 where none
    lambdas: np.ndarray  # Box-Cox lambda per series, NaN until chosen or without one
    transformed: np.ndarray  # per series: a transform applies
    auto_lambda: np.ndarray  # per series: lambda to be chosen from the data
    transform_names: dict[int, str]
    dropped: dict[int, tuple[int, ...]]  # series -> periods MSTL dropped
    multi: bool
    lambda_bounds: np.ndarray  # series x 2: where Guerrero's lambda is searched
    choose: np.ndarray  # per series: spans chosen from the data (choose_spans)
    fixed: np.ndarray  # series x 4: which spans and jumps were given (span_choice.FIXED_*)


def _plan(
    params: Sequence[SplitParams], groups: np.ndarray, lengths: np.ndarray, status: list[str]
) -> _Plan:
    """Resolve each group's parameters into the settings of its series."""
    count = lengths.size
    resolved_groups: dict[int, ResolvedParams] = {}
    for g, group_params in enumerate(params):
        try:
            resolved_groups[g] = group_params.resolve()
        except ParamError as exc:
            # only periods implied per series get here (the fronts check the arguments
            # before any series runs), so the reason belongs to these series
            for s in np.flatnonzero(groups == g):
                if status[s] == OK:
                    status[s] = str(exc)
    width = max((len(r.periods) for r in resolved_groups.values()), default=1)
    plan = _Plan(
        settings=np.zeros((count, width, N_SETTINGS), dtype=np.int64),
        n_periods=np.zeros(count, dtype=np.int64),
        periods=np.zeros(count, dtype=np.int64),
        lambdas=np.full(count, np.nan),
        transformed=np.zeros(count, dtype=bool),
        auto_lambda=np.zeros(count, dtype=bool),
        transform_names={},
        dropped={},
        multi=any(p.multi for p in params),
        lambda_bounds=np.zeros((count, 2)),
        choose=np.zeros(count, dtype=bool),
        fixed=np.zeros((count, 4), dtype=bool),
    )
    for g, resolved in resolved_groups.items():
        members = np.flatnonzero(groups == g)
        if members.size == 0:
            continue
        rows = resolved.settings_rows()
        plan.settings[members, : rows.shape[0]] = rows
        plan.periods[members] = resolved.period
        plan.n_periods[members] = rows.shape[0]
        if params[g].multi:
            # MSTL drops periods that are not shorter than half the series
            keep = (np.asarray(resolved.periods)[None, :] * 2 < lengths[members, None]).sum(1)
            for s, kept in zip(members, keep, strict=True):
                if kept < len(resolved.periods):
                    plan.dropped[int(s)] = resolved.periods[kept:]
            plan.n_periods[members] = np.maximum(keep, 1)
        if params[g].choose_spans:
            given = params[g]
            plan.choose[members] = True
            plan.fixed[members] = [
                getattr(given, name) is not None
                for name in ("season_span", "trend_span", "season_jump", "trend_jump")
            ]
        if resolved.transform != "none":
            plan.transformed[members] = True
            plan.transform_names.update(dict.fromkeys(members.tolist(), resolved.transform))
            if resolved.boxcox_lambda is None:
                plan.auto_lambda[members] = True
                plan.lambda_bounds[members] = resolved.boxcox_bounds
            else:
                plan.lambdas[members] = resolved.boxcox_lambda
    return plan


def _check_inputs(
    values: np.ndarray,
    offsets: np.ndarray,
    plan: _Plan,
    status: list[str],
    describe_point: Callable[[int, int], str] | None,
    describe_phase: Callable[[int, int, int], str] | None,
) -> None:
    """Every check of the input, for each kept period (each needs every cycle position
    observed, not only the shortest)."""
    wording = (describe_point, describe_phase)
    names = plan.transform_names
    _check_series(values, offsets, plan.periods, plan.transformed, names, status, *wording)
    for k in range(1, plan.settings.shape[1]):
        longer = np.where(plan.n_periods > k, plan.settings[:, k, COL_PERIOD], 0)
        _check_series(values, offsets, longer, plan.transformed, names, status, *wording)


def _choose_lambdas(
    values: np.ndarray, offsets: np.ndarray, plan: _Plan, status: list[str]
) -> None:
    """Guerrero's lambda for each series that asks for one."""
    if not plan.auto_lambda.any():
        return
    ok = np.array([s == OK for s in status], dtype=bool)
    chosen = transform.guerrero_lambdas(
        values, offsets, plan.periods, plan.auto_lambda & ok, plan.lambda_bounds
    )
    plan.lambdas[plan.auto_lambda] = chosen[plan.auto_lambda]
    for s in np.flatnonzero(plan.auto_lambda & ok & np.isnan(plan.lambdas)):
        status[s] = "Box-Cox lambda cannot be chosen: fewer than two cycles with spread"
        ok[s] = False
    for s, note in enumerate(transform.bound_notes(chosen, plan.lambda_bounds)):
        if note and ok[s]:
            status[s] = with_note(status[s], note)


def _transform(
    values: np.ndarray,
    offsets: np.ndarray,
    plan: _Plan,
    ok: np.ndarray,
    status: list[str],
    describe_point: Callable[[int, int], str] | None,
) -> tuple[np.ndarray, np.ndarray | None]:
    """The values the kernel splits, and which points were transformed (None: none was)."""
    y = memory.copy(values)
    if not (plan.transformed & ok).any():
        return y, None
    back = np.repeat(plan.transformed & ok, np.diff(offsets))
    y[back] = transform.forward(values[back], np.repeat(plan.lambdas, np.diff(offsets))[back])
    _check_transformed(y, offsets, plan.transformed & ok, plan.lambdas, status, describe_point)
    return y, back


def _run(
    y: np.ndarray,
    offsets: np.ndarray,
    plan: _Plan,
    params: Sequence[SplitParams],
    groups: np.ndarray,
    parallel: bool,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray | None]:
    """Trend, seasonal, weights and (with several periods) the parts, of the active series."""
    if not plan.multi:
        return (*_run_kernel(y, offsets, plan.settings[:, 0], parallel), None)
    trend, parts, weight = _run_multi_kernel(
        y, offsets, plan.settings, plan.n_periods, params, groups, parallel
    )
    return trend, parts.sum(axis=0), weight, parts


def _assemble(
    values: np.ndarray,
    offsets: np.ndarray,
    trend: np.ndarray,
    seasonal: np.ndarray,
    weight: np.ndarray,
    remainder: np.ndarray,
    adjusted: np.ndarray,
    parts: np.ndarray | None,
    plan: _Plan,
    ok: np.ndarray,
    back: np.ndarray | None,
    status: list[str],
    describe_point: Callable[[int, int], str] | None,
) -> BatchResult:
    """The seasonally adjusted series back on the original scale, the notes, the result."""
    lengths = np.diff(offsets)
    series_periods = None
    if plan.multi:
        series_periods = [
            tuple(int(p) for p in plan.settings[s, : plan.n_periods[s], COL_PERIOD])
            if ok[s]
            else ()
            for s in range(lengths.size)
        ]
        for s, gone in plan.dropped.items():
            if ok[s]:
                shown = ", ".join(str(p) for p in gone)
                status[s] = with_note(
                    status[s], f"dropped period {shown}: not shorter than half the series"
                )
    lambdas = plan.lambdas
    if back is not None:
        back = back & np.repeat(ok, lengths)
        adjusted[back] = transform.inverse(adjusted[back], np.repeat(lambdas, lengths)[back])
        _note_unreachable(values, offsets, adjusted, lambdas, back, status, describe_point)
    lambdas[~ok] = np.nan
    periods = plan.periods
    periods[~ok] = 0
    season_spans = np.where(ok, plan.settings[:, 0, COL_SEASON_SPAN], -1)
    trend_spans = np.where(ok, plan.settings[:, 0, COL_TREND_SPAN], -1)
    return BatchResult(
        offsets=offsets,
        trend=trend,
        seasonal=seasonal,
        remainder=remainder,
        adjusted=adjusted,
        weight=weight,
        lambdas=lambdas,
        periods=periods,
        status=status,
        series_periods=series_periods,
        seasonal_parts=parts,
        season_spans=season_spans,
        trend_spans=trend_spans,
    )


def _run_multi_kernel(
    y: np.ndarray,
    offsets: np.ndarray,
    settings: np.ndarray,
    n_periods: np.ndarray,
    params: Sequence[SplitParams],
    groups: np.ndarray,
    parallel: bool,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """MSTL over every active series; returns trend, seasonal parts (periods x points), weights."""
    width = settings.shape[1]
    trend = memory.full(y.size, np.nan)
    parts = memory.full(width * y.size, np.nan).reshape(width, y.size)
    weight = memory.full(y.size, np.nan)
    run = mstl_batch_parallel if parallel else mstl_batch_serial
    for g, group_params in enumerate(params):
        members = groups == g
        if not members.any():
            continue
        rounds = group_params.resolve().iterations if settings[members, 0, COL_ACTIVE].any() else 1
        chosen = settings.copy()
        chosen[~members, :, COL_ACTIVE] = 0
        head = chosen[:, 0]
        passes = rounds * n_periods * head[:, COL_INNER] * (head[:, COL_OUTER] + 1)
        for first, stop in _launches(np.diff(offsets), passes * head[:, COL_ACTIVE]):
            run(
                y,
                offsets[first : stop + 1],
                chosen[first:stop],
                n_periods[first:stop],
                rounds,
                trend,
                parts,
                weight,
            )
    lengths = np.diff(offsets)
    # a period a series dropped contributes nothing; an unsplit series has no parts at all
    active = np.repeat(settings[:, 0, COL_ACTIVE] == 1, lengths)
    unused = (np.arange(width)[:, None] >= np.repeat(n_periods, lengths)[None, :]) & active
    parts[unused] = 0.0
    return trend, parts, weight


@dataclass
class _Fitted:
    """What backfitting gave beside the components."""

    effect: np.ndarray  # X b per point, every column
    coef: np.ndarray  # series x columns
    cov: np.ndarray  # series x columns x columns
    verdict: np.ndarray  # series x columns (kernel.regression KEPT, ...)
    settled: np.ndarray  # per series
    rounds: np.ndarray
    last_move: np.ndarray  # per series: the last round's largest change / the spread


# Backfitting stops when no fitted effect moves by more than this share of the series'
# spread in a round, or after this many rounds (ours).
EFFECTS_TOLERANCE = 1e-6
EFFECTS_ROUNDS = 25


def _run_effects(
    y: np.ndarray, offsets: np.ndarray, plan: _Plan, design: effects_front.Design, parallel: bool
) -> tuple[np.ndarray, np.ndarray, np.ndarray, _Fitted]:
    """Trend, seasonal and weights of every active series fitted with the design's columns."""
    settings = plan.settings[:, 0]
    lengths = np.diff(offsets)
    active = settings[:, COL_ACTIVE] == 1
    seen = segment_counts(~np.isnan(y), offsets)
    # the degrees of freedom the split takes, per distinct length and settings
    used = np.zeros(lengths.size)
    members = np.flatnonzero(active)
    if members.size:
        shapes = np.column_stack([lengths[members], settings[members]])
        distinct, which = np.unique(shapes, axis=0, return_inverse=True)
        degrees = np.array([regression.split_degrees(int(d[0]), d[1:]) for d in distinct])
        used[members] = degrees[which.reshape(-1)] * seen[members] / np.maximum(lengths[members], 1)
    verdict = np.where(design.absent, regression.ABSENT, regression.KEPT).astype(np.int64)
    X = np.ascontiguousarray(design.X, dtype=np.float64)
    regression.screen_batch(y, offsets, X, settings[:, COL_PERIOD].copy(), used, verdict)
    kept = verdict == regression.KEPT

    def split(values: np.ndarray, which: np.ndarray) -> tuple[np.ndarray, ...]:
        chosen = settings.copy()
        chosen[~which, COL_ACTIVE] = 0
        return _run_kernel(values, offsets, chosen, parallel)

    robust = active & (settings[:, COL_OUTER] > 0)
    # start from where backfitting with the plain (linear) split settles, solved directly:
    # a plain fit then settles in a round or two, and a robust one takes it for its first
    # pass (from no effect at all, the points the effects move most, a leap-year
    # February, would look like outliers and lose their weight)
    start = _plain_start(y, offsets, X, kept, active, settings, parallel)
    effect = np.zeros(y.size)
    regression.effect_of(X, offsets, start, active & ~robust, effect)
    out = regression.backfit(
        y, offsets, X, kept, active & ~robust, split, used, None, effect,
        tolerance=EFFECTS_TOLERANCE, most_rounds=EFFECTS_ROUNDS,
    )  # fmt: skip
    if robust.any():
        # the robustness loop outside the backfitting (regression.robust_batch), in
        # launches of bounded work so that a long batch stays interruptible
        chosen = settings.copy()
        chosen[~robust, COL_ACTIVE] = 0
        passes = chosen[:, COL_INNER] * (chosen[:, COL_OUTER] + 2 + kept.sum(axis=1))
        screened = np.ascontiguousarray(verdict)  # screened again on the points kept
        rows = np.repeat(robust, lengths)
        for first, stop in _launches(lengths, passes * robust):
            part = slice(offsets[first], offsets[stop])
            found = regression.robust_batch(
                y[part], offsets[first : stop + 1] - offsets[first], X[part],
                screened[first:stop], chosen[first:stop], used[first:stop], start[first:stop],
                tolerance=EFFECTS_TOLERANCE, most_rounds=EFFECTS_ROUNDS, parallel=parallel,
            )  # fmt: skip
            here = rows[part]
            for name in ("trend", "seasonal", "weight", "effect"):
                out[name][part][here] = found[name][here]
            mine = robust[first:stop]
            for name in ("coef", "cov", "scale", "rounds", "settled", "last_move"):
                out[name][first:stop][mine] = found[name][mine]
        verdict = screened
    fitted = _Fitted(
        out["effect"], out["coef"], out["cov"], verdict, out["settled"], out["rounds"],
        out["last_move"],
    )  # fmt: skip
    return out["trend"], out["seasonal"], out["weight"], fitted


def _plain_start(
    y: np.ndarray,
    offsets: np.ndarray,
    X: np.ndarray,
    kept: np.ndarray,
    active: np.ndarray,
    settings: np.ndarray,
    parallel: bool,
) -> np.ndarray:
    """Per series, the coefficients where backfitting with the plain split (without
    robustness) settles (``regression.start_batch``); NaN where singular or not kept."""
    plain = settings.copy()
    plain[:, COL_OUTER] = 0
    plain[~active, COL_ACTIVE] = 0

    def fitted(values: np.ndarray) -> np.ndarray:
        trend, seasonal, _ = _run_kernel(values, offsets, plain, parallel)
        return trend + seasonal

    return _direct_start(fitted, y, offsets, X, kept, active)


def _direct_start(
    fitted: Callable[[np.ndarray], np.ndarray],
    y: np.ndarray,
    offsets: np.ndarray,
    X: np.ndarray,
    kept: np.ndarray,
    active: np.ndarray,
) -> np.ndarray:
    """The coefficients where backfitting with a linear split ``L`` settles (``fitted(v)``
    gives ``L v``, trend plus seasonal, for every active series), by
    ``regression.start_batch``; NaN where singular or not kept."""
    lengths = np.diff(offsets)
    missing = np.isnan(y)
    X_rest = np.empty_like(X)
    for j in range(X.shape[1]):
        X_rest[:, j] = X[:, j] - fitted(np.where(missing, np.nan, X[:, j]))
    coef = np.full(X.shape[1] * lengths.size, np.nan).reshape(lengths.size, X.shape[1])
    regression.start_batch(y - fitted(y), X, X_rest, offsets, kept, active, coef)
    return np.where(np.isfinite(coef), coef, np.nan)


# Random probes for the degrees of freedom of a split with several periods (Hutchinson's
# trace estimator), and the longest series they are run on (longer ones scale up, as
# regression.split_degrees does): the same probes for a shape wherever it is split.
DEGREE_PROBES = 32
DEGREE_POINTS = 17_520
DEGREE_SEED = 20_260_116


def _multi_degrees(
    n: int, settings: np.ndarray, n_periods: int, params: SplitParams, parallel: bool
) -> float:
    """The degrees of freedom ``tr(2 L - L L')`` that MSTL of ``n`` complete points takes
    (``L``: its linear map without robustness), by Hutchinson's (1989) estimator: the mean
    of ``2 z'Lz - |Lz|^2`` over random signs ``z``, each ``Lz`` one split. The map has no
    closed form to build cheaply, and 32 probes give it within about 1% for an hourly year
    (ours: E z'Az = tr A and E |Lz|^2 = tr L'L for independent signs)."""
    size = min(n, DEGREE_POINTS)
    rng = np.random.default_rng([DEGREE_SEED, size, n_periods])
    probes = rng.choice(np.array([-1.0, 1.0]), size=(DEGREE_PROBES, size))
    chosen = np.repeat(settings[None, :, :], DEGREE_PROBES, axis=0).copy()
    chosen[:, :, COL_OUTER] = 0
    chosen[:, :, COL_ACTIVE] = 1
    offsets = np.arange(DEGREE_PROBES + 1, dtype=np.int64) * size
    trend, parts, _ = _run_multi_kernel(
        probes.ravel(), offsets, chosen, np.full(DEGREE_PROBES, n_periods), [params],
        np.zeros(DEGREE_PROBES, dtype=np.int64), parallel,
    )  # fmt: skip
    mapped = (trend + parts.sum(axis=0)).reshape(DEGREE_PROBES, size)
    estimate = np.mean(2.0 * np.sum(probes * mapped, axis=1) - np.sum(mapped * mapped, axis=1))
    return float(estimate * n / size)


def _run_effects_multi(
    y: np.ndarray,
    offsets: np.ndarray,
    plan: _Plan,
    params: Sequence[SplitParams],
    groups: np.ndarray,
    design: effects_front.Design,
    parallel: bool,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, _Fitted, np.ndarray]:
    """The effects beside a split with several periods (MSTL, without robustness): the
    same backfitting as with one period, started where it settles, solved directly; the
    degrees of freedom by ``_multi_degrees``, columns screened against the longest period
    (a column that repeats with a shorter period that divides it repeats with it too)."""
    head = plan.settings[:, 0]
    lengths = np.diff(offsets)
    count = lengths.size
    active = head[:, COL_ACTIVE] == 1
    seen = segment_counts(~np.isnan(y), offsets)
    used = np.zeros(count)
    found: dict[tuple, float] = {}
    for s in np.flatnonzero(active):
        shape = (int(lengths[s]), int(plan.n_periods[s]), int(groups[s]),
                 plan.settings[s].tobytes())  # fmt: skip
        if shape not in found:
            found[shape] = _multi_degrees(
                shape[0], plan.settings[s], shape[1], params[groups[s]], parallel
            )
        used[s] = found[shape] * seen[s] / max(lengths[s], 1)
    longest = plan.settings[np.arange(count), np.maximum(plan.n_periods - 1, 0), COL_PERIOD]
    verdict = np.where(design.absent, regression.ABSENT, regression.KEPT).astype(np.int64)
    X = np.ascontiguousarray(design.X, dtype=np.float64)
    regression.screen_batch(y, offsets, X, longest.astype(np.int64), used, verdict)
    kept = verdict == regression.KEPT
    parts = np.full((plan.settings.shape[1], y.size), np.nan)

    def split(values: np.ndarray, which: np.ndarray) -> tuple[np.ndarray, ...]:
        chosen = plan.settings.copy()
        chosen[~which, :, COL_ACTIVE] = 0
        trend, found_parts, weight = _run_multi_kernel(
            values, offsets, chosen, plan.n_periods, params, groups, parallel
        )
        rows = np.repeat(which, lengths)
        parts[:, rows] = found_parts[:, rows]  # the last round's parts of each series
        return trend, found_parts.sum(axis=0), weight

    def fitted(values: np.ndarray) -> np.ndarray:
        trend, seasonal, _ = split(values, active)
        return trend + seasonal

    start = _direct_start(fitted, y, offsets, X, kept, active)
    effect = np.zeros(y.size)
    regression.effect_of(X, offsets, start, active, effect)
    out = regression.backfit(
        y, offsets, X, kept, active, split, used, None, effect,
        tolerance=EFFECTS_TOLERANCE, most_rounds=EFFECTS_ROUNDS,
    )  # fmt: skip
    fitted_effects = _Fitted(
        out["effect"], out["coef"], out["cov"], verdict, out["settled"], out["rounds"],
        out["last_move"],
    )  # fmt: skip
    return out["trend"], out["seasonal"], out["weight"], fitted_effects, parts


def _add_effects(
    result: BatchResult,
    y: np.ndarray,
    fitted: _Fitted,
    design: effects_front.Design,
    plan: _Plan,
    ok: np.ndarray,
    back: np.ndarray | None,
    status: list[str],
    describe_point: Callable[[int, int], str] | None,
) -> None:
    """The effects' columns (calendar, outside), the remainder without them, adjusted
    without the calendar effect, the coefficients, and a note for each column dropped."""
    lengths = np.diff(result.offsets)
    rows_ok = np.repeat(ok, lengths)
    width = design.calendar_width
    calendar_part, outside_part = np.full(y.size, np.nan), np.full(y.size, np.nan)
    for part, columns in ((calendar_part, slice(0, width)), (outside_part, slice(width, None))):
        regression.effect_of(
            np.ascontiguousarray(design.X[:, columns]), result.offsets,
            np.ascontiguousarray(fitted.coef[:, columns]), ok, part,
        )  # fmt: skip
    result.remainder -= np.where(rows_ok, fitted.effect, 0.0)
    if design.unknown is not None:
        outside_part[design.unknown] = np.nan  # no outside value there, so no effect
    result.calendar_effect = calendar_part
    result.outside_effect = outside_part
    result.effect_coef = np.where(ok[:, None], fitted.coef, np.nan)
    result.adjusted_season_only = result.adjusted.copy()
    adjusted = y - result.seasonal - calendar_part
    if back is not None:
        moved = back & rows_ok
        adjusted[moved] = transform.inverse(
            adjusted[moved], np.repeat(plan.lambdas, lengths)[moved]
        )
        # a point that the calendar effect takes out of the transform's reach (see
        # _note_unreachable); those without a seasonal part alone were noted already
        fresh = np.isnan(adjusted) & ~np.isnan(result.adjusted_season_only)
        if fresh.any():
            probe = np.where(fresh, np.nan, 0.0)
            _note_unreachable(y, result.offsets, probe, plan.lambdas, moved, status, describe_point)
    result.adjusted = adjusted
    tables = effects_front.coefficient_tables(design.names, fitted.coef, fitted.cov)
    result.coefficients = [table if good else None for table, good in zip(tables, ok, strict=True)]
    noted = (
        (fitted.verdict > regression.ABSENT).any(axis=1)
        | ~fitted.settled
        | np.array([bool(n) for n in design.notes], dtype=bool)
    )
    for s in np.flatnonzero(ok & noted):
        notes = [design.notes[s]] if design.notes[s] else []
        for j, name in enumerate(design.names):
            reason = effects_front.VERDICT_WORDS.get(int(fitted.verdict[s, j]))
            if reason:
                notes.append(f"{name} dropped: {reason}")
        if not fitted.settled[s]:
            notes.append(
                f"the effects did not settle in {EFFECTS_ROUNDS} rounds (the last moved by "
                f"{fitted.last_move[s]:.1e} of the values' standard deviation); the last "
                "round's are shown"
            )
        for note in notes:
            status[s] = with_note(status[s], note)
