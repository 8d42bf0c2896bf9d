"""Properties that hold for any table: generated tables (tests/generated.py) of random
lengths, periods, steps, keys, times and values, drawn by hypothesis.

Under the fixed "ci" profile (tests/conftest.py) each property runs the number of examples
in its ``settings`` (``pytest --hypothesis-show-statistics`` reports them);
``HYPOTHESIS_PROFILE=explore`` searches with fresh ones.

- every input row comes back once, unchanged, with one status per key; split series have
  finite trend and seasonal everywhere and add up to their values; the others have none;
- under ``on_error := 'raise'`` the query fails exactly when some series is left unsplit;
- a series' numbers are the same to the bit whether it is split alone or among many
  others, on one DuckDB thread or several, with the linear map's matrices built afresh or
  kept from before, and from SQL or from Python.
"""

from __future__ import annotations

import math
import os

import duckdb
import numpy as np
import pandas as pd
import pyarrow as pa
import pytest
from generated import Table, tables
from hypothesis import given, settings

import tidesplit
from tidesplit.kernel import linear

# examples per property under the "ci" profile; ten times as many when exploring
_SCALE = 10 if os.environ.get("HYPOTHESIS_PROFILE") == "explore" else 1


def _examples(count: int) -> int:
    return count * _SCALE


NUMBERS = ("trend", "seasonal", "remainder", "adjusted", "weight", "period", "boxcox_lambda")


def _split_sql(con: duckdb.DuckDBPyConnection, table: Table, extra: str = "") -> pa.Table:
    period = f"period := {table.period}, " if table.period else ""
    return con.sql(
        f"SELECT * FROM tide_split(generated, ['k', 'g'], 't', 'v', {period}"
        f"fill_gaps := true, on_error := 'keep'{extra})"
    ).to_arrow_table()


def _token(value):
    """One spelling per cell: NaN apart from NULL, times as themselves."""
    if isinstance(value, float) and math.isnan(value):
        return "NaN"
    if isinstance(value, dict):
        return repr(value)
    return value


def _rows(table: pa.Table, columns: list[str]) -> list[tuple]:
    data = table.select(columns).to_pylist()
    return sorted((tuple(_token(r[c]) for c in columns) for r in data), key=repr)


def _check_accounting(given_rows: pa.Table, out: pa.Table) -> int:
    """Every input row once, one status per key, components as the status says; returns the
    number of series split."""
    kept = out.filter(pa.compute.invert(out["inserted"]))
    assert _rows(kept, ["k", "g", "t", "v"]) == _rows(given_rows, ["k", "g", "t", "v"])
    by_key: dict = {}
    for row in out.to_pylist():
        by_key.setdefault((_token(row["k"]), row["g"]), []).append(row)
    keys = {(_token(k), g) for k, g in zip(*_key_lists(given_rows), strict=True)}
    assert len(by_key) == len(keys)
    split = 0
    for rows in by_key.values():
        statuses = {r["status"] for r in rows}
        assert len(statuses) == 1, statuses
        status = statuses.pop()
        assert status, "an empty status"
        if status.startswith("ok"):
            split += 1
            observed = [r for r in rows if r["v"] is not None and not math.isnan(r["v"])]
            size = max((abs(r["v"]) for r in observed), default=0.0)
            for r in rows:
                assert math.isfinite(r["trend"]) and math.isfinite(r["seasonal"]), r
            for r in observed:
                assert math.isfinite(r["remainder"]), r
                total = r["trend"] + r["seasonal"] + r["remainder"]
                assert abs(total - r["v"]) <= 1e-9 * size, r
        else:
            for r in rows:
                for name in ("trend", "seasonal", "remainder", "adjusted", "weight"):
                    assert r[name] is None, (name, r)
    return split


def _key_lists(table: pa.Table) -> tuple[list, list]:
    return table["k"].to_pylist(), table["g"].to_pylist()


_connections: dict[int, duckdb.DuckDBPyConnection] = {}


def _connection(threads: int) -> duckdb.DuckDBPyConnection:
    """One connection per thread count for the whole file (opening one registers every
    function, which would take most of an example's time)."""
    if threads not in _connections:
        con = tidesplit.connect()
        con.execute(f"SET threads = {threads}")
        con.execute("SET TimeZone = 'UTC'")
        _connections[threads] = con
    return _connections[threads]


