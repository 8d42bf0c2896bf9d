"""Every answer through every front: the same input gives the same columns, the same numbers
and the same errors in SQL and in Python.

A front is a function of (answer, table, arguments) returning a DataFrame; adding a front is
adding one entry to FRONTS.
"""

from __future__ import annotations

from collections.abc import Callable

import duckdb
import numpy as np
import pandas as pd
import pytest
from fleet import PERIOD, make_fleet

import tidesplit
from tidesplit import answers

KEYS = ["shop", "item"]


def sql_front(answer: str, frame: pd.DataFrame, args: dict) -> pd.DataFrame:
    con = tidesplit.connect()
    con.register("__frame", frame)
    con.execute("CREATE TABLE fleet AS SELECT * FROM __frame")
    named = ", ".join(f"{k} := {_sql_literal(v)}" for k, v in args.items())
    try:
        return con.sql(f"SELECT * FROM tide_{answer}(fleet, {KEYS}, 't', 'v', {named})").df()
    except duckdb.Error as error:  # the message as the user reads it
        raise RuntimeError(str(error)) from error
    finally:
        con.close()


def python_front(answer: str, frame: pd.DataFrame, args: dict) -> pd.DataFrame:
    function = {"split": tidesplit.split_table, "split_multi": tidesplit.split_table}.get(
        answer, getattr(tidesplit, answer, None)
    )
    try:
        return function(frame, KEYS, "t", "v", **args)
    except (tidesplit.ParamError, tidesplit.SplitError) as error:
        raise RuntimeError(str(error)) from error


