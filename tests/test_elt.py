"""The ELT commands (split, profile, outliers, forecast): the numbers of SQL, every row and
key accounted for, exit codes, job files, reports, and hostile names."""

from __future__ import annotations

import json
import os
import shlex
from pathlib import Path

import duckdb
import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from elt_data import KEYS, MONTHS, NEGATIVE, SHORT, monthly_sales

import tidesplit
from tidesplit import arguments, cli, elt

COLUMNS = ["--key", "store", "--key", "sku", "--time", "month", "--value", "units"]


@pytest.fixture(scope="module")
def sales(tmp_path_factory) -> tuple[pa.Table, str]:
    folder = tmp_path_factory.mktemp("sales")
    table = monthly_sales()
    path = str(folder / "sales.parquet")
    pq.write_table(table, path, row_group_size=20_000)
    return table, path


def _sql_answer(table: pa.Table, function: str, named: str) -> pa.Table:
    con = tidesplit.connect()
    con.register("sales", table)
    return con.sql(
        f"SELECT * FROM tide_{function}(sales, ['store', 'sku'], 'month', 'units'{named})"
    ).to_arrow_table()


def _sorted(table: pa.Table, by: list[str]) -> pa.Table:
    return table.sort_by([(c, "ascending") for c in by])


def _assert_same(ours: pa.Table, theirs: pa.Table, by: list[str]) -> None:
    """Equal columns, numbers to rounding (batches of other sizes may round otherwise)."""
    assert ours.column_names == theirs.column_names
    assert ours.num_rows == theirs.num_rows
    ours, theirs = _sorted(ours, by), _sorted(theirs, by)
    for name in ours.column_names:
        a, b = ours[name], theirs[name]
        if pa.types.is_floating(a.type):
            np.testing.assert_allclose(
                a.to_numpy(zero_copy_only=False), b.to_numpy(zero_copy_only=False),
                rtol=1e-9, atol=1e-9, equal_nan=True,
            )  # fmt: skip
            assert a.null_count == b.null_count
        else:
            assert a.equals(b), name


@pytest.mark.parametrize("batch_rows", [20_000, 10_000_000])
def test_split_gives_the_numbers_of_sql_batch_by_batch(sales, tmp_path, batch_rows, capsys):
    """2,600 keys in 5 batches (or one), two bad series kept: the target equals the
    tide_split query over the whole table, row for row."""
    table, source = sales
    target = str(tmp_path / "split.parquet")
    report = str(tmp_path / "report.json")
    code = cli.main([
        "split", "--from", source, "--to", target, *COLUMNS, "--period", "12",
        "--transform", "log", "--robust", "--on-error", "keep",
        "--batch-rows", str(batch_rows), "--report", report,
    ])  # fmt: skip
    assert code == elt.EXIT_KEPT
    expected = _sql_answer(
        table, "split", ", period := 12, transform := 'log', robust := true, on_error := 'keep'"
    )
    _assert_same(pq.read_table(target), expected, ["store", "sku", "month"])
    mask = os.umask(0)
    os.umask(mask)
    assert os.stat(target).st_mode & 0o777 == 0o666 & ~mask  # as any new file, not private
    done = json.loads(Path(report).read_text())
    assert done["exit_code"] == elt.EXIT_KEPT
    assert (done["keys"], done["keys_split"], done["keys_kept"]) == (KEYS, KEYS - 2, 2)
    assert done["rows_in"] == done["rows_out"] == table.num_rows == KEYS * MONTHS - 26
    assert done["batches"] == (1 if batch_rows > table.num_rows else 5)
    bad = {(b["key"]["store"], b["key"]["sku"]): b["status"] for b in done["bad_series"]}
    assert set(bad) == {NEGATIVE, SHORT}
    assert "not positive" in bad[NEGATIVE] and "at least two periods" in bad[SHORT]
    last = capsys.readouterr().out.strip().splitlines()[-1]
    assert last.startswith(
        f"tidesplit split: {KEYS - 2:,} keys split, 2 kept with a status, 0 failed; "
        f"{table.num_rows:,} rows in, {table.num_rows:,} rows out;"
    )
    assert last.endswith("exit 3 (success, series kept with a status)")


