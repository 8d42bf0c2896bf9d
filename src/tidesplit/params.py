"""One validated parameter set for a split, and the published default rules.

Every default that depends on another setting is computed here and nowhere else.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, fields, replace
from typing import Any

import numpy as np

from . import arguments
from .errors import ParamError
from .kernel import layout as _k
from .tuning import DEFAULT_SEASON_SPAN

TRANSFORMS = next(a.choices for a in arguments.REGISTRY if a.name == "transform")
ON_ERROR = next(a.choices for a in arguments.REGISTRY if a.name == "on_error")

# Where Guerrero's lambda is searched by default: from the log (0, a multiplicative split)
# to no transform (1, an additive one).
DEFAULT_BOXCOX_BOUNDS = (0.0, 1.0)


def smallest_odd_at_least(x: float) -> int:
    """The smallest odd integer >= ``x``.

    >>> smallest_odd_at_least(20.35), smallest_odd_at_least(12)
    (21, 13)
    """
    k = math.ceil(x - 1e-9)
    return k if k % 2 == 1 else k + 1


def default_trend_span(period: int, season_span: int) -> int:
    """Cleveland et al. (1990), section 3: smallest odd >= 1.5 p / (1 - 1.5 / n_s).

    A season span of 0 (infinite) gives 1.5 p.

    >>> default_trend_span(12, 13)
    21
    """
    shrink = 0.0 if season_span == 0 else 1.5 / season_span
    return smallest_odd_at_least(1.5 * period / (1.0 - shrink))


def default_lowpass_span(period: int) -> int:
    """Cleveland et al. (1990), section 3: the smallest odd integer >= the period.

    >>> default_lowpass_span(12)
    13
    """
    return smallest_odd_at_least(period)


def default_jump(span: int) -> int:
    """About a tenth of the span, at least 1 (Cleveland et al. 1990, section 3, from memory;
    the same rule as the reference routines' ``int(span / 10 + 0.9)``).

    >>> default_jump(13), default_jump(21), default_jump(7)
    (2, 3, 1)
    """
    return max(1, int(span / 10 + 0.9))


def default_loops(robust: bool) -> tuple[int, int]:
    """(inner, outer) loop counts: the paper's advice (section 3, from memory) is two inner
    passes without robustness, one inner pass per robustness pass with it, and a handful of
    robustness passes (we take 10, its figure for near-certain convergence)."""
    return (1, 10) if robust else (2, 0)


as_int = arguments.whole_number


@dataclass(frozen=True)
class SplitParams:
    """Settings of one split; ``None`` means "use the published default".

    >>> SplitParams(period=12).resolve().trend_span
    21
    """

    period: int | None = None
    season_span: int | None = None
    trend_span: int | None = None
    lowpass_span: int | None = None
    season_degree: int | None = None
    trend_degree: int | None = None
    lowpass_degree: int | None = None
    season_jump: int | None = None
    trend_jump: int | None = None
    lowpass_jump: int | None = None
    robust: bool = arguments.default_of("robust")
    inner_loops: int | None = None
    outer_loops: int | None = None
    transform: str = arguments.default_of("transform")
    boxcox_lambda: float | None = None
    periods: tuple[int, ...] | None = None
    season_spans: tuple[int, ...] | None = None
    iterations: int | None = None
    boxcox_bounds: tuple[float, float] | None = None  # Guerrero's search interval
    choose_spans: bool = False  # season and trend span chosen per series (span_choice)

    @classmethod
    def from_kwargs(cls, **kwargs: Any) -> SplitParams:
        """Build from keyword arguments, rejecting unknown names.

        >>> SplitParams.from_kwargs(period=7, robust=True).robust
        True
        """
        known = {f.name for f in fields(cls)}
        unknown = sorted(set(kwargs) - known)
        if unknown:
            raise ParamError(
                f"unknown argument(s) {', '.join(unknown)}; known: {', '.join(sorted(known))}"
            )
        for name in ("periods", "season_spans", "boxcox_bounds"):
            if kwargs.get(name) is not None:
                kwargs[name] = tuple(kwargs[name])
        return cls(**kwargs)

    @classmethod
    def from_settings(cls, settings: dict[str, Any]) -> SplitParams:
        """The decomposition's part of a function's settings (``arguments.accept``).

        >>> SplitParams.from_settings(arguments.accept("split", {"period": 12})).period
        12
        """
        known = {f.name for f in fields(cls)}
        return cls(**{k: v for k, v in settings.items() if k in known and v is not None})

    def with_period(self, period: int) -> SplitParams:
        """The same settings for another (single) period."""
        return replace(self, period=period)

    def with_periods(self, periods: tuple[int, ...]) -> SplitParams:
        """The same settings for several periods (MSTL)."""
        return replace(self, periods=tuple(periods))

    @property
    def multi(self) -> bool:
        """Whether several seasonal periods were asked for (MSTL)."""
        return self.periods is not None

    def check(self) -> None:
        """Refuse any setting that no series could be split with, before any series runs.

        Periods left to each series (implied by its step, or estimated) are stood in for by
        the smallest ones, so that every other setting is checked now; raises ``ParamError``.

        >>> SplitParams(trend_span=4).check()
        Traceback (most recent call last):
        ...
        tidesplit.errors.ParamError: trend_span must be an odd integer of at least 3, got 4
        """
        probe = self
        if self.multi and not self.periods:
            count = len(self.season_spans) if self.season_spans is not None else 1
            probe = replace(self, periods=tuple(range(2, 2 + count)))
        elif not self.multi and self.period is None:
            probe = replace(self, period=2)
        probe.resolve()

    def resolve(self) -> ResolvedParams:
        """Check every setting and fill in the defaults; raises ``ParamError``."""
        if self.periods is not None and self.period is not None:
            raise ParamError("give period or periods, not both")
        if self.periods is not None:
            periods = [as_int("periods", p) for p in self.periods]
            if not periods:
                raise ParamError("periods is empty")
        else:
            periods = [as_int("period", self.period)]
        if periods[0] is None:
            raise ParamError("period is required")
        for period in periods:
            if period is None or period < 2:
                raise ParamError(f"period must be at least 2, got {period}")
        if len(set(periods)) < len(periods):
            raise ParamError(f"periods must differ, got {list(periods)}")
        if self.season_spans is not None:
            spans = [as_int("season_spans", v) for v in self.season_spans]
            if len(spans) != len(periods):
                raise ParamError(f"season_spans has {len(spans)} values for {len(periods)} periods")
        elif self.season_span is not None:
            spans = [as_int("season_span", self.season_span)] * len(periods)
        elif self.periods is not None:
            # MSTL's published default: 7 + 4 i for the i-th period (Bandara et al. 2021)
            spans = [7 + 4 * (i + 1) for i in range(len(periods))]
        else:
            spans = [DEFAULT_SEASON_SPAN]
        order = np.argsort(periods, kind="stable")
        periods = [int(periods[i]) for i in order]
        spans = [int(spans[i]) for i in order]
        for span in spans:
            if span != 0:
                _check_span("season_span", span)
        iterations = as_int("iterations", self.iterations)
        iterations = 2 if iterations is None else iterations  # Bandara et al. (2021)
        if iterations < 1:
            raise ParamError(f"iterations must be at least 1, got {iterations}")
        period, season_span = periods[0], spans[0]
        trend_span = as_int("trend_span", self.trend_span)
        given_trend = trend_span
        trend_span = default_trend_span(period, season_span) if trend_span is None else trend_span
        _check_span("trend_span", trend_span)
        lowpass_span = as_int("lowpass_span", self.lowpass_span)
        given_lowpass = lowpass_span
        lowpass_span = default_lowpass_span(period) if lowpass_span is None else lowpass_span
        _check_span("lowpass_span", lowpass_span)

        degrees = []
        for name in ("season_degree", "trend_degree", "lowpass_degree"):
            degree = as_int(name, getattr(self, name))
            degree = 1 if degree is None else degree
            if degree not in (0, 1):
                raise ParamError(f"{name} must be 0 or 1, got {degree}")
            degrees.append(degree)

        jumps = []
        for name, span in (
            ("season_jump", season_span),
            ("trend_jump", trend_span),
            ("lowpass_jump", lowpass_span),
        ):
            jump = as_int(name, getattr(self, name))
            jump = default_jump(span) if jump is None else jump
            if jump < 1:
                raise ParamError(f"{name} must be at least 1, got {jump}")
            jumps.append(jump)

        if not isinstance(self.choose_spans, (bool, np.bool_)):
            raise ParamError(f"choose_spans must be true or false, got {self.choose_spans!r}")
        if self.choose_spans and self.multi:
            raise ParamError(
                "choose_spans chooses the spans of one period; give period, not periods"
            )
        if self.choose_spans and self.season_span is not None and self.trend_span is not None:
            raise ParamError(
                "choose_spans chooses season_span and trend_span: give at most one of them "
                "(it is kept and the other chosen), or leave choose_spans out"
            )
        if not isinstance(self.robust, (bool, np.bool_)):
            raise ParamError(f"robust must be true or false, got {self.robust!r}")
        robust = bool(self.robust)
        inner_default, outer_default = default_loops(robust)
        inner = as_int("inner_loops", self.inner_loops)
        inner = inner_default if inner is None else inner
        if inner < 1:
            raise ParamError(f"inner_loops must be at least 1, got {inner}")
        outer = as_int("outer_loops", self.outer_loops)
        outer = outer_default if outer is None else outer
        if outer < 0:
            raise ParamError(f"outer_loops must be at least 0, got {outer}")
        if not robust:
            outer = 0

        transform = "none" if self.transform is None else str(self.transform).lower()
        if transform not in TRANSFORMS:
            raise ParamError(
                f"transform must be one of {', '.join(TRANSFORMS)}, got {self.transform!r}"
            )
        lam = self.boxcox_lambda
        if lam is not None:
            lam = float(lam)
            if not math.isfinite(lam):
                raise ParamError(f"boxcox_lambda must be finite, got {self.boxcox_lambda!r}")
        if transform == "log":
            lam = 0.0
        elif transform == "none":
            lam = None
        bounds = _check_bounds(self.boxcox_bounds, transform, lam)
        given_jumps = [
            as_int(name, getattr(self, name))
            for name in ("season_jump", "trend_jump", "lowpass_jump")
        ]
        cycles = []
        for p, ns in zip(periods, spans, strict=True):
            nt = default_trend_span(p, ns) if given_trend is None else given_trend
            nl = default_lowpass_span(p) if given_lowpass is None else given_lowpass
            js = [
                default_jump(span) if given is None else given
                for given, span in zip(given_jumps, (ns, nt, nl), strict=True)
            ]
            cycles.append((p, ns, nt, nl, *js))
        return ResolvedParams(
            periods=tuple(periods),
            season_spans=tuple(spans),
            iterations=iterations,
            cycles=tuple(cycles),
            period=period,
            season_span=season_span,
            trend_span=trend_span,
            lowpass_span=lowpass_span,
            season_degree=degrees[0],
            trend_degree=degrees[1],
            lowpass_degree=degrees[2],
            season_jump=jumps[0],
            trend_jump=jumps[1],
            lowpass_jump=jumps[2],
            robust=robust,
            inner_loops=inner,
            outer_loops=outer,
            transform=transform,
            boxcox_lambda=lam,
            boxcox_bounds=bounds,
        )


def _check_bounds(
    given: tuple[float, ...] | None, transform: str, lam: float | None
) -> tuple[float, float]:
    """Guerrero's search interval: [0, 1] (from the log to no transform) unless given;
    given, it must be two finite numbers, lower first, and be used (a Box-Cox transform
    whose lambda is to be chosen)."""
    if given is None:
        return DEFAULT_BOXCOX_BOUNDS
    if transform != "boxcox" or lam is not None:
        raise ParamError(
            "boxcox_bounds is the interval the Box-Cox lambda is chosen in: it goes with "
            "transform 'boxcox' and no boxcox_lambda"
        )
    try:
        lower, upper = (float(v) for v in given)
    except (TypeError, ValueError):
        raise ParamError(f"boxcox_bounds must be two numbers, got {given!r}") from None
    if not (math.isfinite(lower) and math.isfinite(upper) and lower < upper):
        raise ParamError(f"boxcox_bounds must be finite with lower < upper, got {given!r}")
    return (lower, upper)


def _check_span(name: str, span: int) -> None:
    if span < 3 or span % 2 == 0:
        raise ParamError(f"{name} must be an odd integer of at least 3, got {span}")


@dataclass(frozen=True)
class ResolvedParams:
    """Every setting filled in and checked; what the kernel runs with.

    The flat fields describe the first (shortest) period; ``cycles`` holds, per period,
    (period, season span, trend span, low-pass span, and the three jumps).
    """

    periods: tuple[int, ...]
    season_spans: tuple[int, ...]
    iterations: int
    cycles: tuple[tuple[int, ...], ...]
    period: int
    season_span: int
    trend_span: int
    lowpass_span: int
    season_degree: int
    trend_degree: int
    lowpass_degree: int
    season_jump: int
    trend_jump: int
    lowpass_jump: int
    robust: bool
    inner_loops: int
    outer_loops: int
    transform: str
    boxcox_lambda: float | None  # None with boxcox: chosen per series (Guerrero 1993)
    boxcox_bounds: tuple[float, float] = (0.0, 1.0)  # the interval it is chosen in

    def settings_row(self) -> np.ndarray:
        """The kernel's integer settings row for the first period."""
        return self.settings_rows()[0]

    def settings_rows(self) -> np.ndarray:
        """One kernel settings row per period, shortest period first."""
        rows = np.zeros((len(self.cycles), _k.N_SETTINGS), dtype=np.int64)
        for k, (p, ns, nt, nl, sj, tj, lj) in enumerate(self.cycles):
            row = rows[k]
            row[_k.COL_PERIOD] = p
            row[_k.COL_SEASON_SPAN] = ns
            row[_k.COL_TREND_SPAN] = nt
            row[_k.COL_LOWPASS_SPAN] = nl
            row[_k.COL_SEASON_DEGREE] = self.season_degree
            row[_k.COL_TREND_DEGREE] = self.trend_degree
            row[_k.COL_LOWPASS_DEGREE] = self.lowpass_degree
            row[_k.COL_SEASON_JUMP] = sj
            row[_k.COL_TREND_JUMP] = tj
            row[_k.COL_LOWPASS_JUMP] = lj
            row[_k.COL_INNER] = self.inner_loops
            row[_k.COL_OUTER] = self.outer_loops
            row[_k.COL_ACTIVE] = 1
        return rows

    def as_dict(self) -> dict[str, Any]:
        return asdict(self)
