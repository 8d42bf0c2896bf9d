"""Regenerate the pictures the README shows, from the demo's invented data.

    python docs/make_pictures.py          # writes docs/pictures/*.png

Needs matplotlib (the ``pictures`` extra) and, for the report's screenshot, chromium.
"""

from __future__ import annotations

import shutil
import subprocess
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd
from tidesplit.examples.meter_loads import hourly_loads
from tidesplit.examples.retail_chain import weekly_units

import tidesplit
from tidesplit import pictures

HERE = Path(__file__).resolve().parent / "pictures"
KEY = ["shop", "product"]
SETTINGS = {"period": 52, "robust": True, "transform": "log"}


def invented_fleet(keys: int = 20_000, seed: int = 4) -> pd.DataFrame:
    """Many invented monthly series: seasonal, trending, both or neither, noise of any size."""
    rng = np.random.default_rng(seed)
    t = np.arange(120)
    season = rng.choice([0.0, 1.0], keys)[:, None] * rng.uniform(0.3, 3.0, (keys, 1))
    slope = rng.choice([0.0, 1.0], keys)[:, None] * rng.uniform(0.005, 0.05, (keys, 1))
    phase = rng.uniform(0, 2 * np.pi, (keys, 1))
    values = (
        50
        + season * np.sin(2 * np.pi * t / 12 + phase)
        + slope * t
        + rng.normal(0, 1.0, (keys, t.size)) * rng.uniform(0.2, 1.5, (keys, 1))
    )
    return pd.DataFrame(
        {
            "series": np.repeat([f"item {i:05d}" for i in range(keys)], t.size),
            "month": np.tile(t, keys),
            "value": values.ravel(),
        }
    )


def screenshot(page: Path, fragment: str, target: Path) -> None:
    browser = shutil.which("chromium")
    if browser is None:
        print("chromium not found: the report's screenshot is left as it was")
        return
    with tempfile.TemporaryDirectory() as profile:
        subprocess.run(
            [
                browser,
                "--headless",
                "--no-sandbox",
                "--disable-gpu",
                "--disable-quic",
                "--no-first-run",
                "--disable-background-networking",
                "--disable-component-update",
                "--disable-sync",
                f"--user-data-dir={profile}",
                "--window-size=1300,900",
                "--hide-scrollbars",
                f"--screenshot={target}",
                page.as_uri() + fragment,
            ],
            check=True,
            capture_output=True,
            timeout=120,
        )


def main() -> None:
    HERE.mkdir(exist_ok=True)
    sales = weekly_units().to_pandas()
    parts = tidesplit.split_table(sales, KEY, "week", "units", **SETTINGS)
    profiled = tidesplit.profile(sales, KEY, "week", "units", **SETTINGS)
    unusual = tidesplit.outliers(sales, KEY, "week", "units", period=52, transform="log")

    pictures.draw_parts(
        parts,
        KEY,
        "week",
        "units",
        show="Larch Hill / oat loaf",
        unusual=unusual,
        path=HERE / "parts.png",
    )
    pictures.draw_parts(
        parts,
        KEY,
        "week",
        "units",
        show=[
            "Quayside / sun cream",
            "Quayside / firewood",
            "Millbrook / oat loaf",
            "Fenwick / mince pie",
        ],
        path=HERE / "parts-several.png",
    )
    loads = hourly_loads().to_pandas()
    multi = tidesplit.split_table(loads, "meter", "reading_at", "kwh", periods=[24, 168])
    pictures.draw_parts(
        multi, "meter", "reading_at", "kwh", show="bakery", path=HERE / "parts-two-periods.png"
    )
    pictures.draw_fleet(profiled, KEY, path=HERE / "fleet.png")
    many = invented_fleet()
    pictures.draw_fleet(
        tidesplit.profile(many, "series", "month", "value", period=12),
        "series",
        path=HERE / "fleet-dense.png",
    )
    # on the original scale, where the summer swing grows with the level: a fixed pattern
    # (span 0) cannot follow it, and its remainder shows what it missed; the spans
    # choose_spans picks are marked
    pictures.draw_spans(
        sales,
        KEY,
        "week",
        "units",
        pick="Quayside / sun cream",
        period=52,
        robust=True,
        mark_chosen=True,
        path=HERE / "spans.png",
    )
    with tempfile.TemporaryDirectory() as folder:
        page = pictures.write_report(
            Path(folder) / "run.html",
            parts,
            profiled,
            KEY,
            "week",
            "units",
            unusual=unusual,
            title="Lantern Lane Grocers",
        )
        screenshot(page, "#find=larch%20hill%20%2F%20oat", HERE / "report.png")
    for path in sorted(HERE.glob("*.png")):
        print(f"wrote {path.relative_to(HERE.parent.parent)}")


if __name__ == "__main__":
    main()
