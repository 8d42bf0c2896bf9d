"""Simulated monthly series whose true trend and seasonal part are known, for judging the
spans ``choose_spans`` picks against the default ones, and the figures README gives.

    python tests/span_cases.py      # the table of README's "Choosing spans"

Each series: a smooth wandering trend (a random walk under a 13-month moving average), a
seasonal pattern (twelve centred values) that is fixed, changes slowly (from one pattern
to another across the series) or changes quickly (back and forth between two patterns every
5 to 8 years), and Gaussian noise; optionally 5% of values missing, or a few spikes split
with ``robust``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from tidesplit.batch_split import split_batch
from tidesplit.params import SplitParams

PERIOD = 12
CHANGES = ("fixed", "slow", "quick")


@dataclass
class Truth:
    values: np.ndarray  # trials x points, NaN where missing
    trend: np.ndarray
    seasonal: np.ndarray


def simulate(
    change: str,
    trials: int,
    points: int = 120,
    noise: float = 0.5,
    missing: float = 0.0,
    spikes: int = 0,
    seed: int = 0,
) -> Truth:
    """``trials`` series of ``points`` months with a known trend and seasonal part."""
    rng = np.random.default_rng(seed)
    t = np.arange(points)
    values, trends, seasonals = [], [], []
    for _ in range(trials):
        walk = 10 + np.cumsum(rng.normal(0, 0.15, points))
        trend = np.convolve(np.pad(walk, 6, mode="edge"), np.ones(13) / 13, "valid")
        first, second = rng.normal(0, 1, (2, PERIOD))
        first -= first.mean()
        second -= second.mean()
        if change == "fixed":
            mix = np.zeros(points)
        elif change == "slow":
            mix = t / (points - 1)
        else:
            cycle_years = rng.uniform(5, 8)
            mix = 0.5 + 0.5 * np.sin(2 * np.pi * t / (12 * cycle_years) + rng.uniform(0, 6.3))
        seasonal = (1 - mix) * first[t % PERIOD] + mix * second[t % PERIOD]
        y = trend + seasonal + rng.normal(0, noise, points)
        if spikes:
            at = rng.choice(points, spikes, replace=False)
            y[at] += rng.choice([-1, 1], spikes) * 8 * noise
        if missing:
            y[rng.random(points) < missing] = np.nan
        values.append(y)
        trends.append(trend)
        seasonals.append(seasonal)
    return Truth(np.array(values), np.array(trends), np.array(seasonals))


def errors(truth: Truth, **settings: object) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per series: mean squared error of the trend and of the seasonal part against the
    truth, and the season span used."""
    m, n = truth.values.shape
    out = split_batch(
        truth.values.ravel(),
        np.arange(0, m * n + 1, n, dtype=np.int64),
        SplitParams(period=PERIOD, **settings),
    )
    trend = ((out.trend.reshape(m, n) - truth.trend) ** 2).mean(axis=1)
    seasonal = ((out.seasonal.reshape(m, n) - truth.seasonal) ** 2).mean(axis=1)
    return trend, seasonal, out.season_spans


@dataclass
class Comparison:
    share_better: float  # trials where the chosen spans' total error is below the default's
    mean_ratio: float  # mean total error, chosen / default
    worst_ratio: float  # the largest ratio of one trial
    ratio_95: float  # the 95th percentile of the ratio
    trend_ratio: float  # mean trend error, chosen / default
    seasonal_ratio: float  # mean seasonal error, chosen / default


def compare(truth: Truth, **settings: object) -> Comparison:
    """The chosen spans against the default ones on the same series (total error: the trend's
    plus the seasonal part's mean squared error)."""
    default_trend, default_seasonal, _ = errors(truth, **settings)
    trend, seasonal, _ = errors(truth, choose_spans=True, **settings)
    ratio = (trend + seasonal) / (default_trend + default_seasonal)
    return Comparison(
        share_better=float(np.mean(ratio < 1)),
        mean_ratio=float((trend + seasonal).mean() / (default_trend + default_seasonal).mean()),
        worst_ratio=float(ratio.max()),
        ratio_95=float(np.quantile(ratio, 0.95)),
        trend_ratio=float(trend.mean() / default_trend.mean()),
        seasonal_ratio=float(seasonal.mean() / default_seasonal.mean()),
    )


SETUPS = {
    "complete": {},
    "5% missing": {"missing": 0.05},
    "4 spikes, robust": {"spikes": 4, "robust": True},
}


def table(trials: int = 200) -> str:
    """README's table: every kind of change, 10 and 20 years, each setup."""
    lines = [
        "| pattern | years | series | better | total error | worst | 95% | trend | seasonal |",
        "| --- | --- | --- | --- | --- | --- | --- | --- | --- |",
    ]
    for change in CHANGES:
        for points in (120, 240):
            for name, setup in SETUPS.items():
                robust = setup.get("robust", False)
                kept = {k: v for k, v in setup.items() if k != "robust"}
                truth = simulate(change, trials, points, **kept)
                found = compare(truth, robust=robust) if robust else compare(truth)
                lines.append(
                    f"| {change} | {points // 12} | {name} | {found.share_better:.0%} | "
                    f"{found.mean_ratio:.2f} | {found.worst_ratio:.2f} | {found.ratio_95:.2f} | "
                    f"{found.trend_ratio:.2f} | {found.seasonal_ratio:.2f} |"
                )
    return "\n".join(lines)


if __name__ == "__main__":
    print(table())
