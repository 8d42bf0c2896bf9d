"""Invented hourly electricity loads of the "Brackwater Energy Cooperative" meters.

Every number is drawn from the generator below. Loads carry two cycles (the hour of the
day and the day of the week), a slow drift, noise, and holes: each meter skips a few
readings, and one meter was offline for half a day.

>>> table = hourly_loads(meters=2, weeks=3)
>>> table.num_rows < 2 * 3 * 168
True
"""

from __future__ import annotations

import numpy as np
import pyarrow as pa

METER_NAMES = ("north depot", "school", "bakery", "pool", "library", "harbour office")
OFFLINE_METER = 1
OFFLINE_HOURS = range(300, 312)


def hourly_loads(meters: int = 6, weeks: int = 8, seed: int = 11) -> pa.Table:
    """Columns meter, reading_at (TIMESTAMP, hourly from 2026-01-05), kwh; gaps are absent rows."""
    rng = np.random.default_rng(seed)
    hours = 168 * weeks
    t = np.arange(hours)
    start = np.datetime64("2026-01-05T00:00", "us")
    stamps = start + t.astype("timedelta64[h]").astype("timedelta64[us]")
    columns: dict[str, list] = {"meter": [], "reading_at": [], "kwh": []}
    for m in range(meters):
        base = rng.uniform(5, 40)
        daily = base * rng.uniform(0.2, 0.6) * np.sin(2 * np.pi * (t % 24 - 7) / 24)
        weekday = np.where((t // 24) % 7 >= 5, -rng.uniform(0.1, 0.4) * base, 0.0)
        drift = base * 0.001 * t
        kwh = base + daily + weekday + drift + rng.normal(0, 0.05 * base, hours)
        keep = rng.random(hours) > 0.01
        if m == OFFLINE_METER:
            keep[list(OFFLINE_HOURS)] = False
        columns["meter"] += [METER_NAMES[m % len(METER_NAMES)]] * int(keep.sum())
        columns["reading_at"].append(stamps[keep])
        columns["kwh"].append(np.round(np.maximum(kwh[keep], 0.1), 2))
    return pa.table(
        {
            "meter": pa.array(columns["meter"]),
            "reading_at": pa.array(np.concatenate(columns["reading_at"]), pa.timestamp("us")),
            "kwh": pa.array(np.concatenate(columns["kwh"])),
        }
    )