@pytest.mark.parametrize(
    ("command", "named", "by"),
    [
        ("profile", {"period": 12}, ["store", "sku"]),
        ("outliers", {"period": 12, "rule": "mad", "all_rows": True},
         ["store", "sku", "month"]),
        ("forecast", {"period": 12, "steps_ahead": 3, "robust": False, "trend_model": "drift"},
         ["store", "sku", "steps_ahead"]),
    ],
)  # fmt: skip
def test_answers_give_the_numbers_of_sql_into_duckdb(sales, tmp_path, command, named, by):
    table, source = sales
    warehouse = str(tmp_path / "warehouse.duckdb")
    options = []
    for name, value in named.items():
        option = "--" + name.replace("_", "-")
        if isinstance(value, bool):
            options.append(option if value else option.replace("--", "--no-"))
        else:
            options += [option, str(value)]
    code = cli.main([
        command, "--from", source, "--to", f"{warehouse}:answer", *COLUMNS, *options,
        "--on-error", "keep", "--batch-rows", "30000", "--quiet",
    ])  # fmt: skip
    assert code == elt.EXIT_KEPT
    sql_named = "".join(f", {n} := {str(v).lower() if isinstance(v, bool) else repr(v)}"
                        for n, v in named.items())  # fmt: skip
    expected = _sql_answer(table, command, f"{sql_named}, on_error := 'keep'")
    with duckdb.connect(warehouse, read_only=True) as con:
        ours = con.sql("SELECT * FROM answer").to_arrow_table()
        tables = [t for (t,) in con.sql("SHOW TABLES").fetchall()]
    assert tables == ["answer"]  # no stage table left behind
    _assert_same(ours, expected, by)


def test_several_periods_run_tide_split_multi(sales, tmp_path):
    table, source = sales
    target = str(tmp_path / "multi.parquet")
    code = cli.main([
        "split", "--from", source, "--to", target, *COLUMNS, "--periods", "4,12",
        "--on-error", "keep", "--batch-rows", "40000", "--quiet",
    ])  # fmt: skip
    assert code == elt.EXIT_OK  # the short series is split with period 4 alone
    expected = _sql_answer(table, "split_multi", ", periods := [4, 12], on_error := 'keep'")
    ours = pq.read_table(target)
    assert ours.column_names == expected.column_names
    assert "seasonal_by_period" in ours.column_names
    short = ours.filter(pa.compute.equal(ours["sku"], SHORT[1]))["status"].unique().to_pylist()
    assert [s.split(":")[0] for s in short] == ["ok; dropped period 12"]
    _assert_same(ours.drop(["seasonal_by_period", "periods"]),
                 expected.drop(["seasonal_by_period", "periods"]),
                 ["store", "sku", "month"])  # fmt: skip


def test_a_bad_series_under_raise_leaves_the_target_and_names_every_bad_key(
    sales, tmp_path, capsys
):
    _, source = sales
    target = tmp_path / "split.parquet"
    target.write_bytes(b"the previous output")
    report = tmp_path / "report.json"
    code = cli.main([
        "split", "--from", source, "--to", str(target), *COLUMNS, "--period", "12",
        "--transform", "log", "--batch-rows", "10000000", "--report", str(report),
    ])  # fmt: skip
    assert code == elt.EXIT_BAD_SERIES
    assert target.read_bytes() == b"the previous output"
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".")] == []
    error = capsys.readouterr().err
    assert "series {'store': south, 'sku': " in error
    done = json.loads(report.read_text())
    assert (done["keys_failed"], done["rows_out"], done["keys_split"]) == (2, 0, 0)
    assert {(b["key"]["store"], b["key"]["sku"]) for b in done["bad_series"]} == {
        NEGATIVE, SHORT
    }  # fmt: skip


