"""Time the fleet picture for a large fleet beside a plain scatter of the same points.

    python benchmarks/pictures.py            # 100,000 keys
    python benchmarks/pictures.py --keys 1000000

The strengths are invented (a mixture of seasonal, trending, both and noise groups), as
``tidesplit.profile`` would give them; the picture is what is timed, not the split. Each
figure is the best of three runs, drawing and writing a PNG.
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd


def invented_profile(keys: int, seed: int = 5) -> pd.DataFrame:
    """Strengths of an invented fleet: four groups, a few stragglers, some keys not split."""
    rng = np.random.default_rng(seed)
    group = rng.choice(4, size=keys, p=[0.35, 0.25, 0.3, 0.1])
    season_centre = np.array([0.9, 0.2, 0.85, 0.15])[group]
    trend_centre = np.array([0.2, 0.85, 0.9, 0.15])[group]
    season = np.clip(rng.normal(season_centre, 0.08), 0, 1)
    trend = np.clip(rng.normal(trend_centre, 0.08), 0, 1)
    stragglers = rng.random(keys) < 0.002
    season[stragglers] = rng.random(stragglers.sum())
    trend[stragglers] = rng.random(stragglers.sum())
    unsplit = rng.random(keys) < 0.001
    season[unsplit] = trend[unsplit] = np.nan
    return pd.DataFrame(
        {
            "series": [f"s{i:07d}" for i in range(keys)],
            "strength_of_season": season,
            "strength_of_trend": trend,
            "status": np.where(unsplit, "too short", "ok"),
        }
    )


def best_of(runs: int, work) -> float:
    times = []
    for _ in range(runs):
        started = time.perf_counter()
        work()
        times.append(time.perf_counter() - started)
    return min(times)


def plain_scatter(profiled: pd.DataFrame, path: Path) -> None:
    """The baseline: every key a point, nothing else (same figure size and resolution)."""
    from matplotlib.figure import Figure

    figure = Figure(figsize=(8.4, 6.0), dpi=100, layout="constrained")
    ax = figure.add_subplot()
    ax.scatter(profiled["strength_of_season"], profiled["strength_of_trend"], s=5)
    figure.savefig(path)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--keys", type=int, default=100_000)
    args = parser.parse_args()
    from tidesplit import pictures

    profiled = invented_profile(args.keys)
    folder = Path(tempfile.mkdtemp())
    ours = best_of(3, lambda: pictures.draw_fleet(profiled, "series", path=folder / "f.png"))
    ours_svg = best_of(3, lambda: pictures.draw_fleet(profiled, "series", path=folder / "f.svg"))
    base = best_of(3, lambda: plain_scatter(profiled, folder / "b.png"))
    base_svg = best_of(3, lambda: plain_scatter(profiled, folder / "b.svg"))
    print(f"fleet picture of {args.keys:,} keys (best of 3, seconds; file size)")
    print("| picture | PNG s | PNG KB | SVG s | SVG KB |")
    print("| --- | ---: | ---: | ---: | ---: |")
    for name, png, svg, stem in (
        ("draw_fleet (density where crowded)", ours, ours_svg, "f"),
        ("plain scatter of every key (baseline)", base, base_svg, "b"),
    ):
        sizes = [(folder / f"{stem}.{ext}").stat().st_size / 1024 for ext in ("png", "svg")]
        print(f"| {name} | {png:.2f} | {sizes[0]:.0f} | {svg:.2f} | {sizes[1]:.0f} |")


if __name__ == "__main__":
    main()
