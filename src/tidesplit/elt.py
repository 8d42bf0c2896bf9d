"""One ELT job: read series from a source, answer with a ``tide_*`` macro, write a target.

The computation is the SQL macro itself, run inside DuckDB on one batch of keys at a time,
so the numbers are those of SQL. Keys go to batches by a hash of the key (the same key
always to the same batch); a source larger than one batch is first written, in one
streaming pass, to temporary Parquet files partitioned by batch, and each batch is one
query over its own files. Peak memory follows the batch (``batch_rows``), not the table.

The target is replaced only when every batch has succeeded (see ``endpoints``).
"""

from __future__ import annotations

import json
import math
import os
import shutil
import sys
import tempfile
import time
from collections.abc import Mapping
from dataclasses import asdict, dataclass, field
from typing import Any

from . import arguments
from .errors import ParamError

# What a scheduler can act on.
EXIT_OK = 0
EXIT_FAILED = 1  # anything unforeseen (a bug, a full disk); the message says what
EXIT_BAD_ARGUMENTS = 2
EXIT_KEPT = 3  # success, some series kept unsplit with their status (on_error 'keep')
EXIT_BAD_SERIES = 4  # a bad series under on_error 'raise'; the target is unchanged
EXIT_UNREACHABLE = 5  # the source or the target cannot be opened, read or written
EXIT_CODES = {
    EXIT_OK: "success: every series answered",
    EXIT_FAILED: "failure of another kind; the target is unchanged",
    EXIT_BAD_ARGUMENTS: "bad arguments (an unknown option, a wrong kind or range, a missing "
    "column); nothing was read or written",
    EXIT_KEPT: "success, and some series were kept with the reason in `status` (`--on-error keep`)",
    EXIT_BAD_SERIES: "a bad series (under `--on-error raise`, the default): the message "
    "and the report name each bad key and why; the target is unchanged",
    EXIT_UNREACHABLE: "the source or the target cannot be reached (no such file or table, "
    "a refused connection, no right to write); the target is unchanged",
}
EXIT_NAMES = {
    EXIT_OK: "success",
    EXIT_FAILED: "failed",
    EXIT_BAD_ARGUMENTS: "bad arguments",
    EXIT_KEPT: "success, series kept with a status",
    EXIT_BAD_SERIES: "bad series",
    EXIT_UNREACHABLE: "source or target unreachable",
}

# The commands, by the SQL function each runs.
COMMANDS = {
    "split": (arguments.SPLIT, arguments.SPLIT_MULTI),
    "profile": (arguments.PROFILE,),
    "outliers": (arguments.OUTLIERS,),
    "forecast": (arguments.FORECAST,),
    "publish": (arguments.SPLIT,),  # split and profile, with views for BI tools
}


def answer_columns(function: str) -> tuple[str, ...]:
    """The columns a function puts beside the key, time and value (from ``answers``).

    >>> answer_columns("forecast")[-1]
    'status'
    """
    from . import answers  # light, but kept out of the command line's start

    return getattr(answers, function.upper())


DEFAULT_BATCH_ROWS = 2_000_000
STAGE_FLUSH_ROWS = 100_000  # rows a thread buffers before writing to the batch files
DUCKDB_MEMORY = "2GB"  # DuckDB's own cap (it spills beyond); the kernel's arrays are apart
BATCH_COLUMN = "tide_batch"  # the staging files' partition column
_MULTI_ONLY = {a.name for a in arguments.of(arguments.SPLIT_MULTI)} - {
    a.name for a in arguments.of(arguments.SPLIT)
}
_BAD_SERIES_LISTED = 1000


def options_of(command: str) -> tuple[arguments.Argument, ...]:
    """The registry's arguments a command takes (the union over its SQL functions).

    >>> [a.name for a in options_of("split")][:3]
    ['period', 'periods', 'season_span']
    """
    seen: dict[str, arguments.Argument] = {}
    for function in COMMANDS[command]:
        for argument in arguments.of(function):
            seen.setdefault(argument.name, argument)
    return tuple(a for a in arguments.REGISTRY if seen.get(a.name) is a)


