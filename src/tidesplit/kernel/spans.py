"""Spans chosen from the data: an information criterion on STL's linear map.

Non-robust STL of a complete series of ``n`` points is a linear map ``y -> y @ H`` with
``H = T + S`` (``linear.py``): the fit (trend plus seasonal) of a series under one pair of
spans. For a linear smoother, Hurvich, Simonoff & Tsai (1998) choose the smoothing
parameter by the improved Akaike criterion

    AICc = log(RSS / n) + 1 + 2 (trace(H) + 1) / (n - trace(H) - 2)

where ``trace(H)`` is the fit's equivalent number of parameters, the measure Cleveland &
Devlin (1988) use for loess. Like generalised cross-validation (Craven & Wahba 1979) it
needs no estimate of the noise's variance (Cp does), so a series and the series times a
constant get the same spans; unlike it, it does not drift to small spans when the fit
spends a sizeable share of the points on parameters (their paper's finding), which STL
does (a trace of 20 to 40 on ten years of months). Each candidate costs one matrix
product for a whole batch of series.

Series the matrices do not cover (longer than ``linear.MAX_POINTS``) get the trace from
random probes instead (Hutchinson 1989: the mean of ``z' H z`` over vectors ``z`` of random
signs), each probe one ordinary split.
"""

from __future__ import annotations

import threading

import numpy as np

from . import linear
from .stl import stl_batch_serial

# The matrices kept for scoring (float32 copies of T + S), bounded by their size: a fleet
# of many lengths needs many, each small for the lengths that are common.
_CACHE_BYTES = 128 * 2**20
_cache: dict[tuple[int, tuple[int, ...]], tuple[np.ndarray, float]] = {}
_cache_bytes = 0
_cache_lock = threading.Lock()

# Random-sign probes for the trace of a long series' map (Hutchinson 1989); a fixed seed so
# that a series gets the same spans in every run.
PROBES = 8
_PROBE_SEED = 20_250_117
_traces: dict[tuple[int, tuple[int, ...]], float] = {}


def fit_operator(n: int, settings: np.ndarray) -> tuple[np.ndarray, float]:
    """``H = T + S`` (``n x n``, float32) and its trace for this length and settings row.

    >>> from tidesplit.params import SplitParams
    >>> H, trace = fit_operator(36, SplitParams(period=12).resolve().settings_row())
    >>> H.shape, 0 < trace < 36
    ((36, 36), True)
    """
    global _cache_bytes
    key = (n, tuple(int(v) for v in settings))
    found = _cache.get(key)
    if found is not None:
        return found
    t_op, s_op = linear.operators(n, settings)
    total = t_op + s_op
    found = (total.astype(np.float32), float(np.trace(total)))
    with _cache_lock:
        while _cache and _cache_bytes + found[0].nbytes > _CACHE_BYTES:
            _cache_bytes -= _cache.pop(next(iter(_cache)))[0].nbytes
        if key not in _cache:
            _cache_bytes += found[0].nbytes
        _cache[key] = found
    return found


def probe_trace(n: int, settings: np.ndarray, probes: int = PROBES) -> float:
    """The trace of the map ``y -> trend + seasonal`` for ``n`` points, estimated from
    ``probes`` splits of random-sign vectors (Hutchinson 1989); for long series.

    >>> from tidesplit.params import SplitParams
    >>> row = SplitParams(period=12).resolve().settings_row()
    >>> exact = fit_operator(96, row)[1]
    >>> bool(abs(probe_trace(96, row, probes=64) - exact) < 0.15 * exact)
    True
    """
    key = (n, tuple(int(v) for v in settings))
    found = _traces.get(key)
    if found is not None and probes == PROBES:
        return found
    rng = np.random.default_rng(_PROBE_SEED)
    z = rng.choice(np.array([-1.0, 1.0]), size=probes * n)
    offsets = np.arange(0, probes * n + 1, n, dtype=np.int64)
    rows = np.tile(np.asarray(settings, dtype=np.int64), (probes, 1))
    trend = np.empty(z.size)
    seasonal = np.empty(z.size)
    weight = np.empty(z.size)
    stl_batch_serial(z, offsets, rows, trend, seasonal, weight)
    trace = float(np.dot(z, trend + seasonal) / probes)
    if probes == PROBES:
        with _cache_lock:
            if len(_traces) > 4096:  # keep the dictionary bounded; entries are cheap
                _traces.clear()
            _traces[key] = trace
    return trace


def aicc(rss: np.ndarray, points: np.ndarray, trace: float, n: int) -> np.ndarray:
    """The improved Akaike criterion of a linear smoother (Hurvich, Simonoff & Tsai 1998):
    ``log(RSS / n) + 1 + 2 (trace + 1) / (n - trace - 2)``, smaller is better.

    ``rss`` sums the residuals of ``points`` observed points (per series) of ``n``; where
    points are missing the trace is taken in proportion (the map's parameters spread
    evenly over the points). A perfect fit scores minus infinity.

    >>> aicc(np.array([2.0]), np.array([10.0]), 2.0, 10).round(4).tolist()
    [0.3906]
    """
    share = points / n
    used = trace * share
    with np.errstate(divide="ignore", invalid="ignore"):
        score = np.log(rss / points) + 1.0 + 2.0 * (used + 1.0) / (points - used - 2.0)
    return np.where(points - used - 2.0 > 0, score, np.inf)


def scores_by_operator(
    series: np.ndarray, weights: np.ndarray | None, rows: list[np.ndarray]
) -> np.ndarray:
    """The criterion (``aicc``) of every series (rows of ``series``, ``m x n``, complete)
    under every settings row: ``m x len(rows)``.

    ``weights`` (``m x n``, in [0, 1]) count each point's residual in the sum of squares
    (0 for a point filled in, see ``span_choice``); None counts every point fully.

    Each series is centred and scaled first (the map keeps a constant as it is, so the
    residuals are those of the series itself, scaled): the products then run in float32,
    twice as fast, without losing the residuals of a series far from zero.
    """
    m, n = series.shape
    centre = series.mean(axis=1, keepdims=True)
    scale = series.std(axis=1, keepdims=True)
    scale[scale == 0] = 1.0
    standard = ((series - centre) / scale).astype(np.float32)
    squared_scale = scale[:, 0] ** 2  # the residuals back on the series' own scale
    if weights is None:
        points = np.full(m, float(n))
    else:
        points = weights.sum(axis=1)
        weights = weights.astype(np.float32)
    out = np.empty((m, len(rows)))
    fitted = np.empty((m, n), dtype=np.float32)
    for k, row in enumerate(rows):
        operator, trace = fit_operator(n, row)
        np.matmul(standard, operator, out=fitted)
        np.subtract(standard, fitted, out=fitted)
        if weights is None:
            rss = np.einsum("ij,ij->i", fitted, fitted, dtype=np.float64)
        else:
            rss = np.einsum("ij,ij,ij->i", fitted, fitted, weights, dtype=np.float64)
        out[:, k] = aicc(rss * squared_scale, points, trace, n)
    return out
