"""Season and trend spans chosen per series (``choose_spans``), before the split itself.

Each series gets the pair of spans, from a short list of candidates, whose non-robust fit
(trend plus seasonal) has the smallest improved Akaike criterion (Hurvich, Simonoff & Tsai
1998; see ``kernel/spans.py``). Then it is split as asked (robust or not) with that pair.

Three routes, by what the series allows:

- complete, non-robust, at most ``linear.MAX_POINTS`` points: the exact score, from the
  linear maps cached per length and spans, one matrix product per candidate for all series
  of a length at once;
- with missing values, or split robustly: one pilot split with the given (or default) spans,
  as asked; each missing point, and each point the robust pilot sets aside (robustness
  weight below ``tuning.SET_ASIDE_WEIGHT``, as ``tide_outliers`` does), is filled with the
  pilot's fit; the filled series is scored like a complete one, with only the residuals of
  the points kept. The score is then that of the non-robust map on the cleaned series, not
  of the robust fit itself, which has no fixed map; the cost is one split more;
- longer than ``linear.MAX_POINTS``: one ordinary split per candidate, the trace estimated
  from random probes (``kernel.spans.probe_trace``).
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from .kernel import linear, spans, threads
from .kernel.layout import (
    COL_ACTIVE,
    COL_OUTER,
    COL_PERIOD,
    COL_SEASON_JUMP,
    COL_SEASON_SPAN,
    COL_TREND_JUMP,
    COL_TREND_SPAN,
)
from .kernel.stl import stl_batch_parallel, stl_batch_serial
from .params import default_jump, default_trend_span, smallest_odd_at_least
from .tuning import SET_ASIDE_WEIGHT

# The season spans tried besides the given or default one: short spans for a pattern that
# moves, long ones for a steady one, 0 for one that stays the same. Finite spans beyond
# twice the number of cycles are left out: there the loess of each cycle-subseries already
# spans all of it and hardly changes with the span (ours).
SEASON_CANDIDATES = (7, 11, 15, 23, 35, 0)
# Trend spans tried for each season span: the published rule's value for it (Cleveland et
# al. 1990, section 3) and longer ones. Shorter ones are not tried: below the rule the trend
# starts to take up seasonal variation, which the score of the total fit cannot see.
TREND_FACTORS = (1.0, 1.5, 2.5)

# Scores closer than this count as equal (ours: the rounding of the single-precision
# products moves a score by about 1e-6).
TIE = 1e-5

# Which of the spans and jumps were given (kept as they are), in this order.
FIXED_SEASON, FIXED_TREND, FIXED_SEASON_JUMP, FIXED_TREND_JUMP = range(4)


def candidate_pairs(
    period: int, n: int, season: int, trend: int, fixed: np.ndarray
) -> list[tuple[int, int]]:
    """The (season span, trend span) pairs tried for a series of ``n`` points; the given
    or default pair first, so that it wins a tie.

    >>> candidate_pairs(12, 120, 13, 21, np.zeros(4, bool))[:4]
    [(13, 21), (13, 33), (13, 53), (7, 23)]
    >>> candidate_pairs(12, 120, 0, 19, np.array([True, False, False, False]))
    [(0, 19), (0, 29), (0, 49)]
    """
    cycles = -(-n // period)
    seasons = [season]
    if not fixed[FIXED_SEASON]:
        seasons += [s for s in SEASON_CANDIDATES if s == 0 or s <= 2 * cycles + 1]
    pairs = [(season, trend)]
    for ns in seasons:
        if fixed[FIXED_TREND]:
            trends = [trend]
        else:
            rule = default_trend_span(period, ns)
            trends = [smallest_odd_at_least(rule * f) for f in TREND_FACTORS]
        pairs += [(ns, nt) for nt in trends]
    return list(dict.fromkeys(pairs))


def _with_spans(row: np.ndarray, season: int, trend: int, fixed: np.ndarray) -> np.ndarray:
    out = row.copy()
    out[COL_SEASON_SPAN] = season
    out[COL_TREND_SPAN] = trend
    if not fixed[FIXED_SEASON_JUMP]:
        out[COL_SEASON_JUMP] = default_jump(season)
    if not fixed[FIXED_TREND_JUMP]:
        out[COL_TREND_JUMP] = default_jump(trend)
    return out


def _gather(flat: np.ndarray, offsets: np.ndarray, members: np.ndarray, n: int) -> np.ndarray:
    return flat[offsets[members][:, None] + np.arange(n)]


def choose(
    y: np.ndarray,
    offsets: np.ndarray,
    settings: np.ndarray,
    wanted: np.ndarray,
    fixed: np.ndarray,
    run: Callable[..., tuple[np.ndarray, np.ndarray, np.ndarray]],
    parallel: bool,
) -> None:
    """Write the chosen spans (and their jumps) into ``settings`` (series x settings) for
    each active series where ``wanted``.

    ``fixed`` (series x 4) says which spans and jumps were given; ``run(y, offsets,
    settings, parallel)`` is the batch path's kernel run, used for the pilot splits.
    """
    members = np.flatnonzero(wanted & (settings[:, COL_ACTIVE] == 1))
    if members.size == 0:
        return
    lengths = np.diff(offsets)
    gaps = np.isnan(y)
    gappy = np.zeros(lengths.size, dtype=bool)
    if gaps.any():
        running = np.concatenate(([0], np.cumsum(gaps, dtype=np.int64)))
        gappy = (running[offsets[1:]] - running[offsets[:-1]]) > 0
    robust = settings[:, COL_OUTER] > 0
    # the values scored and each point's weight in the score (None: every point fully)
    filled = y
    weights = None
    piloted = members[gappy[members] | robust[members]]
    if piloted.size:
        filled, weights = _pilot(y, offsets, settings, piloted, run, parallel)
    # groups of one length, settings row and fixed flags share their candidates
    rows = settings[members]
    keys = np.concatenate([lengths[members, None], rows, fixed[members].astype(np.int64)], 1)
    distinct, group_of = np.unique(keys, axis=0, return_inverse=True)
    group_of = group_of.reshape(-1)
    for g in range(distinct.shape[0]):
        chosen = members[group_of == g]
        n = int(lengths[chosen[0]])
        row = settings[chosen[0]].copy()
        flags = fixed[chosen[0]]
        pairs = candidate_pairs(
            int(row[COL_PERIOD]), n, int(row[COL_SEASON_SPAN]), int(row[COL_TREND_SPAN]), flags
        )
        # the score is that of the non-robust map, whatever the split asked for
        plain = row.copy()
        if robust[chosen[0]]:
            plain[COL_OUTER] = 0
        tried = [_with_spans(plain, s, t, flags) for s, t in pairs]
        series = _gather(filled, offsets, chosen, n)
        point_weights = None if weights is None else _gather(weights, offsets, chosen, n)
        if point_weights is not None and (point_weights == 1.0).all():
            point_weights = None
        if n <= linear.MAX_POINTS:
            with threads.blas_for(parallel):
                scores = spans.scores_by_operator(series, point_weights, tried)
        else:
            scores = _scores_by_splits(series, point_weights, tried, parallel)
        # NaN (a pilot that broke down) scores nothing; minus infinity is a perfect fit
        scores[np.isnan(scores)] = np.inf
        # the first candidate within TIE of the best: the given or default pair wins a tie,
        # and the rounding of single-precision products (which differs with the batch's
        # size) does not decide between two fits that score the same
        best = np.argmax(scores <= scores.min(axis=1, keepdims=True) + TIE, axis=1)
        for k in np.unique(best):
            season, trend = pairs[int(k)]
            settings[chosen[best == k]] = _with_spans(row, season, trend, flags)


def _pilot(
    y: np.ndarray,
    offsets: np.ndarray,
    settings: np.ndarray,
    piloted: np.ndarray,
    run: Callable[..., tuple[np.ndarray, np.ndarray, np.ndarray]],
    parallel: bool,
) -> tuple[np.ndarray, np.ndarray]:
    """Values cleaned by a pilot split (missing and set-aside points filled with its fit)
    and each point's weight in the score (0 for those, 1 for the others)."""
    lengths = np.diff(offsets)
    pilot = settings.copy()
    pilot[:, COL_ACTIVE] = 0
    pilot[piloted, COL_ACTIVE] = 1
    trend, seasonal, weight = run(y, offsets, pilot, parallel)
    rows = np.repeat(pilot[:, COL_ACTIVE] == 1, lengths)
    fit = trend + seasonal
    # a point set aside (as tide_outliers sets them aside) or missing is filled with the
    # pilot's fit and counts for nothing; the others count as they are, so that the pilot's
    # spans do not pull the cleaned series towards themselves
    aside = rows & (np.isnan(y) | ~(weight >= SET_ASIDE_WEIGHT))
    point_weight = np.where(aside, 0.0, 1.0)
    filled = y.copy()
    filled[aside] = fit[aside]
    # a pilot that broke down leaves its series as it was (its score is then not finite,
    # and the series keeps the given or default spans)
    return filled, point_weight


def _scores_by_splits(
    series: np.ndarray, weights: np.ndarray | None, rows: list[np.ndarray], parallel: bool
) -> np.ndarray:
    """The criterion of each long series under each settings row: one split per
    candidate, the trace from random probes."""
    m, n = series.shape
    flat = np.ascontiguousarray(series).ravel()
    offsets = np.arange(0, m * n + 1, n, dtype=np.int64)
    points = np.full(m, float(n)) if weights is None else weights.sum(axis=1)
    out = np.empty((m, len(rows)))
    trend = np.empty(flat.size)
    seasonal = np.empty(flat.size)
    weight = np.empty(flat.size)
    run = stl_batch_parallel if parallel else stl_batch_serial
    for k, row in enumerate(rows):
        run(flat, offsets, np.tile(row, (m, 1)), trend, seasonal, weight)
        residual = (flat - trend - seasonal).reshape(m, n)
        squares = residual * residual if weights is None else residual * residual * weights
        out[:, k] = spans.aicc(squares.sum(axis=1), points, spans.probe_trace(n, row), n)
    return out