@dataclass
class Job:
    """The settings of one run. ``given`` holds the SQL function's arguments by name, as
    given (left out: the function's own default)."""

    command: str
    source: str
    target: str
    key: list[str]
    time: str
    value: str
    given: dict[str, Any] = field(default_factory=dict)
    source_table: str | None = None
    source_query: str | None = None
    target_table: str | None = None
    partition_by: str | None = None
    batch_rows: int = DEFAULT_BATCH_ROWS
    report: str | None = None
    engine: str = "duckdb"  # or "spark": see _run_on_spark
    refresh: bool = False  # recompute only the keys whose input or arguments changed
    schema: str | None = None  # publish: the schema of the published tables and views
    raw_table: str | None = None  # publish: where new raw rows land, for provisional views

    @property
    def source_columns(self) -> list[str]:
        """The columns read from the source: key, time, value and any outside columns."""
        outside = list(self.given.get("outside_columns") or ())
        return list(dict.fromkeys([*self.key, self.time, self.value, *outside]))

    @property
    def function(self) -> str:
        """The SQL function the job runs (``split`` with several-period arguments runs
        ``split_multi``)."""
        functions = COMMANDS[self.command]
        if len(functions) > 1 and _MULTI_ONLY & set(self.given):
            return functions[1]
        return functions[0]

    def checked(self) -> dict[str, Any]:
        """The given arguments, checked for kind and choices by the registry."""
        if self.command not in COMMANDS:
            raise ParamError(f"unknown command {self.command}; one of {', '.join(COMMANDS)}")
        days = self.given.get("special_days")
        if isinstance(days, str):  # a file of day, name rows (--special-days FILE)
            self.given = {**self.given, "special_days": read_named_days(days)}
        settled = arguments.accept(self.function, self.given)
        if not self.key:
            raise ParamError("give at least one key column")
        from .answers import name_clashes, outside_clashes

        reasons = name_clashes(self.key, self.time, self.value, answer_columns(self.function))
        outside = list(settled.get("outside_columns") or ())
        reasons += outside_clashes(self.key, self.time, self.value, outside)
        if any(c.lower() == BATCH_COLUMN for c in (*self.key, self.time, self.value)):
            reasons.append(f"the column name {BATCH_COLUMN} is used by the batching")
        if reasons:
            raise ParamError("; ".join(reasons))
        if self.report and not os.path.isdir(os.path.dirname(os.path.abspath(self.report))):
            raise ParamError(f"no folder to hold the report {self.report}")
        if arguments.whole_number("batch_rows", self.batch_rows) < 1:
            raise ParamError(f"batch_rows must be at least 1, got {self.batch_rows}")
        return {name: settled[name] for name in self.given}


def read_named_days(path: str) -> list[tuple[Any, str]]:
    """The ``(day, name)`` rows of a CSV or Parquet file with columns ``day`` and ``name``
    (the command line's ``--special-days FILE``), read with DuckDB.

    >>> import tempfile
    >>> with tempfile.NamedTemporaryFile("w", suffix=".csv", delete=False) as f:
    ...     _ = f.write("day,name\\n2024-12-25,midwinter\\n")
    >>> read_named_days(f.name)
    [(datetime.date(2024, 12, 25), 'midwinter')]
    """
    import duckdb

    from .endpoints import literal

    if not os.path.isfile(path):
        raise ParamError(f"no special-days file {path}")
    try:
        return (
            duckdb.connect()
            .sql(
                f"SELECT CAST(day AS DATE), CAST(name AS VARCHAR) FROM {literal(path)} ORDER BY ALL"
            )
            .fetchall()
        )
    except duckdb.Error as error:
        raise ParamError(
            f"the special-days file {path} must hold columns day (dates) and name (text): "
            f"{str(error).splitlines()[0]}"
        ) from None


