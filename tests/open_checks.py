"""Shared measurements on the open datasets (tests/datasets.py) for the tests of the
answers and for benchmarks/accuracy.py: flag rates, recall of injected spikes."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd
from datasets import OpenSeries

import tidesplit
from tidesplit.kernel import strengths


def hourly_noise(weeks: int, count: int, rng: np.random.Generator) -> pd.DataFrame:
    """``count`` series (key ``k``) of ``weeks`` weeks of hourly Gaussian noise (sd 0.3)
    around a daily and a weekly cycle: the several-period case of the flag rate."""
    hours = np.arange(24 * 7 * weeks)
    return pd.concat(
        pd.DataFrame(
            {
                "k": i,
                "t": hours,
                "v": 20
                + 4 * np.sin(2 * np.pi * hours / 24)
                + 2 * np.sin(2 * np.pi * hours / 168)
                + rng.normal(0, 0.3, hours.size),
            }
        )
        for i in range(count)
    )


def as_frame(series: Sequence[OpenSeries]) -> pd.DataFrame:
    """Many series in one long table: key, integer time, value."""
    return pd.concat(
        [pd.DataFrame({"k": s.name, "t": np.arange(s.values.size), "v": s.values}) for s in series],
        ignore_index=True,
    )


def by_period(series: Sequence[OpenSeries]) -> dict[int, list[OpenSeries]]:
    found: dict[int, list[OpenSeries]] = {}
    for s in series:
        found.setdefault(s.period, []).append(s)
    return found


def flags(series: Sequence[OpenSeries], **options: object) -> dict[str, np.ndarray]:
    """Per series, the flag of every observed point under tide_outliers' default rule."""
    out = {}
    for period, group in by_period(series).items():
        rows = tidesplit.outliers(
            as_frame(group), "k", "t", "v", period=period, all_rows=True, **options
        )
        rows = rows[rows["v"].notna()]
        for key, g in rows.groupby("k", sort=False):
            out[key] = g["is_outlier"].to_numpy(dtype=bool)
    return out


def old_rule_flags(series: Sequence[OpenSeries]) -> dict[str, np.ndarray]:
    """The rule we replaced: robust split (10 robustness passes), remainder outside
    Q1 - 3 IQR or Q3 + 3 IQR of the series' remainders."""
    out = {}
    for period, group in by_period(series).items():
        parts = tidesplit.split_table(as_frame(group), "k", "t", "v", period=period, robust=True)
        for key, g in parts.groupby("k", sort=False):
            r = g["remainder"].to_numpy()
            r = r[~np.isnan(r)]
            fences = np.empty((1, 4))
            strengths.remainder_fences(r, np.array([0, r.size]), 0, 3.0, np.ones(1, bool), fences)
            out[key] = (r < fences[0, 0]) | (r > fences[0, 1])
    return out


def remainder_sd(s: OpenSeries) -> float:
    """Standard deviation of the remainder of the robust split (gaps filled in linearly)."""
    y = pd.Series(s.values).interpolate().to_numpy()
    return float(np.std(tidesplit.split(y, period=s.period, robust=True).remainder))


def inject_spikes(
    series: Sequence[OpenSeries], rng: np.random.Generator, size: float = 5.0, every: int = 50
) -> tuple[list[OpenSeries], dict[str, set[int]]]:
    """One spike of ``size`` remainder standard deviations per ``every`` points (at least
    one), up or down at random, at distinct places at least a cycle from either end."""
    spiked, places = [], {}
    for s in series:
        count = max(1, s.values.size // every)
        where = rng.choice(np.arange(s.period, s.values.size - s.period), count, replace=False)
        y = s.values.copy()
        y[where] += size * remainder_sd(s) * rng.choice([-1.0, 1.0], count)
        spiked.append(OpenSeries(s.collection, s.name, y, s.period))
        observed = np.flatnonzero(~np.isnan(s.values))
        places[s.name] = {
            int(np.searchsorted(observed, w)) for w in where if not np.isnan(s.values[w])
        }
    return spiked, places


def spike_recall(
    series: Sequence[OpenSeries], seeds: Sequence[int] = (5, 6, 7, 8)
) -> tuple[int, int]:
    """(spikes found, spikes injected) over the series, one round of injections per seed
    (several rounds: one round's few hundred spikes leave the share a point or two unsure)."""
    hits = injected = 0
    for seed in seeds:
        spiked, places = inject_spikes(series, np.random.default_rng(seed))
        found = flags(spiked)
        hits += sum(len(places[k] & set(np.flatnonzero(f).tolist())) for k, f in found.items())
        injected += sum(len(p) for p in places.values())
    return hits, injected


def holdout_forecasts(
    series: Sequence[OpenSeries],
    cycles: int = 2,
    levels: Sequence[float] = (0.8, 0.95),
    windows: int = 1,
    **options: object,
) -> pd.DataFrame:
    """Hold out the last ``cycles`` cycles of every series long enough (at least twice as
    many cycles left to fit on), forecast them, and score; with ``windows`` > 1, also the
    ``cycles`` cycles before those (the series cut short there), and so on: one row per
    series and window with the
    MASE of the forecast and of the seasonal naive forecast (Hyndman & Koehler 2006: mean
    absolute error over the in-sample mean absolute seasonal difference), and per level the
    held-out points inside the interval and the points counted."""
    rows = []
    cut = [
        OpenSeries(
            s.collection, s.name, s.values[: s.values.size - w * cycles * s.period], s.period
        )
        for w in range(windows)
        for s in series
    ]
    for w in range(windows):
        rows += _holdout_rows(
            cut[w * len(series) : (w + 1) * len(series)], cycles, levels, w, options
        )
    return pd.DataFrame(rows)


def _holdout_rows(
    series: Sequence[OpenSeries],
    cycles: int,
    levels: Sequence[float],
    window: int,
    options: dict[str, object],
) -> list[dict[str, object]]:
    rows = []
    for period, group in by_period(series).items():
        horizon = cycles * period
        usable = [s for s in group if s.values.size >= 3 * horizon]
        if not usable:
            continue
        train = [OpenSeries(s.collection, s.name, s.values[:-horizon], period) for s in usable]
        outputs = {
            level: tidesplit.forecast(
                as_frame(train),
                "k",
                "t",
                "v",
                period=period,
                steps_ahead=horizon,
                coverage=level,
                **options,
            )
            for level in levels
        }
        for s, fit in zip(usable, train, strict=True):
            actual = s.values[-horizon:]
            y = fit.values
            scale = np.nanmean(np.abs(y[period:] - y[:-period]))
            naive = np.tile(y[-period:], cycles)
            seen = ~np.isnan(actual)
            row = {
                "collection": s.collection,
                "series": s.name,
                "window": window,
                "points": int(seen.sum()),
            }
            for level, out in outputs.items():
                mine = out[out["k"] == s.name]
                lower, upper = mine["low"].to_numpy(), mine["high"].to_numpy()
                inside = (actual >= lower) & (actual <= upper)
                row["inside_" + str(level).replace(".", "_")] = int(inside[seen].sum())
                row["forecast_mase"] = float(
                    np.mean(np.abs(actual - mine["forecast"].to_numpy())[seen]) / scale
                )
            row["naive_mase"] = float(np.mean(np.abs(actual - naive)[seen]) / scale)
            rows.append(row)
    return rows
