"""The dbt front: ``dbt build`` on the example project (examples/dbt_lantern_lane), through
the plugin ``tidesplit.dbt_plugin``, and the tables it leaves read back with plain DuckDB."""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path
from types import SimpleNamespace

import duckdb
import numpy as np
import pytest
from tidesplit.examples import retail_chain

import tidesplit
from tidesplit.dbt_plugin import Plugin

PROJECT = Path(__file__).resolve().parents[1] / "examples" / "dbt_lantern_lane"
# Smaller than the project's default chain, and a size of its own, so that the vars are seen
# to reach the generator; six shops still hold the closed shop and the data-entry slip, and
# fourteen products reach "sun cream", one of the strongly seasonal ones.
SIZE = {"shops": 6, "products": 14, "years": 6}
KEYS = ["shop", "product"]
ARGS = {"period": 52, "robust": True, "transform": "log"}  # those of the project's models


@pytest.fixture(scope="module")
def built(tmp_path_factory) -> dict:
    """The example project copied to a temporary folder and built there with its own
    profiles.yml, the database in a temporary file."""
    root = tmp_path_factory.mktemp("dbt")
    project = root / "lantern_lane"
    shutil.copytree(PROJECT, project, ignore=shutil.ignore_patterns("target", "logs", "*.duckdb"))
    database = root / "built.duckdb"
    env = {**os.environ, "TIDESPLIT_DBT_DATABASE": str(database)}
    vars_text = json.dumps(SIZE)
    run = subprocess.run(
        [
            sys.executable,
            "-m",
            "dbt.cli.main",
            "build",
            "--project-dir",
            str(project),
            "--profiles-dir",
            str(project),
            "--vars",
            vars_text,
        ],
        cwd=project,
        env=env,
        capture_output=True,
        text=True,
        timeout=600,
    )
    assert run.returncode == 0, run.stdout[-4000:] + run.stderr[-4000:]
    results = json.loads((project / "target" / "run_results.json").read_text())
    return {"database": database, "results": results["results"]}


def read(database: Path, sql: str, parameters: list | None = None) -> list[tuple]:
    # plain duckdb, without tidesplit: what any other client of the file would see
    with duckdb.connect(str(database), read_only=True) as con:
        return con.execute(sql, parameters).fetchall()


def test_every_model_and_data_test_ran(built):
    by_kind: dict[str, list[str]] = {}
    for result in built["results"]:
        kind = result["unique_id"].split(".")[0]
        by_kind.setdefault(kind, []).append(result["status"])
    assert by_kind["model"] == ["success"] * 3
    # the three singular tests of tests/ and the six generic ones of models/schema.yml
    assert by_kind["test"] == ["pass"] * 9


def test_tables_hold_every_input_row(built):
    sales = retail_chain.weekly_units(**SIZE)
    database = built["database"]
    series = SIZE["shops"] * SIZE["products"]
    assert read(database, "SELECT count(*) FROM weekly_units") == [(sales.num_rows,)]
    assert read(database, "SELECT count(*) FROM weekly_units_split") == [(sales.num_rows,)]
    assert read(database, "SELECT count(DISTINCT (shop, product)) FROM weekly_units_split") == [
        (series,)
    ]
    assert read(
        database, "SELECT count(*), count(DISTINCT (shop, product)) FROM series_profile"
    ) == [(series, series)]
    # the materialisations are plain tables, which need no Python to be read
    kinds = read(
        database,
        "SELECT table_name, table_type FROM information_schema.tables ORDER BY table_name",
    )
    assert kinds == [
        ("series_profile", "BASE TABLE"),
        ("weekly_units", "BASE TABLE"),
        ("weekly_units_split", "BASE TABLE"),
    ]