@dataclass
class Outcome:
    """What a run did, as the last line and the report file say it."""

    command: str
    source: str
    target: str
    exit_code: int = EXIT_OK
    outcome: str = ""
    keys: int = 0
    keys_split: int = 0
    keys_kept: int = 0
    keys_failed: int = 0
    rows_in: int = 0
    rows_out: int = 0
    batches: int = 0
    seconds: float = 0.0
    message: str = ""
    bad_series: list[dict[str, Any]] = field(default_factory=list)
    # a refresh (--refresh, publish): what became of each key, and how far the already
    # published seasonally adjusted values moved (``refresh.summarise``)
    refreshed: bool = False
    keys_recomputed: int = 0
    keys_new: int = 0
    keys_reused: int = 0
    keys_dropped: int = 0
    refresh_note: str = ""
    revisions: dict[str, Any] | None = None

    def line(self) -> str:
        """The last line of a run.

        >>> Outcome("split", "a", "b", keys_split=2, rows_in=9, rows_out=9).line()
        'tidesplit split: 2 keys split, 0 kept with a status, 0 failed; 9 rows in, 9 rows \
out; 0.0 s; exit 0 (success)'
        """
        refreshed = ""
        if self.refreshed:
            refreshed = (
                f"{self.keys_recomputed:,} keys recomputed ({self.keys_new:,} new), "
                f"{self.keys_reused:,} reused, {self.keys_dropped:,} dropped; "
            )
            moved = self.revisions or {}
            if moved.get("points_compared"):
                refreshed += (
                    f"published adjusted values moved by {moved['mean_change']:.4g} on "
                    f"average, {moved['largest_change']:.4g} at most "
                    f"({100 * (moved['largest_share'] or 0):.2f}% of the level); "
                )
        return (
            f"tidesplit {self.command}: {refreshed}{self.keys_split:,} keys split, "
            f"{self.keys_kept:,} kept with a status, {self.keys_failed:,} failed; "
            f"{self.rows_in:,} rows in, {self.rows_out:,} rows out; {self.seconds:.1f} s; "
            f"exit {self.exit_code} ({EXIT_NAMES[self.exit_code]})"
        )

    def as_json(self) -> str:
        return json.dumps(asdict(self), indent=2, default=str)


def _sql_value(value: Any) -> str:
    """An argument's value as a SQL literal (values are checked by the registry first):
    lists of numbers, of names, and of named days (``(day, name)`` pairs) included.

    >>> _sql_value(["price", "promo"]), _sql_value(((19723, "opening"),))
    ("['price', 'promo']::VARCHAR[]", "[{'day': DATE '2024-01-01', 'name': 'opening'}]")
    """
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        return repr(value)
    if isinstance(value, str):
        return "'" + value.replace("'", "''") + "'"
    items = list(value)
    if items and all(isinstance(v, str) for v in items):
        return "[" + ", ".join(_sql_value(v) for v in items) + "]::VARCHAR[]"
    if items and all(isinstance(v, tuple) and len(v) == 2 for v in items):
        import numpy as np

        return (
            "["
            + ", ".join(
                f"{{'day': DATE '{np.datetime64(int(day), 'D')}', 'name': {_sql_value(name)}}}"
                for day, name in items
            )
            + "]"
        )
    return "[" + ", ".join(_sql_value(v) for v in items) + "]::DOUBLE[]"


def answer_query(job: Job, settings: Mapping[str, Any], table: str) -> str:
    """The macro call for one batch, the same SQL a user would write.

    >>> job = Job("split", "in.parquet", "out.parquet", ["store"], "month", "units")
    >>> answer_query(job, {"period": 12, "robust": True}, "batch")
    "SELECT * FROM tide_split(batch, ['store'], 'month', 'units', period := 12, robust := true)"
    """
    from .endpoints import literal

    key = "[" + ", ".join(literal(k) for k in job.key) + "]"
    named = "".join(f", {n} := {_sql_value(v)}" for n, v in settings.items())
    return (
        f"SELECT * FROM tide_{job.function}({table}, {key}, {literal(job.time)}, "
        f"{literal(job.value)}{named})"
    )


class _Progress:
    """A bar of keys done, with rows per second and the time left (tqdm), shown only on a
    terminal."""

    def __init__(self, total: int, show: bool) -> None:
        self.bar = None
        if show and sys.stderr.isatty():
            from tqdm import tqdm

            self.bar = tqdm(total=total, unit=" keys", unit_scale=True, file=sys.stderr)
        self.started, self.rows = time.perf_counter(), 0

    def advance(self, keys: int, rows: int) -> None:
        self.rows += rows
        if self.bar is not None:
            rate = self.rows / max(time.perf_counter() - self.started, 1e-9)
            self.bar.set_postfix_str(f"{rate:,.0f} rows/s", refresh=False)
            self.bar.update(keys)

    def close(self) -> None:
        if self.bar is not None:
            self.bar.close()


