"""Refresh: a rerun recomputes only the keys whose rows or arguments changed, keeps the
rest, drops vanished keys, and records how far published adjusted values moved; the
target then holds the numbers a full run gives, row for row."""

from __future__ import annotations

import json
from pathlib import Path

import duckdb
import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from refresh_data import CHANGED, GROWN, KEYS, NEW, UNTOUCHED, VANISHED, first_state, later_state
from test_elt import COLUMNS, _assert_same, _sql_answer

from tidesplit import cli, elt

NAMED = ", period := 12, on_error := 'keep'"
OPTIONS = [*COLUMNS, "--period", "12", "--on-error", "keep", "--quiet", "--batch-rows", "3000"]


def _run(source: pa.Table, folder: Path, target: str, *more: str) -> dict:
    path = folder / "source.parquet"
    pq.write_table(source, path)
    report = folder / "report.json"
    code = cli.main(["split", "--from", str(path), "--to", target, *OPTIONS, "--report",
                     str(report), *more])  # fmt: skip
    done = json.loads(report.read_text())
    assert code == done["exit_code"] == elt.EXIT_KEPT, done["message"]
    return done


def _read(target: str, table: str) -> pa.Table:
    if target.endswith(".parquet"):
        stem = target[: -len(".parquet")]
        path = target if table == "split" else f"{stem}_{table.split('_', 1)[1]}.parquet"
        return pq.read_table(path)
    path, _ = target.split(".duckdb:")
    with duckdb.connect(path + ".duckdb", read_only=True) as con:
        return con.sql(f'SELECT * FROM "{table}"').to_arrow_table()


def _counts(done: dict) -> tuple[int, int, int, int]:
    return done["keys_recomputed"], done["keys_new"], done["keys_reused"], done["keys_dropped"]


@pytest.mark.parametrize("kind", ["duckdb", "parquet"])
def test_a_refresh_recomputes_only_what_changed(tmp_path, kind):
    """300 keys, then a later state in which 10 keys changed, 10 grew, 5 vanished and 8
    are new: 28 keys recomputed, 275 reused, 5 dropped, and the target equals tide_split
    over the whole later state, row for row."""
    target = str(tmp_path / "split.parquet") if kind == "parquet" else (
        f"{tmp_path / 'warehouse.duckdb'}:split")  # fmt: skip
    before, after = first_state(), later_state()
    done = _run(before, tmp_path, target, "--refresh")
    assert _counts(done) == (KEYS, KEYS, 0, 0)
    assert done["refresh_note"].startswith("no ledger")
    assert done["rows_in"] == done["rows_out"] == before.num_rows
    assert done["revisions"]["points_compared"] == 0  # nothing was published before
    published = _read(target, "split")
    _assert_same(published, _sql_answer(before, "split", NAMED), ["store", "sku", "month"])

    again = _run(before, tmp_path, target, "--refresh")  # nothing changed: nothing computed
    assert _counts(again) == (0, 0, KEYS, 0) and again["batches"] == 0
    assert (again["keys_split"], again["keys_kept"]) == (KEYS - 1, 1)  # sku 11, from the ledger
    assert again["rows_out"] == before.num_rows
    _assert_same(_read(target, "split"), published, ["store", "sku", "month"])

    later = _run(after, tmp_path, target, "--refresh")
    changed = len(CHANGED) + len(GROWN)
    assert _counts(later) == (changed + len(NEW), len(NEW), UNTOUCHED, len(VANISHED))
    assert later["keys"] == KEYS - len(VANISHED) + len(NEW)
    assert later["rows_in"] == later["rows_out"] == after.num_rows  # every row accounted for
    refreshed = _read(target, "split")
    _assert_same(refreshed, _sql_answer(after, "split", NAMED), ["store", "sku", "month"])
    skus = set(refreshed["sku"].to_pylist())
    assert not skus & set(VANISHED) and set(NEW) <= skus

    ledger = _read(target, "split_refresh_keys")
    assert ledger.num_rows == later["keys"]
    counted = dict(zip(ledger["sku"].to_pylist(), ledger["rows_in"].to_pylist(), strict=True))
    assert counted[GROWN.start] == 39 and counted[0] == 36 and counted[11] == 10
    stamps = dict(zip(ledger["sku"].to_pylist(), ledger["refresh_id"].to_pylist(), strict=True))
    assert len({stamps[s] for s in [*CHANGED, *GROWN, *NEW]}) == 1  # this refresh
    assert stamps[0] != stamps[CHANGED.start]  # kept from the first run

    # the revisions, measured again here from the two published tables
    con = duckdb.connect()
    con.register("old", published)
    con.register("new", refreshed)
    expected = con.sql(
        "SELECT sku, count(*) AS n, max(abs(new.adjusted - old.adjusted)) AS largest, "
        "avg(abs(new.adjusted - old.adjusted)) AS mean, avg(abs(old.adjusted)) AS level "
        "FROM old JOIN new USING (store, sku, month) WHERE old.adjusted IS NOT NULL "
        "AND new.adjusted IS NOT NULL GROUP BY sku HAVING max(abs(new.adjusted - old.adjusted)) "
        "> 0 ORDER BY sku"
    ).fetchall()
    assert {s for s, *_ in expected} == {*CHANGED, *GROWN}  # no reused key moved at all
    revisions = _read(target, "split_revisions")
    con.register("revisions", revisions)
    ours = con.sql(
        "SELECT sku, points_compared, largest_change, mean_change, level FROM revisions "
        f"WHERE scope = 'key' AND refresh_id = '{stamps[CHANGED.start]}' ORDER BY sku"
    ).fetchall()
    np.testing.assert_allclose(np.array(ours, dtype=float), np.array(expected, dtype=float),
                               rtol=1e-9)  # fmt: skip
    overall = later["revisions"]
    assert overall["keys_revised"] == changed
    assert overall["points_compared"] == sum(n for _, n, *_ in expected)
    assert overall["largest_change"] == pytest.approx(max(x for _, _, x, *_ in expected))
    assert overall["largest_share"] == pytest.approx(max(x / lv for _, _, x, _, lv in expected))
    assert overall["mean_share"] == pytest.approx(
        sum(m * n for _, n, _, m, _ in expected) / sum(lv * n for _, n, _, _, lv in expected)
    )
    # one 'all keys' row per refresh, the three refreshes on record
    scopes = con.sql("SELECT scope, count(*) FROM revisions GROUP BY ALL ORDER BY ALL").fetchall()
    assert scopes == [("all keys", 3), ("key", changed)]

    other = _run(after, tmp_path, target, "--refresh", "--season-span", "9")  # new arguments
    assert _counts(other) == (later["keys"], 0, 0, 0)
    _assert_same(_read(target, "split"), _sql_answer(after, "split", NAMED + ", season_span := 9"),
                 ["store", "sku", "month"])  # fmt: skip