def test_exit_codes_for_arguments_and_places(sales, tmp_path, capsys):
    _, source = sales
    out = str(tmp_path / "out.parquet")
    base = ["split", "--from", source, "--to", out, *COLUMNS]
    assert cli.main([*base, "--season-span", "4"]) == elt.EXIT_BAD_ARGUMENTS  # even span
    assert cli.main([*base[:-2], "--value", "unit"]) == elt.EXIT_BAD_ARGUMENTS  # no column
    assert 'no column "unit"' in capsys.readouterr().err
    with pytest.raises(SystemExit) as raised:  # argparse: a wrong kind, an unknown option
        cli.main([*base, "--period", "twelve"])
    assert raised.value.code == elt.EXIT_BAD_ARGUMENTS
    with pytest.raises(SystemExit) as raised:
        cli.main([*base, "--steps-ahead", "3"])  # forecast's, not split's
    assert raised.value.code == elt.EXIT_BAD_ARGUMENTS
    missing = str(tmp_path / "nothing*.parquet")
    assert cli.main(["split", "--from", missing, "--to", out, *COLUMNS]) == elt.EXIT_UNREACHABLE
    nowhere = str(tmp_path / "no" / "such" / "out.parquet")
    assert cli.main(["split", "--from", source, "--to", nowhere, *COLUMNS]) == 5
    refused = "postgresql://nobody@127.0.0.1:1/none"
    code = cli.main(["split", "--from", refused, "--from-table", "t", "--to", out, *COLUMNS])
    assert code == elt.EXIT_UNREACHABLE
    code = cli.main(["split", "--from", source, "--to", refused, "--to-table", "t", *COLUMNS])
    assert code == elt.EXIT_UNREACHABLE
    assert not os.path.exists(out)
    clean = str(tmp_path / "clean.parquet")
    pq.write_table(monthly_sales(keys=30), clean)
    good = ["split", "--from", clean, "--to", out, *COLUMNS, "--period", "12", "--quiet"]
    assert cli.main(good) == elt.EXIT_BAD_SERIES  # sku 11 is too short
    assert cli.main([*good, "--on-error", "keep"]) == elt.EXIT_KEPT
    pq.write_table(monthly_sales(keys=6), clean)  # skus 0 to 5: no bad series
    assert cli.main(good) == elt.EXIT_OK
    assert len(set(elt.EXIT_CODES)) == 6
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".")] == []  # no leftovers


def test_job_file_with_options_overriding_it(sales, tmp_path):
    table, source = sales
    job = tmp_path / "monthly.toml"
    job.write_text(
        f'from = "{source}"\nto = "{tmp_path / "wrong.parquet"}"\nkey = ["store", "sku"]\n'
        'time = "month"\nvalue = "units"\nperiod = 12\nseason_span = 7\nquiet = true\n'
        'on_error = "keep"\n'
    )
    target = str(tmp_path / "right.parquet")
    code = cli.main(["split", "--job", str(job), "--to", target, "--season-span", "9"])
    assert code == elt.EXIT_KEPT
    assert not (tmp_path / "wrong.parquet").exists()
    expected = _sql_answer(table, "split", ", period := 12, season_span := 9, on_error := 'keep'")
    _assert_same(pq.read_table(target), expected, ["store", "sku", "month"])
    job.write_text(job.read_text() + "sesaon_span = 3\n")
    assert cli.main(["split", "--job", str(job)]) == elt.EXIT_BAD_ARGUMENTS
    job.write_text(job.read_text().replace("sesaon_span = 3", 'robust = "yes"'))
    assert cli.main(["split", "--job", str(job)]) == elt.EXIT_BAD_ARGUMENTS