def _error_kind(error: Exception) -> str:
    text = str(error)
    if "ParamError" in text or isinstance(error, ParamError):
        return "argument"
    if "SplitError" in text:
        return "series"
    return "other"


def run(job: Job, *, show_progress: bool = False) -> Outcome:
    """Run one job; never raises for a bad argument, series or place: the outcome's
    ``exit_code`` says what happened (``EXIT_CODES``), and ``message`` why.

    >>> import os, tempfile, pyarrow as pa, pyarrow.parquet as pq
    >>> folder = tempfile.mkdtemp()
    >>> rows = pa.table({"k": [1] * 24 + [2] * 24, "t": list(range(24)) * 2,
    ...                  "v": [float(i % 4 + k) for k in (1, 2) for i in range(24)]})
    >>> pq.write_table(rows, os.path.join(folder, "in.parquet"))
    >>> done = run(Job("split", os.path.join(folder, "in.parquet"),
    ...                os.path.join(folder, "out.parquet"), ["k"], "t", "v", {"period": 4}))
    >>> done.exit_code, done.keys_split, done.rows_out
    (0, 2, 48)
    """
    outcome = Outcome(job.command, _shown(job.source), _shown(job.target))
    started = time.perf_counter()
    try:
        if job.engine == "spark":
            _run_on_spark(job, outcome)
        elif job.engine == "duckdb":
            _run(job, outcome, show_progress)
        else:
            raise ParamError(f"engine must be duckdb or spark, got {job.engine!r}")
    except ParamError as error:
        outcome.exit_code, outcome.message = EXIT_BAD_ARGUMENTS, str(error)
    except Exception as error:
        from .endpoints import UnreachableError

        kind = _error_kind(error)
        if isinstance(error, UnreachableError):
            outcome.exit_code = EXIT_UNREACHABLE
        elif kind == "argument":
            outcome.exit_code = EXIT_BAD_ARGUMENTS
        elif kind == "series":
            outcome.exit_code = EXIT_BAD_SERIES
        else:
            outcome.exit_code = EXIT_FAILED
        outcome.message = _plain_message(error)
    if outcome.exit_code not in (EXIT_OK, EXIT_KEPT):  # nothing reached the target
        outcome.keys_split = outcome.keys_kept = outcome.rows_out = 0
        outcome.keys_recomputed = outcome.keys_new = outcome.keys_reused = 0
        outcome.keys_dropped, outcome.revisions = 0, None
    outcome.seconds = round(time.perf_counter() - started, 3)
    outcome.outcome = EXIT_CODES[outcome.exit_code]
    if job.report and os.path.isdir(os.path.dirname(os.path.abspath(job.report))):
        _write_report(job.report, outcome)
    return outcome


def _plain_message(error: Exception) -> str:
    """An error's message without the layers DuckDB wraps around a UDF's exception.

    >>> _plain_message(ValueError("Invalid Input Error: Python exception occurred while "
    ...                           "executing the UDF: SplitError: series {'k': 3}: too short"))
    "series {'k': 3}: too short"
    """
    text = str(error)
    for kind in ("SplitError: ", "ParamError: "):
        if kind in text:
            return text.split(kind, 1)[1]
    return text


def _shown(address: str) -> str:
    from .endpoints import shown

    return shown(address)


def _write_report(path: str, outcome: Outcome) -> None:
    """The report file, written aside and renamed so a reader never sees half of one."""
    from .endpoints import usual_mode

    folder = os.path.dirname(os.path.abspath(path))
    handle, aside = tempfile.mkstemp(prefix=".tide-report-", suffix=".json", dir=folder)
    with os.fdopen(handle, "w") as out:
        out.write(outcome.as_json() + "\n")
    usual_mode(aside)
    os.replace(aside, path)


def _key_counts(con: Any, relation: str, key: list[str]) -> Any:
    """One row per key: the key's hash and its number of rows (numpy arrays)."""
    from .endpoints import quoted

    keys = ", ".join(quoted(k) for k in key)
    counted = con.sql(
        f"SELECT hash({keys}) AS h, count(*) AS n FROM {relation} GROUP BY {keys}"
    ).fetchnumpy()
    return counted["h"], counted["n"]