def _sql_literal(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return f"'{value}'"
    if isinstance(value, list):
        return "[" + ", ".join(map(str, value)) + "]"
    return repr(value)


FRONTS: dict[str, Callable[[str, pd.DataFrame, dict], pd.DataFrame]] = {
    "sql": sql_front,
    "python": python_front,
}
# per answer: arguments, the columns that identify a row, the numeric columns to compare
ANSWERS = {
    "split": ({"period": PERIOD, "fill_gaps": True}, ["item", "t"],
              ["trend", "seasonal", "remainder", "adjusted", "weight"]),
    "profile": ({"period": PERIOD}, ["item"],
                ["strength_of_trend", "strength_of_season", "remainder_sd", "points"]),
    "outliers": ({"period": PERIOD, "all_rows": True}, ["item", "t"],
                 ["expected", "remainder", "score", "weight"]),
    "forecast": ({"period": PERIOD, "steps_ahead": 4}, ["item", "steps_ahead"],
                 ["forecast", "low", "high"]),
    # several periods through every answer, not only the split
    "profile_periods": ({"periods": [2, PERIOD]}, ["item"], ["strength_of_season"]),
    "outliers_periods": ({"periods": [2, PERIOD], "all_rows": True}, ["item", "t"],
                         ["expected", "score"]),
    "forecast_periods": ({"periods": [2, PERIOD], "steps_ahead": 3}, ["item", "steps_ahead"],
                         ["forecast", "low", "high"]),
    "audit": ({"period": PERIOD, "sample": 12}, ["item"],
              ["points_compared", "trend_gap"]),
    # spans chosen per series: the same spans and numbers from every front
    "split_chosen": ({"period": PERIOD, "choose_spans": True, "fill_gaps": True}, ["item", "t"],
                     ["trend", "seasonal", "remainder", "season_span", "trend_span"]),
    "profile_chosen": ({"period": PERIOD, "choose_spans": True}, ["item"],
                       ["strength_of_season", "season_span", "trend_span"]),
}  # fmt: skip


@pytest.fixture(scope="module")
def fleet_frame() -> pd.DataFrame:
    fleet = make_fleet(np.random.default_rng(5), 48, "date")
    con = duckdb.connect()
    con.register("f", fleet.frame)
    # through DuckDB once, so every front gets the same column types
    return con.sql("SELECT shop, item, CAST(t AS DATE) AS t, v FROM f").df()


def _comparable(frame: pd.DataFrame, keys: list[str]) -> pd.DataFrame:
    out = frame.copy()
    out["t"] = pd.to_datetime(out["t"]) if "t" in out else None
    return out.sort_values(keys).reset_index(drop=True)


def _periods(value) -> list | None:
    return None if value is None or value is pd.NA or np.ndim(value) == 0 else list(value)


@pytest.mark.parametrize("answer", sorted(ANSWERS))
def test_every_front_gives_the_same_answer(fleet_frame, answer):
    args, keys, numbers = ANSWERS[answer]
    answer = answer.removesuffix("_periods").removesuffix("_chosen")
    args = {**args, "on_error": "keep"}
    results = {name: front(answer, fleet_frame, args) for name, front in FRONTS.items()}
    first_name, first = next(iter(results.items()))
    expected_columns = list(getattr(answers, answer.upper()))
    for name, result in results.items():
        # the key columns, time and value where the answer has rows per time, then its own
        assert [c for c in result.columns if c in expected_columns] == expected_columns, name
        if answer == "audit":  # each front samples by its own hash of the key
            assert len(result) == args["sample"]
            ok = result["status"] == "ok"
            assert (result.loc[ok, "trend_gap"] < 1e-8).all()
            continue
        mine, theirs = _comparable(result, keys), _comparable(first, keys)
        assert len(mine) == len(theirs), (name, first_name)
        assert mine["status"].tolist() == theirs["status"].tolist() or all(
            a.replace(" 00:00:00", "") == b.replace(" 00:00:00", "")
            for a, b in zip(mine["status"], theirs["status"], strict=True)
        )
        if "periods" in mine:
            assert [_periods(p) for p in mine["periods"]] == [
                _periods(p) for p in theirs["periods"]
            ]
        for column in numbers:
            np.testing.assert_allclose(
                mine[column].to_numpy(dtype=float),
                theirs[column].to_numpy(dtype=float),
                rtol=1e-9,
                atol=1e-9,
                equal_nan=True,
                err_msg=f"{answer} {column} {name}",
            )


@pytest.mark.parametrize(
    ("answer", "args", "words"),
    [
        ("split", {"period": 4, "trend_span": 4}, "trend_span must be an odd integer"),
        (
            "split",
            {"period": 4, "choose_spans": True, "season_span": 7, "trend_span": 9},
            "give at most one of them",
        ),
        ("profile", {"period": 4, "transform": "cube"}, "transform must be one of"),
        ("forecast", {"period": 4, "steps_ahead": 2.5}, "steps_ahead must be a whole number"),
        ("outliers", {"period": 4, "rule": "nope"}, "rule must be one of"),
        ("split", {"period": 4}, "series {'shop': "),  # a bad series under raise
    ],
)
def test_every_front_refuses_alike(fleet_frame, answer, args, words):
    for name, front in FRONTS.items():
        with pytest.raises(RuntimeError, match=None) as caught:
            front(answer, fleet_frame, args)
        assert words in str(caught.value), (name, str(caught.value))


def test_python_groups_keys_as_sql_does():
    # struct keys, NaN apart from NULL in a float key, and integers beyond 2**53 beside a
    # NULL (which pandas would turn into floats, merging 2**62 and 2**62 + 1): the same
    # groups, keys and numbers in both fronts, from one Arrow table
    import pyarrow as pa

    t = np.arange(16)
    keys = {
        "struct": (
            pa.struct([("a", pa.int64()), ("b", pa.string())]),
            [{"a": 1, "b": "x"}, {"a": None, "b": "x"}, {"a": 1, "b": None}, None],
        ),
        "double": (pa.float64(), [float("nan"), None, 1.5, -0.5]),
        "bigint": (pa.int64(), [2**62, 2**62 + 1, None, 7]),
    }
    for name, (kind, values) in keys.items():
        column = [v for v in values for _ in t]
        level = np.repeat(np.arange(len(values)) * 10.0, t.size)
        table = pa.table(
            {
                "k": pa.array(column, type=kind),
                "t": np.tile(t, len(values)),
                "v": level + np.tile(np.sin(t * np.pi / 2), len(values)),
            }
        )
        con = tidesplit.connect()
        con.register("keyed", table)
        sql = con.sql("SELECT * FROM tide_split(keyed, 'k', 't', 'v', period := 4)").arrow()
        sql = sql.read_all() if hasattr(sql, "read_all") else sql
        mine = tidesplit.split_table(table, "k", "t", "v", period=4)
        assert len(mine) == sql.num_rows == table.num_rows, name

        def groups(keys, trends):
            found = {}
            for key, trend in zip(keys, trends, strict=True):
                shown = "NaN" if isinstance(key, float) and key != key else repr(key)
                found.setdefault(shown, []).append(trend)
            return {k: sorted(v) for k, v in found.items()}

        theirs = groups(sql["k"].to_pylist(), sql["trend"].to_pylist())
        ours = groups(mine["k"].tolist(), mine["trend"].tolist())
        assert len(theirs) == len(values), name
        assert ours == theirs, name
        con.close()