@settings(max_examples=_examples(200))
@given(tables())
def test_every_row_is_accounted_for(table):
    con = _connection(1)
    given_rows = table.arrow()
    con.register("generated", given_rows)
    out = _split_sql(con, table)
    split = _check_accounting(given_rows, out)
    # raise mode fails exactly when keep mode left a series unsplit
    series = len({(_token(k), g) for k, g in zip(*_key_lists(given_rows), strict=True)})
    period = f"period := {table.period}" if table.period else "fill_gaps := false"
    query = f"SELECT * FROM tide_split(generated, ['k', 'g'], 't', 'v', {period})"
    if split == series:
        assert len(con.sql(query).fetchall()) == given_rows.num_rows
    else:
        with pytest.raises(duckdb.Error, match=r"series \{'k': "):
            con.sql(query).fetchall()


def _crowd(table: Table, copies: int) -> pa.Table:
    """The table, then ``copies`` more of it under other keys (column ``g``): the same
    shapes, so that its series share their batches and the linear map's groups."""
    parts = [table.arrow(0)] + [table.arrow(c) for c in range(1, copies + 1)]
    return pa.concat_tables(parts)


def _numbers(out: pa.Table) -> dict:
    """Per (key, time, inserted) row: the numbers' bits and the status."""
    found = {}
    for row in out.filter(pa.compute.equal(out["g"], 0)).to_pylist():
        bits = tuple(None if row[c] is None else np.float64(row[c]).tobytes() for c in NUMBERS)
        found[(_token(row["k"]), repr(row["t"]), row["inserted"])] = (bits, row["status"])
    return found


@settings(max_examples=_examples(100))
@given(tables(max_series=4, max_points=60))
def test_numbers_do_not_depend_on_the_batch_threads_or_history(table):
    alone = _connection(1)
    alone.register("generated", table.arrow())
    linear._cache.clear()  # the matrices built afresh
    first = _numbers(_split_sql(alone, table))
    again = _numbers(_split_sql(alone, table))  # and kept from the first query
    assert first == again
    crowded = _connection(2)
    crowded.register("generated", _crowd(table, 40))
    assert _numbers(_split_sql(crowded, table)) == first


@settings(max_examples=_examples(100))
@given(tables(max_series=4))
def test_python_front_gives_the_same_bits_as_sql(table):
    con = _connection(1)
    given_rows = table.arrow()
    con.register("generated", given_rows)
    sql = _split_sql(con, table)
    period = {"period": table.period} if table.period else {}
    mine = tidesplit.split_table(
        given_rows, ["k", "g"], "t", "v", fill_gaps=True, on_error="keep", **period
    )
    assert len(mine) == sql.num_rows
    floats = table.key_type == "double"
    assert _cells(mine.to_dict("records"), floats) == _cells(sql.to_pylist(), floats)


def _cells(rows: list[dict], float_keys: bool) -> list[tuple]:
    """The rows as sortable tuples: key, time, value and the numbers' bits, the status."""
    found = []
    for row in rows:
        numbers = []
        for column in ("trend", "seasonal", "remainder", "adjusted", "weight"):
            x = row[column]
            x = math.nan if x is None else float(x)
            numbers.append("NaN" if math.isnan(x) else np.float64(x).tobytes().hex())
        value = row["v"]
        value = None if value is None or (isinstance(value, float) and math.isnan(value)) else value
        found.append(
            (
                repr(_plain(row["k"], float_keys)),
                _moment(row["t"]),
                repr(value),
                bool(row["inserted"]),
                *numbers,
                row["status"].replace(" 00:00:00", ""),
            )
        )
    return sorted(found)


def _plain(key, float_keys: bool):
    """A key as SQL gives it to Python: NaN apart from NULL in a float key; elsewhere pandas
    marks a missing key with NaN or NaT, which is NULL."""
    if key is None or (not float_keys and not isinstance(key, dict) and pd.isna(key)):
        return None
    if isinstance(key, float) and math.isnan(key):
        return "NaN"
    if hasattr(key, "item"):
        key = key.item()
    if isinstance(key, float) and key.is_integer() and not isinstance(key, bool):
        key = int(key)  # pandas holds an integer column with NULLs as floats
    if isinstance(key, pd.Timestamp):
        return key.date()
    return key


def _moment(t) -> str:
    if t is None or t is pd.NaT or (isinstance(t, float) and math.isnan(t)):
        return ""
    if isinstance(t, int | np.integer):
        return f"{int(t):+025d}"
    stamp = pd.Timestamp(t)
    if stamp.tzinfo is not None:
        stamp = stamp.tz_convert("UTC").tz_localize(None)
    return stamp.isoformat()