def test_csv_and_hive_folder_sources_and_a_partitioned_folder_target(sales, tmp_path):
    table, _ = sales
    few = table.filter(pa.compute.less(table["sku"], 300))
    csv = tmp_path / "sales.csv"
    duckdb.sql("SELECT * FROM few").write_csv(str(csv))
    lake = tmp_path / "lake"
    duckdb.sql(f"COPY few TO '{lake}' (FORMAT parquet, PARTITION_BY (store))")
    expected = _sql_answer(few, "split", ", period := 12, on_error := 'keep'")
    for source in (str(csv), str(lake)):
        folder = tmp_path / "split_by_store"
        code = cli.main([
            "split", "--from", source, "--to", str(folder), "--partition-by", "store",
            *COLUMNS, "--period", "12", "--on-error", "keep", "--batch-rows", "3000", "--quiet",
        ])  # fmt: skip
        assert code == elt.EXIT_KEPT
        assert sorted(p.name for p in folder.iterdir()) == ["store=north", "store=south"]
        back = duckdb.sql(
            f"SELECT * FROM read_parquet('{folder}/**/*.parquet', hive_partitioning = true)"
        ).to_arrow_table()
        back = back.select(expected.column_names).cast(expected.schema)
        _assert_same(back, expected, ["store", "sku", "month"])


def test_hostile_names_inject_nothing(tmp_path):
    """Column and table names full of quotes and semicolons travel as names."""
    key, when, value = 'k"; DROP TABLE x; --', "t'); DROP TABLE x; --", 'v" ,"x'
    rows = monthly_sales(keys=5, months=24).rename_columns(["store", key, when, value])
    rows = rows.drop(["store"])
    warehouse = str(tmp_path / "odd.duckdb")
    table = 'in"; DROP TABLE x; --'
    with duckdb.connect(warehouse) as con:
        con.execute("CREATE TABLE x AS SELECT 1 AS guard")
        con.register("rows", rows)
        con.execute(f'CREATE TABLE "{table.replace(chr(34), chr(34) * 2)}" AS SELECT * FROM rows')
    out = 'out"; DROP TABLE x; --'
    code = cli.main([
        "split", "--from", f"{warehouse}:{table}", "--to", f"{warehouse}:{out}",
        "--key", key, "--time", when, "--value", value, "--period", "12", "--quiet",
        "--on-error", "keep",
    ])  # fmt: skip
    assert code == elt.EXIT_OK
    with duckdb.connect(warehouse, read_only=True) as con:
        names = sorted(t for (t,) in con.sql("SHOW TABLES").fetchall())
        assert names == sorted([table, out, "x"])
        assert con.sql("SELECT count(*) FROM x").fetchall() == [(1,)]
        quoted_out = '"' + out.replace('"', '""') + '"'
        assert con.sql(f"SELECT count(*) FROM {quoted_out}").fetchall() == [(rows.num_rows,)]


def test_every_command_has_help_with_an_example(capsys):
    for command in cli.COMMANDS:
        with pytest.raises(SystemExit) as done:
            cli.main([command, "--help"])
        assert done.value.code == 0
        assert f"example:\n  tidesplit {command} " in capsys.readouterr().out
    for example in cli.EXAMPLES.values():  # every example parses as it stands
        words = shlex.split(example.replace("\\\n", " "))
        assert cli.build_parser().parse_args(words[1:]).job_command == words[1]
    readme = (Path(__file__).parent.parent / "README.md").read_text()
    for command in elt.COMMANDS:  # each documented, beside the exit codes
        assert f"`tidesplit {command}`" in readme
    for code in elt.EXIT_CODES:
        assert f"\n| {code} | " in readme


def test_the_progress_bar_is_off_without_a_terminal():
    bar = elt._Progress(10, show=True)  # the test run's stderr is captured: no terminal
    assert bar.bar is None
    bar.advance(10, 100)
    bar.close()


def test_every_command_has_help_with_every_argument(capsys):
    for command, functions in elt.COMMANDS.items():
        with pytest.raises(SystemExit) as done:
            cli.main([command, "--help"])
        assert done.value.code == 0
        text = capsys.readouterr().out
        assert f"tidesplit {command} --from" in text and "exit codes:" in text
        for function in functions:  # every argument of the SQL function is an option
            for argument in arguments.of(function):
                assert "--" + argument.name.replace("_", "-") in text