def _check_columns(con: Any, relation: str, job: Job) -> None:
    from .endpoints import quoted

    columns = [c for c, *_ in con.sql(f"DESCRIBE SELECT * FROM {relation}").fetchall()]
    missing = [c for c in job.source_columns if c not in columns]
    if missing:
        raise ParamError(
            f"no column {', '.join(map(quoted, missing))} in {_shown(job.source)} "
            f"(it has {', '.join(map(quoted, columns))})"
        )


def _connection(work: str) -> Any:
    """A DuckDB connection with the tide_* functions, set up for one job's batches."""
    import tidesplit

    from .endpoints import literal

    con = tidesplit.connect()
    con.execute(f"SET temp_directory = {literal(os.path.join(work, 'spill'))}")
    con.execute("SET preserve_insertion_order = false")
    # Bounded memory (measured on 360 million rows in 180 batches: 6.0 GiB with
    # DuckDB's defaults, 1.3 GiB so): no cache of the files read (each is read once or
    # twice), partitioned writes flushed early, and a cap on what DuckDB holds.
    con.execute("SET enable_external_file_cache = false")
    con.execute(f"SET partitioned_write_flush_threshold = {STAGE_FLUSH_ROWS}")
    con.execute(f"SET memory_limit = '{DUCKDB_MEMORY}'")
    return con


def _source_rows(con: Any, job: Job, work: str, source: Any) -> str:
    """The FROM item DuckDB reads the source's rows from (a PostgreSQL source is first
    streamed, in one pass over the server, into a local Parquet file)."""
    from .endpoints import literal, stream_postgres

    if not source.is_postgres:
        return source.relation
    columns = job.source_columns
    local = os.path.join(work, "source.parquet")
    with stream_postgres(source, columns) as reader:
        con.register("tide_postgres_rows", reader)
        con.execute(f"COPY tide_postgres_rows TO {literal(local)} (FORMAT parquet)")
        con.unregister("tide_postgres_rows")
    return f"read_parquet({literal(local)})"


@dataclass
class Batches:
    """The keys of a relation shared out into batches by a hash of the key."""

    keys: int
    rows: int
    count: int
    keys_of: Any  # per batch
    rows_of: Any
    staged: str | None  # the folder of the batch files (several batches), else None


def _share_out(con: Any, job: Job, relation: str, work: str) -> Batches:
    """Count the keys and rows and, for more than one batch, write each batch's rows to
    its own files in one streaming pass."""
    import numpy as np

    from .endpoints import literal, quoted

    hashes, counts = _key_counts(con, relation, job.key)
    rows = int(counts.sum())
    batches = max(1, math.ceil(rows / job.batch_rows))
    by_batch = (hashes % np.uint64(batches)).astype(np.int64)
    keys_of = np.bincount(by_batch, minlength=batches)
    rows_of = np.bincount(by_batch, weights=counts, minlength=batches).astype(np.int64)
    staged = None
    if batches > 1:  # one streaming pass writes each batch's rows to its own files
        wanted = ", ".join(quoted(c) for c in job.source_columns)
        keys_sql = ", ".join(quoted(k) for k in job.key)
        staged = os.path.join(work, f"batches-{len(os.listdir(work))}")
        con.execute(
            f"COPY (SELECT {wanted}, hash({keys_sql}) % {batches} AS {BATCH_COLUMN} "
            f"FROM {relation}) TO {literal(staged)} "
            f"(FORMAT parquet, PARTITION_BY ({BATCH_COLUMN}))"
        )
    return Batches(len(hashes), rows, batches, keys_of, rows_of, staged)


def _each_batch(con: Any, job: Job, relation: str, batches: Batches) -> Any:
    """Point the view ``tide_batch_rows`` at each batch in turn; yields (batch, keys, rows)."""
    from .endpoints import literal, quoted

    wanted = ", ".join(quoted(c) for c in job.source_columns)
    for batch in range(batches.count):
        if batches.staged is not None:
            if batches.keys_of[batch] == 0:
                continue
            files = os.path.join(batches.staged, f"{BATCH_COLUMN}={batch}", "*.parquet")
            rows = f"read_parquet({literal(files)}, hive_partitioning = false)"
        else:
            rows = relation
        con.execute(f"CREATE OR REPLACE TEMP VIEW tide_batch_rows AS SELECT {wanted} FROM {rows}")
        yield batch, int(batches.keys_of[batch]), int(batches.rows_of[batch])