def test_parts_add_up_and_match_the_python_front(built):
    database = built["database"]
    with duckdb.connect(str(database), read_only=True) as con:
        split = con.sql(
            "SELECT * FROM weekly_units_split ORDER BY shop, product, week"
        ).to_arrow_table()
    units = split["units"].to_numpy(zero_copy_only=False)
    trend, seasonal, remainder, adjusted = (
        split[c].to_numpy(zero_copy_only=False)
        for c in ("trend", "seasonal", "remainder", "adjusted")
    )
    seen = ~np.isnan(units)
    np.testing.assert_allclose((trend + seasonal + remainder)[seen], np.log(units[seen]), atol=1e-9)
    np.testing.assert_allclose(adjusted[seen], (units / np.exp(seasonal))[seen], rtol=1e-9)
    # the dbt model gives the numbers of the Python front on the same sales
    expected = tidesplit.split_table(
        retail_chain.weekly_units(**SIZE), KEYS, "week", "units", **ARGS
    )
    expected = expected.sort_values([*KEYS, "week"]).reset_index(drop=True)
    assert split["shop"].to_pylist() == expected["shop"].tolist()
    assert split["week"].to_pylist() == expected["week"].tolist()
    for column in ("trend", "seasonal", "remainder", "adjusted", "weight"):
        np.testing.assert_allclose(
            split[column].to_numpy(zero_copy_only=False),
            expected[column].to_numpy(dtype=float),
            rtol=1e-12,
            atol=1e-12,
            err_msg=column,
        )


def test_the_scenario_shows_in_the_tables(built):
    database = built["database"]
    closed = retail_chain.SHOP_NAMES[retail_chain.CLOSED_SHOP]
    # the closed week: no units, but trend and seasonal there and no remainder, in every
    # product of that shop
    rows = read(
        database,
        "SELECT count(*), count(trend), count(seasonal), count(remainder) FROM weekly_units_split "
        "WHERE shop = ? AND week = ?",
        [closed, retail_chain.CLOSED_WEEK],
    )
    assert rows == [(SIZE["products"], SIZE["products"], SIZE["products"], 0)]
    # the data-entry slip: the robust fit sets it aside (weight near 0), the rest of its
    # series keeps weights near 1
    slip_shop = retail_chain.SHOP_NAMES[retail_chain.SLIP_SHOP]
    slip_product = retail_chain.PRODUCT_NAMES[retail_chain.SLIP_PRODUCT]
    ((slip_weight, median_weight),) = read(
        database,
        "SELECT max(weight) FILTER (WHERE week = ?), median(weight) FROM weekly_units_split "
        "WHERE shop = ? AND product = ?",
        [retail_chain.SLIP_WEEK, slip_shop, slip_product],
    )
    assert slip_weight < 0.1 < 0.9 < median_weight
    # the strengths of season the generator was given: "sun cream" (0.9) is more seasonal
    # than "oat loaf" (0.05) in every shop
    rows = read(
        database,
        "SELECT shop, max(strength_of_season) FILTER (WHERE product = 'sun cream') > "
        "max(strength_of_season) FILTER (WHERE product = 'oat loaf') FROM series_profile "
        "GROUP BY shop",
    )
    assert len(rows) == SIZE["shops"]
    assert all(stronger for _, stronger in rows)


def test_profile_matches_the_python_front(built):
    with duckdb.connect(str(built["database"]), read_only=True) as con:
        got = con.sql("SELECT * FROM series_profile ORDER BY shop, product").df()
    expected = tidesplit.profile(retail_chain.weekly_units(**SIZE), KEYS, "week", "units", **ARGS)
    expected = expected.sort_values(KEYS).reset_index(drop=True)
    assert got[KEYS].values.tolist() == expected[KEYS].values.tolist()
    for column in ("points", "missing", "strength_of_season", "strength_of_trend"):
        np.testing.assert_allclose(
            got[column].to_numpy(dtype=float),
            expected[column].to_numpy(dtype=float),
            rtol=1e-12,
            err_msg=column,
        )


def test_plugin_refuses_settings_of_its_own():
    with pytest.raises(ValueError, match="takes no settings; remove period"):
        Plugin(name="tidesplit", plugin_config={"period": 12})


def test_plugin_lets_the_profiles_duckdb_settings_through():
    # dbt-duckdb hands every plugin the profile's `settings` (DuckDB's own) as its config
    credentials = SimpleNamespace(settings={"threads": 1})
    plugin = Plugin(name="tidesplit", plugin_config={"threads": 1}, credentials=credentials)
    con = duckdb.connect()
    plugin.configure_connection(con)
    cursor = con.cursor()
    plugin.configure_cursor(cursor)
    sql = "SELECT len(tide_split_list([1, 3, 2, 4, 1, 3, 2, 4]::DOUBLE[], 2).trend)"
    assert cursor.sql(sql).fetchall() == [(8,)]
