"""Guerrero's lambda in SQL and on the open datasets: the default interval [0, 1], the bound
reported in the status, and the newest data counted."""

from __future__ import annotations

import numpy as np
import pandas as pd
from datasets import AIRLINE_PASSENGERS, open_collections

from tidesplit import transform


def test_sql_takes_the_interval_and_reports_the_bound(con):
    frame = pd.concat(
        [
            pd.DataFrame({"k": "airline", "t": np.arange(144), "v": AIRLINE_PASSENGERS}),
            pd.DataFrame(
                {"k": "steady", "t": np.arange(144), "v": 5 + np.tile(np.arange(12.0), 12)}
            ),
        ]
    )
    con.register("frame", frame)
    default = con.sql(
        "SELECT k, boxcox_lambda, status FROM tide_profile(frame, 'k', 't', 'v', period := 12, "
        "transform := 'boxcox') ORDER BY k"
    ).df()
    airline = default.set_index("k").loc["airline"]
    assert airline["boxcox_lambda"] == 0.0
    assert airline["status"] == "ok; Box-Cox lambda at the bound 0 of [0, 1]"
    wide = (
        con.sql(
            "SELECT k, boxcox_lambda, status FROM tide_profile(frame, 'k', 't', 'v', period := 12, "
            "transform := 'boxcox', boxcox_bounds := [-1, 2]) ORDER BY k"
        )
        .df()
        .set_index("k")
    )
    # Guerrero's (1993) lambda of the airline series, about -0.29 (see test_transform)
    assert abs(wide.loc["airline", "boxcox_lambda"] + 0.29) < 0.01
    assert wide.loc["airline", "status"] == "ok"


def _positive_series():
    return [
        s
        for found in open_collections().values()
        for s in found
        if np.nanmin(s.values) > 0 and s.values.size >= 2 * s.period
    ]


def test_default_interval_is_the_wide_choice_held_to_it():
    # on every positive open series Guerrero's objective has one minimum, so the lambda
    # chosen in [0, 1] is the one chosen in [-1, 2] held to [0, 1]: the narrower interval
    # changes no choice inside it, and the status says where it held one
    for s in _positive_series():
        wide = transform.guerrero_lambda(s.values, s.period, (-1, 2))
        chosen = transform.guerrero_lambda(s.values, s.period)
        assert abs(np.clip(wide, 0, 1) - chosen) < 1e-4, s.name


def test_newest_partial_cycle_counts_on_open_series():
    # series whose length is not a whole number of cycles: the blocks end at the newest
    # point. Leaving the newest part out instead (blocks from the start, as before) moves
    # lambda on some of them; the newest cycle is the one the forecast starts from.
    moved = []
    for s in _positive_series():
        whole = s.values.size // s.period * s.period
        if whole == s.values.size:
            continue
        newest = transform.guerrero_lambda(s.values, s.period)
        oldest_first = transform.guerrero_lambda(s.values[:whole], s.period)
        moved.append(abs(newest - oldest_first))
    assert len(moved) > 20 and max(moved) > 0.1
