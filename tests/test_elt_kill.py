"""Safe to kill: runs killed with SIGKILL at random moments (seeded) leave the previous
output complete and readable, and the next run writes the complete, correct output."""

from __future__ import annotations

import os
import random
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from pathlib import Path

import duckdb
import pyarrow.parquet as pq
import pytest
from elt_data import monthly_sales

from tidesplit import elt

COLUMNS = ["--key", "store", "--key", "sku", "--time", "month", "--value", "units"]
# the run that is killed differs from the one before it, so the two outputs differ
BEFORE = ["--period", "12", "--on-error", "keep"]
KILLED = ["--period", "12", "--robust", "--on-error", "keep"]
KILLS = 4  # per target


def fingerprint_sql(relation: str) -> str:
    """Rows and an order-free hash of every value of every row."""
    return f"SELECT count(*), sum(hash(COLUMNS(*))::HUGEINT) FROM {relation}"


# the runs' temporary folders go here, to check that none is left behind
WORK = os.path.join(tempfile.gettempdir(), f"tidesplit-kill-tests-{os.getpid()}")
ENVIRONMENT = {**os.environ, "TMPDIR": WORK}


def start(arguments: list[str]) -> subprocess.Popen:
    return subprocess.Popen(
        [sys.executable, "-m", "tidesplit.cli", *arguments, "--quiet"],
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
        env=ENVIRONMENT,
    )


def run_to_the_end(arguments: list[str]) -> None:
    done = subprocess.run(
        [sys.executable, "-m", "tidesplit.cli", *arguments, "--quiet"],
        capture_output=True,
        text=True,
        check=False,
        env=ENVIRONMENT,
    )
    assert done.returncode == elt.EXIT_KEPT, done.stderr


def kill_at_random_moments(
    arguments: list[str],
    fingerprint: Callable[[], tuple],
    leftovers: Callable[[], list[str]],
    seed: int,
) -> dict[str, int]:
    """Run ``arguments + BEFORE`` to the end, then ``arguments + KILLED`` killed ``KILLS``
    times at random moments of a run's length, checking the output after each kill; then
    once to the end. Returns how the kills fell."""
    os.makedirs(WORK, exist_ok=True)
    started = time.perf_counter()
    run_to_the_end([*arguments, *KILLED])
    length = time.perf_counter() - started
    after = fingerprint()
    run_to_the_end([*arguments, *BEFORE])
    before = fingerprint()
    assert before != after and before[0] == after[0]
    moments = random.Random(seed)
    # where the kills fell: before anything was written aside, while it was (a leftover
    # is found after the kill), or after the output was replaced
    fell = {"before_writing": 0, "while_writing_aside": 0, "after_replacing": 0}
    for _ in range(KILLS):
        process = start([*arguments, *KILLED])
        time.sleep(moments.uniform(0.0, length))
        process.kill()
        process.wait()
        found = fingerprint()  # complete and readable: either whole output, nothing else
        assert found in (before, after)
        if found == after:  # killed after the run had put its output in place
            fell["after_replacing"] += 1
            run_to_the_end([*arguments, *BEFORE])  # so the next kill finds `before` again
        elif leftovers():
            fell["while_writing_aside"] += 1
        else:
            fell["before_writing"] += 1
    run_to_the_end([*arguments, *KILLED])
    assert fingerprint() == after
    assert leftovers() == []
    assert os.listdir(WORK) == []  # the killed runs' temporary folders are cleared too
    os.rmdir(WORK)
    return fell


@pytest.fixture(scope="module")
def source(tmp_path_factory) -> str:
    path = tmp_path_factory.mktemp("killed") / "sales.parquet"
    pq.write_table(monthly_sales(keys=1_200), path)
    return str(path)


def _hidden(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.startswith("."))


def test_kill_a_run_into_one_parquet_file(source, tmp_path):
    target = tmp_path / "split.parquet"
    fell = kill_at_random_moments(
        ["split", "--from", source, "--to", str(target), *COLUMNS, "--batch-rows", "5000"],
        lambda: duckdb.sql(fingerprint_sql(f"read_parquet('{target}')")).fetchall()[0],
        lambda: _hidden(tmp_path),
        11,
    )
    assert sum(fell.values()) == KILLS


def test_kill_a_run_into_a_partitioned_folder(source, tmp_path):
    target = tmp_path / "split"
    fell = kill_at_random_moments(
        ["split", "--from", source, "--to", str(target), "--partition-by", "store", *COLUMNS,
         "--batch-rows", "5000"],
        lambda: duckdb.sql(
            fingerprint_sql(f"read_parquet('{target}/**/*.parquet', hive_partitioning = true)")
        ).fetchall()[0],
        lambda: _hidden(tmp_path),
        23,
    )  # fmt: skip
    assert sum(fell.values()) == KILLS


def test_kill_a_run_into_a_duckdb_table(source, tmp_path):
    warehouse = tmp_path / "warehouse.duckdb"

    def fingerprint() -> tuple:
        with duckdb.connect(str(warehouse), read_only=True) as con:
            return con.sql(fingerprint_sql("split")).fetchall()[0]

    def leftovers() -> list[str]:
        with duckdb.connect(str(warehouse), read_only=True) as con:
            return [t for (t,) in con.sql("SHOW TABLES").fetchall() if t != "split"]

    fell = kill_at_random_moments(
        ["split", "--from", source, "--to", f"{warehouse}:split", *COLUMNS,
         "--batch-rows", "5000"],
        fingerprint,
        leftovers,
        37,
    )  # fmt: skip
    assert sum(fell.values()) == KILLS
    assert os.path.exists(warehouse)
