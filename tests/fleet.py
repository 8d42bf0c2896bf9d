"""Generated tables of many keyed series, good and bad mixed, and the checks that every input
row is accounted for in an answer.

Each series is of a known kind, so the checks know what must come back: a good series (with
gaps and NULL values or without) is split; a bad one is left unsplit with a status naming
why (under ``on_error := 'keep'``). Levels differ from key to key, so a value that lands on
another key's row is seen.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

PERIOD = 4
# kind of series -> words its status must contain (None: split, status starts with "ok")
KINDS: dict[str, str | None] = {
    "complete": None,
    "gaps": None,
    "null values": None,
    "gaps and null values": None,
    "too short": "at least two periods",
    "duplicate time": "duplicate time",
    "null time": "a time is NULL",
    "infinite": "infinite value at",
    "all missing": "every value is missing",
    "cycle position never seen": "no value is observed at",
    "irregular": "irregular times",
    "huge": "the largest tidesplit splits",
}
BAD_KINDS = [k for k, reason in KINDS.items() if reason is not None]


def bad_kinds(time_kind: str) -> list[str]:
    # integer times step by their smallest difference, so no integer time is off the step
    return [k for k in BAD_KINDS if not (k == "irregular" and time_kind == "integer")]


@dataclass
class Fleet:
    frame: pd.DataFrame  # shop, item, t, v
    kinds: dict[tuple, str]  # (shop, item) -> kind
    grid: dict[tuple, list]  # (shop, item) -> every time of its regular grid (good series)
    time_kind: str


def _times(time_kind: str, count: int, start: int) -> list:
    if time_kind == "integer":
        return list(range(start, start + count))
    months = pd.date_range(
        pd.Timestamp("2015-01-01") + pd.DateOffset(months=start), periods=count, freq="MS"
    )
    return list(months)


def make_fleet(
    rng: np.random.Generator, keys: int, time_kind: str, bad_share: float = 0.3
) -> Fleet:
    """``keys`` series of 24 to 40 points, a share of them bad (every bad kind at least once
    when there is room), one with a NULL shop."""
    rows = []
    kinds: dict[tuple, str] = {}
    grid: dict[tuple, list] = {}
    bad = bad_kinds(time_kind)
    bad_count = max(len(bad), int(keys * bad_share)) if keys >= 2 * len(bad) else 0
    good_kinds = [k for k, reason in KINDS.items() if reason is None]
    for index in range(keys):
        kind = bad[index % len(bad)] if index < bad_count else good_kinds[index % len(good_kinds)]
        shop = None if index == keys - 1 else f"shop {index % 7}"
        key = (shop, index)
        n = int(rng.integers(24, 41)) if kind != "too short" else 2 * PERIOD - 1
        start = int(rng.integers(0, 12))
        times = _times(time_kind, n, start)
        t = np.arange(n)
        values = (
            100.0 * (index + 1)
            + 0.2 * t
            + 5 * np.sin(2 * np.pi * t / PERIOD)
            + rng.normal(0, 0.5, n)
        )
        values = values.astype(object)
        keep = np.ones(n, dtype=bool)
        if kind in ("gaps", "gaps and null values"):
            keep[rng.choice(np.arange(1, n - 1), size=3, replace=False)] = False
        if kind in ("null values", "gaps and null values"):
            values[rng.choice(np.arange(n), size=3, replace=False)] = None
        if kind == "duplicate time":
            times[5] = times[4]
        if kind == "null time":
            times[3] = None
        if kind == "infinite":
            values[6] = np.inf
        if kind == "all missing":
            values[:] = None
        if kind == "cycle position never seen":
            values[t % PERIOD == 1] = None
        if kind == "irregular":
            times[7] = times[7] + pd.Timedelta(days=14)
        if kind == "huge":
            values[2] = 1e200
        kinds[key] = kind
        if KINDS[kind] is None:
            grid[key] = times
        for i in np.flatnonzero(keep):
            rows.append((shop, index, times[i], values[i]))
    frame = pd.DataFrame(rows, columns=["shop", "item", "t", "v"])
    frame["v"] = pd.to_numeric(frame["v"])
    if time_kind == "integer":
        frame["t"] = frame["t"].astype("Int64")
    order = rng.permutation(len(frame))  # rows in no particular order
    return Fleet(frame.iloc[order].reset_index(drop=True), kinds, grid, time_kind)


def to_duckdb(con, fleet: Fleet, name: str = "fleet") -> pd.DataFrame:
    """The fleet as a DuckDB table (DATE or DOUBLE times); returns it as DuckDB reads it."""
    con.register("__fleet_frame", fleet.frame)
    time_sql = "CAST(t AS DATE)" if fleet.time_kind == "date" else "t"
    con.execute(
        f"CREATE OR REPLACE TABLE {name} AS SELECT shop, item, {time_sql} AS t, v "
        "FROM __fleet_frame"
    )
    con.unregister("__fleet_frame")
    return con.sql(f"SELECT * FROM {name}").df()


def comparable(value):
    """One spelling for a cell: NULL, NaN and NaT alike; times as timestamps."""
    if value is None or (isinstance(value, float) and np.isnan(value)) or value is pd.NaT:
        return None
    if isinstance(value, (pd.Timestamp, np.datetime64)) or hasattr(value, "isoformat"):
        return pd.Timestamp(value)
    if isinstance(value, (np.floating, float)):
        return float(value)
    if isinstance(value, (np.integer, int)):
        return int(value)
    return value


def row_set(frame: pd.DataFrame, columns: list[str]) -> list[tuple]:
    """The rows as comparable tuples, sorted: the multiset of what came in or went out."""
    rows = [tuple(comparable(v) for v in row) for row in frame[columns].itertuples(index=False)]
    return sorted(rows, key=repr)


def key_of(row) -> tuple:
    return (None if pd.isna(row.shop) else row.shop, int(row.item))


def check_status(
    fleet: Fleet, statuses: dict[tuple, str], expect: dict[str, str | None] | None = None
) -> None:
    """Every key is there, good ones split, bad ones with the reason of their kind
    (``expect`` overrides what a kind gives, for an answer where it differs)."""
    assert set(statuses) == set(fleet.kinds), "a key is missing from the answer"
    reasons = KINDS | (expect or {})
    for key, kind in fleet.kinds.items():
        status = statuses[key]
        reason = reasons[kind]
        if reason is None:
            assert status.startswith("ok"), (key, kind, status)
        else:
            assert reason in status, (key, kind, status)


def check_split(
    fleet: Fleet,
    given: pd.DataFrame,
    out: pd.DataFrame,
    *,
    filled: bool,
    transform=lambda v: v,
    expect: dict[str, str | None] | None = None,
) -> None:
    """The split's rows against the input: each input row once and unchanged, inserted rows
    exactly the missing grid times, components present and adding up for split series and
    NULL for the others."""
    assert row_set(out[~out["inserted"]], ["shop", "item", "t", "v"]) == row_set(
        given, ["shop", "item", "t", "v"]
    )
    statuses = {key_of(r): r.status for r in out.itertuples()}
    check_status(fleet, statuses, expect)
    inserted = out[out["inserted"]]
    if not filled:
        assert inserted.empty
    else:
        assert inserted["v"].isna().all()
        for key, times in fleet.grid.items():
            if not statuses[key].startswith("ok"):
                continue
            rows = out[(out["item"] == key[1])]
            got = sorted(comparable(t) for t in rows.loc[rows["inserted"], "t"])
            seen = {comparable(t) for t in rows.loc[~rows["inserted"], "t"]}
            wanted = sorted(comparable(t) for t in times if comparable(t) not in seen)
            assert got == wanted, key
    ok = out["status"].str.startswith("ok")
    good = out[ok]
    assert good["trend"].notna().all() and good["seasonal"].notna().all()
    observed = good["v"].notna()
    assert good.loc[observed, "remainder"].notna().all()
    assert good.loc[~observed, "remainder"].isna().all()
    noted = good["status"].str.contains("adjusted is NULL")  # said in the status
    assert good.loc[observed & ~noted, "adjusted"].notna().all()
    total = good["trend"] + good["seasonal"] + good["remainder"]
    np.testing.assert_allclose(
        total[observed], transform(good.loc[observed, "v"].to_numpy()), rtol=1e-9
    )
    left = out[~ok]
    for column in ("trend", "seasonal", "remainder", "adjusted", "weight"):
        assert left[column].isna().all(), column