@pytest.mark.parametrize("kind", ["duckdb", "parquet"])
def test_a_full_run_between_refreshes_is_noticed(tmp_path, kind):
    """A run without --refresh replaces the target whole; the ledger of the refresh
    before no longer describes it, and the next refresh computes every key again."""
    target = str(tmp_path / "split.parquet") if kind == "parquet" else (
        f"{tmp_path / 'warehouse.duckdb'}:split")  # fmt: skip
    before = first_state().filter(pa.compute.less(first_state()["sku"], 40))
    _run(before, tmp_path, target, "--refresh")
    _run(before, tmp_path, target, "--season-span", "9")  # a full run, other arguments
    done = _run(before, tmp_path, target, "--refresh")
    assert _counts(done) == (40, 40, 0, 0)
    _assert_same(_read(target, "split"), _sql_answer(before, "split", NAMED),
                 ["store", "sku", "month"])  # fmt: skip


def test_refresh_refusals(tmp_path, capsys):
    source = tmp_path / "in.parquet"
    pq.write_table(first_state().filter(pa.compute.less(first_state()["sku"], 5)), source)
    base = ["split", "--from", str(source), *OPTIONS, "--refresh"]
    folder = str(tmp_path / "folder")
    assert cli.main([*base, "--to", folder]) == elt.EXIT_BAD_ARGUMENTS
    assert "folder" in capsys.readouterr().err
    renamed = tmp_path / "odd.parquet"
    pq.write_table(pq.read_table(source).rename_columns(["store", "rows_in", "month", "units"]),
                   renamed)  # fmt: skip
    code = cli.main(
        [
            "split",
            "--from",
            str(renamed),
            "--to",
            str(tmp_path / "o.parquet"),
            "--key",
            "rows_in",
            "--time",
            "month",
            "--value",
            "units",
            "--refresh",
        ]
    )
    assert code == elt.EXIT_BAD_ARGUMENTS
    assert "ledger" in capsys.readouterr().err
    assert not (tmp_path / "o.parquet").exists()
    with pytest.raises(SystemExit):  # publish refreshes always; --refresh is not its option
        cli.main(["publish", "--from", str(source), "--to", "x.duckdb", *COLUMNS, "--refresh"])