def answer_batch(con: Any, job: Job, settings: Mapping[str, Any], outcome: Outcome) -> Any:
    """The job's answer for the rows of ``tide_batch_rows`` (an Arrow table); under
    'raise', a bad series names every bad key of the batch in the outcome first."""
    try:
        return con.sql(answer_query(job, settings, "tide_batch_rows")).to_arrow_table()
    except Exception as error:
        if _error_kind(error) == "series":
            _list_bad_series(con, job, settings, outcome)
        raise


def _run(job: Job, outcome: Outcome, show_progress: bool) -> None:
    from .endpoints import open_source, open_target, quoted

    settings = job.checked()
    if job.refresh:
        from .refresh import run_refresh

        return run_refresh(job, settings, outcome, show_progress)
    _clear_killed_work()
    work = tempfile.mkdtemp(prefix=f"{WORK_PREFIX}{os.getpid()}-")
    con = _connection(work)
    target, opened = None, False
    try:
        source = open_source(con, job.source, job.source_table, job.source_query)
        target = open_target(con, job.target, job.target_table, job.partition_by)
        target.open()  # before any long read: an unreachable target fails at once
        opened = True
        relation = _source_rows(con, job, work, source)
        _check_columns(con, relation, job)
        if job.partition_by is not None and job.partition_by not in (
            *job.key,
            *answer_columns(job.function),
        ):
            raise ParamError(
                f"--partition-by {quoted(job.partition_by)} is not a key or answer column"
            )
        batches = _share_out(con, job, relation, work)
        outcome.keys, outcome.rows_in = batches.keys, batches.rows
        progress = _Progress(outcome.keys, show_progress)
        try:
            for batch, keys, rows in _each_batch(con, job, relation, batches):
                table = answer_batch(con, job, settings, outcome)
                _tally(con, job, table, outcome, keys)
                target.write(table, batch)
                outcome.batches += 1
                progress.advance(keys, rows)
                del table
        finally:
            progress.close()
        target.commit()
        opened = False
        if outcome.keys_kept:
            outcome.exit_code = EXIT_KEPT
    finally:
        if opened:
            target.abort()
        con.close()
        shutil.rmtree(work, ignore_errors=True)


WORK_PREFIX = "tidesplit-job-"