def test_kill_refreshes_into_a_parquet_file_and_a_duckdb_table(tmp_path):
    """Refreshes killed at random moments leave the previous output whole; the next
    refresh writes the complete output and leaves nothing aside."""
    from test_elt_kill import KILLS, fingerprint_sql, kill_at_random_moments

    source = tmp_path / "sales.parquet"
    pq.write_table(first_state(), source)
    target = tmp_path / "out" / "split.parquet"
    target.parent.mkdir()
    fell = kill_at_random_moments(
        ["split", "--from", str(source), "--to", str(target), *COLUMNS, "--batch-rows", "3000",
         "--refresh"],
        lambda: duckdb.sql(fingerprint_sql(f"read_parquet('{target}')")).fetchall()[0],
        lambda: sorted(p.name for p in target.parent.iterdir() if p.name.startswith(".")),
        53,
    )  # fmt: skip
    assert sum(fell.values()) == KILLS
    warehouse = tmp_path / "warehouse.duckdb"

    def fingerprint() -> tuple:
        with duckdb.connect(str(warehouse), read_only=True) as con:
            return con.sql(fingerprint_sql("split")).fetchall()[0]

    def leftovers() -> list[str]:
        with duckdb.connect(str(warehouse), read_only=True) as con:
            return [t for (t,) in con.sql("SHOW TABLES").fetchall() if t.startswith("tide_")]

    fell = kill_at_random_moments(
        ["split", "--from", str(source), "--to", f"{warehouse}:split", *COLUMNS,
         "--batch-rows", "3000", "--refresh"],
        fingerprint,
        leftovers,
        59,
    )  # fmt: skip
    assert sum(fell.values()) == KILLS


def test_a_bad_new_key_under_raise_leaves_the_target(tmp_path, capsys):
    """A refresh that meets a bad series under 'raise' names it and changes nothing."""
    target = f"{tmp_path / 'warehouse.duckdb'}:split"
    good = first_state().filter(pa.compute.greater(first_state()["sku"], 100))
    path = tmp_path / "in.parquet"
    pq.write_table(good, path)
    args = ["split", "--from", str(path), "--to", target, *COLUMNS, "--period", "12", "--quiet",
            "--refresh"]  # fmt: skip
    assert cli.main(args) == elt.EXIT_OK
    before = _read(target, "split"), _read(target, "split_refresh_keys")
    pq.write_table(first_state(), path)  # with sku 11, too short
    assert cli.main(args) == elt.EXIT_BAD_SERIES
    assert "'sku': 11" in capsys.readouterr().err
    assert _read(target, "split").equals(before[0])
    assert _read(target, "split_refresh_keys").equals(before[1])
    with duckdb.connect(str(tmp_path / "warehouse.duckdb"), read_only=True) as con:
        tables = sorted(t for (t,) in con.sql("SHOW TABLES").fetchall())
    assert tables == ["split", "split_refresh_keys", "split_revisions"]


@pytest.mark.parametrize(
    ("command", "named", "by"),
    [
        ("profile", {"period": 12}, ["store", "sku"]),
        ("forecast", {"period": 12, "steps_ahead": 3}, ["store", "sku", "steps_ahead"]),
    ],
)
def test_answers_refresh_too(tmp_path, command, named, by):
    """Profiles and forecasts refresh key by key as splits do (from a job file); they
    have no adjusted values, so no revisions."""
    target = f"{tmp_path / 'warehouse.duckdb'}:answer"
    path = tmp_path / "source.parquet"
    lines = [f'from = "{path}"', f'to = "{target}"', 'key = ["store", "sku"]', 'time = "month"',
             'value = "units"', 'on_error = "keep"', "refresh = true", "quiet = true",
             *(f"{n} = {v}" for n, v in named.items())]  # fmt: skip
    job = tmp_path / "job.toml"
    job.write_text("\n".join(lines) + "\n")
    report = tmp_path / "report.json"
    for state in (first_state(), later_state()):
        pq.write_table(state, path)
        assert cli.main([command, "--job", str(job), "--report", str(report)]) == elt.EXIT_KEPT
    done = json.loads(report.read_text())
    changed = len(CHANGED) + len(GROWN)
    assert _counts(done) == (changed + len(NEW), len(NEW), UNTOUCHED, len(VANISHED))
    assert done["revisions"] is None
    sql_named = "".join(f", {n} := {v}" for n, v in named.items())
    expected = _sql_answer(later_state(), command, f"{sql_named}, on_error := 'keep'")
    _assert_same(_read(target, "answer"), expected, by)