def _run_on_spark(job: Job, outcome: Outcome) -> None:
    """The job on Spark: Spark reads the Parquet or CSV source, ``tidesplit.spark`` splits
    the keys in buckets on the executors, and Spark writes the answer as Parquet beside the
    target, which then takes the target's place (one rename for a file, an exchange for a
    folder), so a run killed on the way leaves the previous output whole."""
    from pyspark.sql import functions as sf

    from . import spark as front
    from .endpoints import DUCKDB_MARK, _exchange, is_postgres

    settings = job.checked()
    database = (is_postgres(job.source), DUCKDB_MARK in job.source, job.source.endswith(".duckdb"))
    if any(database) or job.source_table or job.source_query:
        raise ParamError("--engine spark reads Parquet or CSV (a file, a glob or a folder)")
    if is_postgres(job.target) or DUCKDB_MARK in job.target or job.target.endswith(".duckdb"):
        raise ParamError("--engine spark writes Parquet (a file, or a folder)")
    if job.target_table:
        raise ParamError("--to-table names a table of a database; --engine spark writes files")
    session = front.local_session()
    reader = session.read
    frame = (
        reader.option("header", True).option("inferSchema", True).csv(job.source)
        if job.source.lower().endswith(".csv")
        else reader.parquet(job.source)
    )
    answer = {
        "split": front.split_table,
        "profile": front.profile,
        "outliers": front.outliers,
        "forecast": front.forecast,
    }[job.command]
    result = answer(frame, job.key, job.time, job.value, **settings)
    target = os.path.abspath(job.target)
    aside = os.path.join(
        os.path.dirname(target), f".{os.path.basename(target)}.{WORK_PREFIX}{os.getpid()}"
    )
    single = target.lower().endswith(".parquet") and job.partition_by is None
    try:
        writer = (result.coalesce(1) if single else result).write.mode("overwrite")
        if job.partition_by is not None:
            writer = writer.partitionBy(job.partition_by)
        writer.parquet(aside)
        written = session.read.parquet(aside)
        keys = [sf.col(k) for k in job.key]
        outcome.rows_in = frame.count()
        outcome.keys = frame.select(*keys).distinct().count()
        outcome.rows_out = written.count()
        status = sf.col("status")
        kept = (
            written.groupBy(*keys)
            .agg(sf.first(status).alias("status"))
            .where(~((status == "ok") | status.startswith("ok; ")))
            .collect()
        )
        outcome.keys_kept = len(kept)
        outcome.keys_split = outcome.keys - outcome.keys_kept
        _list(outcome, job, [tuple(row) for row in kept])
        if single:
            part = next(os.path.join(aside, n) for n in os.listdir(aside) if n.endswith(".parquet"))
            os.replace(part, target)
        elif os.path.exists(target) and _exchange(aside, target):
            pass  # the old folder now sits aside, removed below
        else:  # two renames: the old folder steps aside, the new one takes its place
            if os.path.exists(target):
                os.replace(target, aside + ".old")
            os.replace(aside, target)
            shutil.rmtree(aside + ".old", ignore_errors=True)
        outcome.batches = 1
    finally:
        shutil.rmtree(aside, ignore_errors=True)
    if outcome.keys_kept:
        outcome.exit_code = EXIT_KEPT


def _clear_killed_work() -> None:
    """Remove the temporary folders of runs that were killed (their process is gone):
    the batch files of a large source would otherwise stay behind."""
    folder = tempfile.gettempdir()
    for name in os.listdir(folder):
        if not name.startswith(WORK_PREFIX):
            continue
        pid = name[len(WORK_PREFIX) :].split("-", 1)[0]
        if not pid.isdigit():
            continue
        try:
            os.kill(int(pid), 0)
        except ProcessLookupError:
            shutil.rmtree(os.path.join(folder, name), ignore_errors=True)
        except PermissionError:
            pass  # another user's live process


def _status_sql(job: Job) -> str:
    from .endpoints import quoted

    keys = ", ".join(quoted(k) for k in job.key)
    return (
        f"SELECT {keys}, any_value(status) AS status FROM tide_result_rows GROUP BY ALL "
        "HAVING NOT bool_and(status = 'ok' OR starts_with(status, 'ok; '))"
    )


def _tally(con: Any, job: Job, table: Any, outcome: Outcome, keys: int) -> None:
    """Count one batch: rows out, and the keys kept with a status (listed, up to a limit)."""
    con.register("tide_result_rows", table)
    try:
        kept = con.sql(_status_sql(job)).fetchall()
    finally:
        con.unregister("tide_result_rows")
    outcome.rows_out += table.num_rows
    outcome.keys_kept += len(kept)
    outcome.keys_split += keys - len(kept)
    _list(outcome, job, kept)


def _list(outcome: Outcome, job: Job, rows: list[tuple]) -> None:
    room = _BAD_SERIES_LISTED - len(outcome.bad_series)
    for *key, status in rows[: max(room, 0)]:
        outcome.bad_series.append(
            {"key": dict(zip(job.key, map(_plain, key), strict=True)), "status": status}
        )


def _plain(value: Any) -> Any:
    return value if isinstance(value, (int, float, str, bool, type(None))) else str(value)


def _list_bad_series(con: Any, job: Job, settings: Mapping[str, Any], outcome: Outcome) -> None:
    """Under 'raise', name every bad key of the failing batch: the batch again with
    'keep', which flags the same series (the checks do not depend on the setting)."""
    kept = dict(settings, on_error="keep")
    table = con.sql(answer_query(job, kept, "tide_batch_rows")).to_arrow_table()
    con.register("tide_result_rows", table)
    try:
        bad = con.sql(_status_sql(job)).fetchall()
    finally:
        con.unregister("tide_result_rows")
    outcome.keys_failed = len(bad)
    _list(outcome, job, bad)
