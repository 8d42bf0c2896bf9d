"""A refresh: a rerun that recomputes only the keys whose input or arguments changed.

Each key's fingerprint is its number of rows, its first and last time, a hash of its
(time, value) pairs and a hash of the run's arguments (with the column names and the
package version). A ledger beside the target keeps the fingerprint of every key published;
a refresh compares, recomputes the keys that changed or are new, keeps the rows of the
rest, and removes the keys that vanished from the source. The changed rows are replaced
in one transaction (a DuckDB or PostgreSQL table) or by one file swap (a Parquet file).

Each refresh also measures how far the already published seasonally adjusted values
moved (revisions): per key that was recomputed, over the times published before and
after, the largest and mean absolute change, and both as a share of the key's level (its
mean absolute adjusted value before); and once over all keys. The rows go to a revisions
table beside the target, and the run report sums them up.

Names beside a target table ``T``: ``T_refresh_keys`` (the ledger) and ``T_revisions``;
beside a Parquet file ``T.parquet``: ``T_refresh_keys.parquet`` and
``T_revisions.parquet``.
"""

from __future__ import annotations

import contextlib
import datetime
import hashlib
import json
import os
import shutil
import tempfile
import uuid
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from .endpoints import LEDGER_SUFFIX
from .errors import ParamError

REVISIONS_SUFFIX = "_revisions"
# the ledger's columns beside the key (a key column may not take one of these names)
LEDGER_COLUMNS = ("rows_in", "first_time", "last_time", "values_hash", "arguments_hash",
                  "arguments", "rows_out", "status", "refresh_id", "refreshed_at")  # fmt: skip
REVISION_COLUMNS = ("refresh_id", "refreshed_at", "scope", "points_compared", "largest_change",
                    "mean_change", "level", "largest_share", "mean_share")  # fmt: skip
PARQUET_MARK = "tidesplit_refresh"  # the key of the Parquet metadata that ties files together


@dataclass
class Part:
    """One table a refresh keeps per key: its name and how a batch's rows are answered
    (from the view ``tide_batch_rows`` on the job's connection)."""

    table: str
    answer: Callable[[Any], Any]
    revised: bool = False  # compare its ``adjusted`` values with those published before


def ledger_name(table: str) -> str:
    """The ledger's name beside a target table.

    >>> ledger_name("sales_split")
    'sales_split_refresh_keys'
    """
    return table + LEDGER_SUFFIX


def revisions_name(table: str) -> str:
    return table + REVISIONS_SUFFIX


def _q(name: str) -> str:
    from .endpoints import quoted

    return quoted(name)


def _match(left: str, right: str, names: Sequence[str], nulls: bool) -> str:
    """Rows of two relations with the same values of ``names`` (NULL equal to NULL only
    where NULLs occur: a plain ``=`` lets PostgreSQL hash the join)."""
    same = "IS NOT DISTINCT FROM" if nulls else "="
    return " AND ".join(f"{left}.{_q(n)} {same} {right}.{_q(n)}" for n in names)


def arguments_text(job: Any, settings: dict[str, Any]) -> str:
    """What the arguments' hash covers, as JSON: the command, the columns, the SQL
    function's arguments as given and the package version (a new version may compute
    otherwise, so it recomputes every key). The hash leaves out ``on_error``, which
    decides whether a run goes on, not the numbers of a series.

    >>> from tidesplit.elt import Job
    >>> json.loads(arguments_text(Job("split", "a", "b", ["k"], "t", "v"), {"period": 4}))[
    ...     "arguments"]
    {'period': 4}
    """
    from . import __version__

    return json.dumps(
        {
            "command": job.command,
            "function": job.function,
            "key": job.key,
            "time": job.time,
            "value": job.value,
            "arguments": settings,
            "version": __version__,
        },
        sort_keys=True,
    )


def fingerprint_sql(
    relation: str, key: Sequence[str], time: str, value: str, outside: Sequence[str] = ()
) -> str:
    """One row per key: its rows, first and last time and a hash of its (time, value)
    pairs, with the outside columns' values when there are any (a sum of row hashes, so
    the order of the rows does not matter and a repeated row counts twice)."""
    keys = ", ".join(_q(k) for k in key)
    t, v = _q(time), _q(value)
    hashed = ", ".join([t, v, *(_q(c) for c in outside)])
    return (
        f"SELECT {keys}, count(*) AS rows_in, min({t}) AS first_time, max({t}) AS last_time, "
        f"CAST(sum(hash({hashed})::HUGEINT) % 18446744073709551616 AS VARCHAR) AS values_hash "
        f"FROM {relation} GROUP BY {keys}"
    )


# ------------------------------------------------------------------------ places


class _DuckDBPlace:
    """Tables of a DuckDB file, through the job's own connection."""

    def __init__(self, con: Any, path: str, schema: str | None) -> None:
        self.con, self.path, self.schema = con, path, schema or "main"

    def open(self) -> None:
        from .endpoints import UnreachableError, attach

        if not os.path.isdir(os.path.dirname(os.path.abspath(self.path))):
            raise UnreachableError(f"no folder to hold {self.path}")
        self.alias = attach(self.con, self.path, read_only=False)
        self.con.execute(f"CREATE SCHEMA IF NOT EXISTS {_q(self.alias)}.{_q(self.schema)}")

    def name(self, table: str, inside: bool = False) -> str:
        """A table's name for the job's connection, or as written inside a stored view
        (relative to the file, which any client may open under any name)."""
        local = f"{_q(self.schema)}.{_q(table)}"
        return local if inside else f"{_q(self.alias)}.{local}"

    def exists(self, table: str) -> bool:
        return bool(
            self.con.execute(
                "SELECT count(*) FROM duckdb_tables() WHERE database_name = ? "
                "AND schema_name = ? AND table_name = ?",
                [self.alias, self.schema, table],
            ).fetchall()[0][0]
        )

    def run(self, sql: str) -> None:
        self.con.execute(sql)

    def fetch(self, sql: str) -> Any:
        return self.con.sql(sql).to_arrow_table()

    def ingest(self, table: str, rows: Any, append: bool) -> None:
        self.con.register("tide_ingest", rows)
        try:
            if append:
                self.con.execute(f"INSERT INTO {self.name(table)} SELECT * FROM tide_ingest")
            else:
                self.con.execute(f"CREATE TABLE {self.name(table)} AS SELECT * FROM tide_ingest")
        finally:
            self.con.unregister("tide_ingest")

    def begin(self) -> None:
        self.con.execute("BEGIN TRANSACTION")

    def commit(self, began: bool = True) -> None:
        if began:
            self.con.execute("COMMIT")

    def rollback(self) -> None:
        with contextlib.suppress(Exception):
            self.con.execute("ROLLBACK")

    def close(self) -> None:
        with contextlib.suppress(Exception):
            self.con.execute(f"CHECKPOINT {_q(self.alias)}")


class _PostgresPlace:
    """Tables of a PostgreSQL schema (or the connection's search path), through ADBC."""

    def __init__(self, con: Any, address: str, schema: str | None) -> None:
        self.con, self.address, self.schema = con, address, schema

    def open(self) -> None:
        from .endpoints import _postgres

        self.connection = _postgres(self.address)
        if self.schema:
            self.run(f"CREATE SCHEMA IF NOT EXISTS {_q(self.schema)}")
            self.connection.commit()

    def name(self, table: str, inside: bool = False) -> str:
        return f"{_q(self.schema)}.{_q(table)}" if self.schema else _q(table)

    def exists(self, table: str) -> bool:
        from .endpoints import literal

        found = self.fetch(f"SELECT to_regclass({literal(self.name(table))}) IS NOT NULL AS f")
        return bool(found["f"][0].as_py())

    def run(self, sql: str) -> None:
        with self.connection.cursor() as cursor:
            cursor.execute(sql)

    def fetch(self, sql: str) -> Any:
        with self.connection.cursor() as cursor:
            cursor.execute(sql)
            return cursor.fetch_arrow_table()

    def ingest(self, table: str, rows: Any, append: bool) -> None:
        from .endpoints import _without_nested

        flat = _without_nested(self.con, rows)
        with self.connection.cursor() as cursor:
            cursor.adbc_ingest(
                table, flat, mode="append" if append else "create", db_schema_name=self.schema
            )
        self.connection.commit()

    def begin(self) -> None:
        pass  # ADBC runs every statement in a transaction until commit

    def commit(self, began: bool = True) -> None:
        self.connection.commit()

    def rollback(self) -> None:
        with contextlib.suppress(Exception):
            self.connection.rollback()

    def close(self) -> None:
        with contextlib.suppress(Exception):
            self.connection.close()


def _stage(table: str) -> str:
    from .endpoints import _stage_name

    return _stage_name(table)


class TableStore:
    """The parts, their ledger and revisions as tables of a DuckDB file or a PostgreSQL
    database: rows answered now go to stage tables; ``commit`` replaces the rows of the
    changed and vanished keys and swaps the ledger in one transaction."""

    def __init__(self, place: Any, parts: Sequence[Part], key: Sequence[str], time: str):
        self.place, self.parts, self.key, self.time = place, list(parts), list(key), time
        self.main = self.parts[0].table
        self.staged: set[str] = set()
        self.note = ""

    def _names(self) -> list[str]:
        return [*(p.table for p in self.parts), ledger_name(self.main), revisions_name(self.main),
                "gone " + self.main]  # fmt: skip

    def open(self) -> None:
        self.place.open()
        for name in self._names():  # what a killed run left
            self.place.run(f"DROP TABLE IF EXISTS {self.place.name(_stage(name))}")
        self.place.commit(began=False)

    def ledger(self) -> Any:
        """The ledger as published, or None (with ``note`` saying why) when there is none
        or a table it speaks for is missing."""
        if not self.place.exists(ledger_name(self.main)):
            self.note = "no ledger of an earlier refresh: every key computed"
            return None
        missing = [p.table for p in self.parts if not self.place.exists(p.table)]
        if missing:
            self.note = f"no table {', '.join(missing)} beside the ledger: every key computed"
            return None
        return self.place.fetch(f"SELECT * FROM {self.place.name(ledger_name(self.main))}")

    def write(self, part: Part, rows: Any) -> None:
        name = _stage(part.table)
        self.place.ingest(name, rows, append=part.table in self.staged)
        self.staged.add(part.table)

    def revisions(self, part: Part, nulls: bool) -> Any:
        if part.table not in self.staged or not self.place.exists(part.table):
            return None
        return self.place.fetch(
            revisions_sql(
                self.place.name(_stage(part.table)),
                self.place.name(part.table),
                self.key,
                self.time,
                nulls,
            )
        )

    def commit(
        self,
        gone: Any,
        ledger: Any,
        revisions: Any,
        replace_all: bool,
        nulls: bool,
        before: Sequence[str] = (),
        after: Sequence[str] = (),
    ) -> None:
        place = self.place
        gone_stage = _stage("gone " + self.main)
        place.ingest(gone_stage, gone, append=False)
        place.ingest(_stage(ledger_name(self.main)), ledger, append=False)
        if revisions is not None:
            place.ingest(_stage(revisions_name(self.main)), revisions, append=False)
        place.begin()
        try:
            for statement in before:
                place.run(statement)
            for part in self.parts:
                self._replace(part.table, part.table in self.staged, replace_all, gone_stage, nulls)
            final = place.name(ledger_name(self.main))
            place.run(f"DROP TABLE IF EXISTS {final}")
            place.run(
                f"ALTER TABLE {place.name(_stage(ledger_name(self.main)))} "
                f"RENAME TO {_q(ledger_name(self.main))}"
            )
            if revisions is not None:
                name = revisions_name(self.main)
                if place.exists(name):
                    columns = ", ".join(_q(c) for c in revisions.column_names)
                    place.run(
                        f"INSERT INTO {place.name(name)} ({columns}) SELECT {columns} "
                        f"FROM {place.name(_stage(name))}"
                    )
                    place.run(f"DROP TABLE {place.name(_stage(name))}")
                else:
                    place.run(f"ALTER TABLE {place.name(_stage(name))} RENAME TO {_q(name)}")
            place.run(f"DROP TABLE {place.name(gone_stage)}")
            for statement in after:
                place.run(statement)
            place.commit()
        except Exception:
            place.rollback()
            raise

    def _replace(self, table: str, staged: bool, replace_all: bool, gone: str, nulls: bool) -> None:
        place = self.place
        final, stage = place.name(table), place.name(_stage(table))
        if staged and (replace_all or not place.exists(table)):
            place.run(f"DROP TABLE IF EXISTS {final}")
            place.run(f"ALTER TABLE {stage} RENAME TO {_q(table)}")
            return
        if place.exists(table):
            match = _match("g", "t", self.key, nulls)
            place.run(
                f"DELETE FROM {final} AS t WHERE EXISTS "
                f"(SELECT 1 FROM {place.name(gone)} AS g WHERE {match})"
            )
        if staged:
            place.run(f"INSERT INTO {final} SELECT * FROM {stage}")
            place.run(f"DROP TABLE {stage}")

    def abort(self) -> None:
        self.place.rollback()
        with contextlib.suppress(Exception):
            for name in self._names():
                self.place.run(f"DROP TABLE IF EXISTS {self.place.name(_stage(name))}")
            self.place.commit(began=False)

    def close(self) -> None:
        self.place.close()


class ParquetStore:
    """One Parquet file with its ledger and revisions in Parquet files beside it. The
    three carry the refresh's id in their metadata: a ledger whose id is not the target's
    (a run killed between the renames, or a full run since) is not trusted."""

    def __init__(self, con: Any, path: str, key: Sequence[str], time: str, part: Part):
        self.con, self.key, self.time, self.parts = con, list(key), time, [part]
        self.target = Path(path).absolute()
        stem = self.target.name[: -len(".parquet")]
        self.ledger_path = self.target.with_name(stem + LEDGER_SUFFIX + ".parquet")
        self.revisions_path = self.target.with_name(stem + REVISIONS_SUFFIX + ".parquet")
        self.writer, self.note = None, ""

    def open(self) -> None:
        from .endpoints import UnreachableError

        folder = self.target.parent
        if not folder.is_dir():
            raise UnreachableError(f"no folder {folder} to write {self.target.name} into")
        for stale in folder.glob(f".{self.target.name}.tide-*"):  # what a killed run left
            if stale.is_dir():
                shutil.rmtree(stale, ignore_errors=True)
            else:
                stale.unlink(missing_ok=True)
        try:
            self.aside = tempfile.mkdtemp(prefix=f".{self.target.name}.tide-", dir=folder)
        except OSError as error:
            raise UnreachableError(f"cannot write into {folder}: {error}") from error

    def _mark(self, path: Path) -> str | None:
        from .endpoints import literal

        if not path.exists():
            return None
        rows = self.con.sql(
            f"SELECT value::VARCHAR FROM parquet_kv_metadata({literal(str(path))}) "
            f"WHERE key::VARCHAR = {literal(PARQUET_MARK)}"
        ).fetchall()
        return rows[0][0] if rows else None

    def ledger(self) -> Any:
        import pyarrow.parquet as pq

        if not self.ledger_path.exists():
            self.note = "no ledger of an earlier refresh: every key computed"
            return None
        if not self.target.exists() or self._mark(self.ledger_path) != self._mark(self.target):
            self.note = (
                f"the ledger {self.ledger_path.name} does not belong to {self.target.name} "
                "(a full run since, or a run stopped between its renames): every key computed"
            )
            return None
        return pq.read_table(self.ledger_path)

    def write(self, part: Part, rows: Any) -> None:
        import pyarrow.parquet as pq

        if self.writer is None:
            self.new = os.path.join(self.aside, "new.parquet")
            self.writer = pq.ParquetWriter(self.new, rows.schema)
        self.writer.write_table(rows.cast(self.writer.schema))

    def _close_writer(self) -> None:
        if self.writer is not None:
            self.writer.close()

    def revisions(self, part: Part, nulls: bool) -> Any:
        from .endpoints import literal

        self._close_writer()
        if self.writer is None or not self.target.exists():
            return None
        return self.con.sql(
            revisions_sql(
                f"read_parquet({literal(self.new)})",
                f"read_parquet({literal(str(self.target))})",
                self.key,
                self.time,
                nulls,
            )
        ).to_arrow_table()

    def commit(self, gone: Any, ledger: Any, revisions: Any, replace_all: bool, nulls: bool,
               before: Sequence[str] = (), after: Sequence[str] = ()) -> None:  # fmt: skip
        from .endpoints import _fsync, literal, usual_mode

        self._close_writer()
        mark = ledger["refresh_id"][0].as_py() if ledger.num_rows else uuid.uuid4().hex
        metadata = f"KV_METADATA {{{PARQUET_MARK}: {literal(mark)}}}"
        sources = []
        if self.target.exists() and not replace_all:
            self.con.register("tide_gone_keys", gone)
            sources.append(
                f"SELECT * FROM read_parquet({literal(str(self.target))}) AS t WHERE NOT EXISTS "
                f"(SELECT 1 FROM tide_gone_keys AS g WHERE {_match('g', 't', self.key, nulls)})"
            )
        if self.writer is not None:
            sources.append(f"SELECT * FROM read_parquet({literal(self.new)})")
        final = os.path.join(self.aside, "final.parquet")
        if sources:
            self.con.execute(
                f"COPY ({' UNION ALL '.join(sources)}) TO {literal(final)} "
                f"(FORMAT parquet, {metadata})"
            )
        moves = [(final, self.target)] if sources else []
        self.con.register("tide_ledger", ledger)
        aside_ledger = os.path.join(self.aside, "ledger.parquet")
        self.con.execute(
            f"COPY tide_ledger TO {literal(aside_ledger)} (FORMAT parquet, {metadata})"
        )
        moves.append((aside_ledger, self.ledger_path))
        if revisions is not None:
            self.con.register("tide_revisions", revisions)
            aside_revisions = os.path.join(self.aside, "revisions.parquet")
            earlier = ""
            if self.revisions_path.exists():
                earlier = (f"SELECT * FROM read_parquet({literal(str(self.revisions_path))}) "
                           "UNION ALL BY NAME ")  # fmt: skip
            self.con.execute(
                f"COPY ({earlier}SELECT * FROM tide_revisions) TO {literal(aside_revisions)} "
                "(FORMAT parquet)"
            )
            moves.append((aside_revisions, self.revisions_path))
        for made, _ in moves:
            usual_mode(made)
            _fsync(made)
        for made, place in moves:  # the target first: a stop after it leaves a ledger
            os.replace(made, place)  # that no longer matches, so the next run recomputes
        _fsync(str(self.target.parent))

    def abort(self) -> None:
        self._close_writer()

    def close(self) -> None:
        if hasattr(self, "aside"):
            shutil.rmtree(self.aside, ignore_errors=True)


def revisions_sql(new: str, old: str, key: Sequence[str], time: str, nulls: bool) -> str:
    """Per key, how far the adjusted values at the times published before moved (plain
    SQL that DuckDB and PostgreSQL both run)."""
    keys = ", ".join(f"n.{_q(k)}" for k in key)
    match = _match("n", "o", [*key, time], nulls)
    change = "abs(n.adjusted - o.adjusted)"
    return (
        f"SELECT {keys}, count(*) AS points_compared, max({change}) AS largest_change, "
        f"avg({change}) AS mean_change, avg(abs(o.adjusted)) AS level "
        f"FROM {new} AS n JOIN {old} AS o ON {match} "
        f"WHERE n.adjusted IS NOT NULL AND o.adjusted IS NOT NULL GROUP BY {keys}"
    )


def open_store(con: Any, job: Any, parts: Sequence[Part]) -> Any:
    """Where a refresh keeps its parts, from the job's target."""
    from .endpoints import DUCKDB_MARK, _duckdb_address, is_postgres

    if is_postgres(job.target):
        if job.command != "publish" and job.target_table is None:
            raise ParamError("a PostgreSQL target takes --to-table")
        return TableStore(_PostgresPlace(con, job.target, job.schema), parts, job.key, job.time)
    if DUCKDB_MARK in job.target or job.target.endswith(".duckdb"):
        found = _duckdb_address(job.target)
        if job.command == "publish":
            if found is not None:
                raise ParamError("publish writes into a DuckDB file: give the file, no table")
            path = job.target
        else:
            if found is not None and job.target_table is not None:
                raise ParamError("the table is named twice: in the address and in --to-table")
            path = found[0] if found else job.target
        return TableStore(_DuckDBPlace(con, path, job.schema), parts, job.key, job.time)
    if job.command == "publish":
        raise ParamError("publish writes into a DuckDB file or a PostgreSQL database")
    if job.target_table is not None:
        raise ParamError("--to-table names a table of a database; a file target has none")
    if not job.target.lower().endswith(".parquet") or job.partition_by is not None:
        raise ParamError(
            "--refresh keeps a Parquet file (FILE.parquet), a DuckDB or a PostgreSQL table; "
            "a folder of Parquet files is not refreshed in place"
        )
    return ParquetStore(con, job.target, job.key, job.time, parts[0])


def target_table(job: Any) -> str:
    """The name of the main table of a refresh (or the Parquet file's stem)."""
    from .endpoints import _duckdb_address

    if job.command == "publish":
        return "components"
    found = _duckdb_address(job.target) if ".duckdb:" in job.target else None
    if found:
        return found[1]
    if job.target_table:
        return job.target_table
    return Path(job.target).name[: -len(".parquet")] if job.target.endswith(".parquet") else ""


# ------------------------------------------------------------------------ the run


def run_refresh(job: Any, settings: dict[str, Any], outcome: Any, show_progress: bool) -> None:
    """Refresh a target: fingerprints, the plan, the changed keys answered in batches,
    revisions measured, and the one replacement."""
    from . import elt
    from .endpoints import literal, open_source, quoted

    if job.engine != "duckdb":
        raise ParamError("--refresh and publish run on the duckdb engine")
    clashes = [c for c in job.key if c.lower() in (*LEDGER_COLUMNS, *REVISION_COLUMNS)]
    if clashes:
        raise ParamError(
            f"the key column {quoted(clashes[0])} has the name of a column of the ledger or "
            "the revisions; rename it in the input"
        )
    outcome.refreshed = True
    elt._clear_killed_work()
    work = tempfile.mkdtemp(prefix=f"{elt.WORK_PREFIX}{os.getpid()}-")
    con = elt._connection(work)
    store, opened = None, False
    try:
        source = open_source(con, job.source, job.source_table, job.source_query)
        if job.command == "publish":
            from .publish import parts_of

            parts = parts_of(job, settings, outcome, source)
        else:
            table = target_table(job)

            def answer(con: Any) -> Any:
                return elt.answer_batch(con, job, settings, outcome)

            parts = [Part(table, answer, revised="adjusted" in elt.answer_columns(job.function))]
        store = open_store(con, job, parts)
        store.open()
        opened = True
        relation = elt._source_rows(con, job, work, source)
        elt._check_columns(con, relation, job)
        text = arguments_text(job, settings)
        # on_error decides whether a run goes on, never a split series' numbers
        hashed = arguments_text(job, {n: v for n, v in settings.items() if n != "on_error"})
        digest = hashlib.sha256(hashed.encode()).hexdigest()
        now = datetime.datetime.now(datetime.UTC).replace(tzinfo=None, microsecond=0)
        refresh_id = f"{now:%Y%m%dT%H%M%S}-{uuid.uuid4().hex[:8]}"
        fingerprints = fingerprint_sql(
            relation, job.key, job.time, job.value, job.given.get("outside_columns") or ()
        )
        con.execute(f"CREATE TEMP TABLE tide_now AS {fingerprints}")
        previous = store.ledger()
        outcome.refresh_note = store.note
        if previous is not None:
            con.register("tide_before_rows", previous)
            con.execute("CREATE TEMP TABLE tide_before AS SELECT * FROM tide_before_rows")
            con.unregister("tide_before_rows")
        else:
            con.execute(
                "CREATE TEMP TABLE tide_before AS SELECT *, '' AS arguments_hash, "
                "'' AS arguments, 0::BIGINT AS rows_out, '' AS status, '' AS refresh_id, "
                "TIMESTAMP '2000-01-01' AS refreshed_at FROM tide_now LIMIT 0"
            )
        nulls = _plan(con, job.key, digest)
        counts = dict(con.sql("SELECT decision, count(*) FROM tide_plan GROUP BY ALL").fetchall())
        outcome.keys_new = counts.get("new", 0)
        outcome.keys_recomputed = outcome.keys_new + counts.get("changed", 0)
        outcome.keys_reused = counts.get("reused", 0)
        outcome.keys_dropped = counts.get("dropped", 0)
        outcome.keys, outcome.rows_in = con.sql(
            "SELECT count(*), coalesce(sum(rows_in), 0) FROM tide_now"
        ).fetchall()[0]
        con.execute(f"CREATE TEMP TABLE tide_answered ({_answered_columns(con, job.key)})")
        if outcome.keys_recomputed:
            wanted = ", ".join(quoted(c) for c in job.source_columns)
            todo = os.path.join(work, "todo.parquet")
            match = _match("p", "r", job.key, nulls)
            con.execute(
                f"COPY (SELECT {', '.join('r.' + c for c in wanted.split(', '))} "
                f"FROM {relation} AS r WHERE EXISTS (SELECT 1 FROM tide_plan AS p "
                f"WHERE p.decision IN ('new', 'changed') AND {match})) "
                f"TO {literal(todo)} (FORMAT parquet)"
            )
            todo_rows = f"read_parquet({literal(todo)})"
            batches = elt._share_out(con, job, todo_rows, work)
            progress = elt._Progress(batches.keys, show_progress)
            try:
                for _batch, keys, rows in elt._each_batch(con, job, todo_rows, batches):
                    for index, part in enumerate(parts):
                        answered = part.answer(con)
                        if index == 0:
                            _count_answer(con, job, answered)
                        store.write(part, answered)
                        del answered
                    outcome.batches += 1
                    progress.advance(keys, rows)
            finally:
                progress.close()
        ledger = _new_ledger(con, job.key, digest, text, refresh_id, now, nulls)
        revisions = None
        for part in parts:
            if part.revised:
                per_key = store.revisions(part, nulls)
                revisions = _revision_rows(con, job.key, per_key, refresh_id, now, outcome)
        con.register("tide_ledger_rows", ledger)
        _account(con, job, outcome)
        con.execute(
            "CREATE TEMP TABLE tide_gone AS SELECT "
            + ", ".join(quoted(k) for k in job.key)
            + " FROM tide_plan WHERE decision IN ('changed', 'dropped')"
        )
        gone = con.sql("SELECT * FROM tide_gone").to_arrow_table()
        before, after = [], []
        if job.command == "publish":
            from .publish import view_statements

            before, after = view_statements(job, store.place, source)
        store.commit(gone, ledger, revisions, not outcome.keys_reused, nulls, before, after)
        opened = False
        if outcome.keys_kept:
            outcome.exit_code = elt.EXIT_KEPT
    finally:
        if opened and store is not None:
            store.abort()
        if store is not None:
            store.close()
        con.close()
        shutil.rmtree(work, ignore_errors=True)


def _plan(con: Any, key: Sequence[str], digest: str) -> bool:
    """``tide_plan``: each key of now and before with its decision (new, changed, reused,
    dropped). Returns whether any key value is NULL (then keys are matched NULL-safe)."""
    from .endpoints import literal

    nulls = any(
        con.sql(
            f"SELECT count(*) FILTER (WHERE {_q(k)} IS NULL) FROM (SELECT {_q(k)} FROM tide_now "
            f"UNION ALL SELECT {_q(k)} FROM tide_before)"
        ).fetchall()[0][0]
        for k in key
    )
    keys = ", ".join(f"coalesce(n.{_q(k)}, b.{_q(k)}) AS {_q(k)}" for k in key)
    same = (
        "n.rows_in = b.rows_in AND n.first_time IS NOT DISTINCT FROM b.first_time "
        "AND n.last_time IS NOT DISTINCT FROM b.last_time AND n.values_hash = b.values_hash "
        f"AND b.arguments_hash = {literal(digest)}"
    )
    con.execute(
        f"CREATE TEMP TABLE tide_plan AS SELECT {keys}, CASE WHEN b.tide_seen IS NULL THEN 'new' "
        f"WHEN n.tide_seen IS NULL THEN 'dropped' WHEN {same} THEN 'reused' ELSE 'changed' END "
        "AS decision FROM (SELECT *, true AS tide_seen FROM tide_now) AS n FULL JOIN "
        "(SELECT *, true AS tide_seen FROM tide_before) AS b ON " + _match("n", "b", key, True)
    )
    return nulls


def _answered_columns(con: Any, key: Sequence[str]) -> str:
    columns = [f"{_q(k)} {t}" for k, t in _key_types(con, key)]
    return ", ".join([*columns, "rows_out BIGINT", "status VARCHAR"])


def _count_answer(con: Any, job: Any, answered: Any) -> None:
    """Per key of a batch: its rows out and its status (the first that is not ok)."""
    keys = ", ".join(_q(k) for k in job.key)
    con.register("tide_answer_rows", answered)
    try:
        con.execute(
            f"INSERT INTO tide_answered SELECT {keys}, count(*), coalesce(any_value(status) "
            "FILTER (WHERE NOT (status = 'ok' OR starts_with(status, 'ok; '))), "
            f"any_value(status)) FROM tide_answer_rows GROUP BY {keys}"
        )
    finally:
        con.unregister("tide_answer_rows")


def _new_ledger(con: Any, key: Sequence[str], digest: str, text: str, refresh_id: str,
                now: datetime.datetime, nulls: bool) -> Any:  # fmt: skip
    """The ledger after this refresh: the recomputed keys' fingerprints now, the reused
    keys' as they were (when and with which arguments they were computed)."""
    from .endpoints import literal

    keys = ", ".join(f"p.{_q(k)}" for k in key)
    stamp = f"TIMESTAMP {literal(now.isoformat(sep=' '))}"
    return con.sql(
        f"SELECT {keys}, n.rows_in, n.first_time, n.last_time, n.values_hash, "
        f"{literal(digest)} AS arguments_hash, {literal(text)} AS arguments, "
        f"coalesce(a.rows_out, 0)::BIGINT AS rows_out, a.status, {literal(refresh_id)} AS "
        f"refresh_id, {stamp} AS refreshed_at FROM tide_plan AS p "
        f"JOIN tide_now AS n ON {_match('p', 'n', key, nulls)} "
        f"LEFT JOIN tide_answered AS a ON {_match('p', 'a', key, nulls)} "
        "WHERE p.decision IN ('new', 'changed') "
        f"UNION ALL SELECT {keys}, b.rows_in, b.first_time, b.last_time, b.values_hash, "
        "b.arguments_hash, b.arguments, b.rows_out::BIGINT, b.status, b.refresh_id, "
        "b.refreshed_at::TIMESTAMP FROM tide_plan AS p "
        f"JOIN tide_before AS b ON {_match('p', 'b', key, nulls)} WHERE p.decision = 'reused'"
    ).to_arrow_table()


def _account(con: Any, job: Any, outcome: Any) -> None:
    """The run's counts over every key of the target after the refresh: rows out, keys
    split and kept with a status (the reused keys as their ledger rows say)."""
    from .elt import _list

    outcome.rows_out, outcome.keys_kept = con.sql(
        "SELECT coalesce(sum(rows_out), 0), count(*) FILTER (WHERE NOT (status = 'ok' OR "
        "starts_with(status, 'ok; '))) FROM tide_ledger_rows"
    ).fetchall()[0]
    outcome.keys_split = outcome.keys - outcome.keys_kept
    keys = ", ".join(_q(k) for k in job.key)
    kept = con.sql(
        f"SELECT {keys}, status FROM tide_ledger_rows WHERE NOT (status = 'ok' OR "
        f"starts_with(status, 'ok; ')) ORDER BY {keys}"
    ).fetchall()
    outcome.bad_series = []
    _list(outcome, job, kept)


def _revision_rows(con: Any, key: Sequence[str], per_key: Any, refresh_id: str,
                   now: datetime.datetime, outcome: Any) -> Any:  # fmt: skip
    """The revisions table's rows of this refresh: one per key compared and one over all
    keys (written even when nothing was compared, so every refresh is on record)."""
    from .endpoints import literal

    keys = ", ".join(_q(k) for k in key)
    nothing = ", ".join(f"NULL::{t} AS {_q(k)}" for k, t in _key_types(con, key))
    stamp = f"TIMESTAMP {literal(now.isoformat(sep=' '))}"
    if per_key is None:
        con.execute(
            f"CREATE OR REPLACE TEMP TABLE tide_revised AS SELECT {nothing}, 0::BIGINT AS "
            "points_compared, NULL::DOUBLE AS largest_change, NULL::DOUBLE AS mean_change, "
            "NULL::DOUBLE AS level LIMIT 0"
        )
    else:
        con.register("tide_revised_rows", per_key)
        con.execute(
            f"CREATE OR REPLACE TEMP TABLE tide_revised AS SELECT {keys}, "
            "points_compared::BIGINT AS points_compared, largest_change::DOUBLE AS "
            "largest_change, mean_change::DOUBLE AS mean_change, level::DOUBLE AS level "
            "FROM tide_revised_rows"
        )
        con.unregister("tide_revised_rows")
    head = f"{literal(refresh_id)} AS refresh_id, {stamp} AS refreshed_at"
    rows = con.sql(
        f"SELECT {head}, 'key' AS scope, {keys}, points_compared, largest_change, mean_change, "
        "level, largest_change / nullif(level, 0) AS largest_share, "
        "mean_change / nullif(level, 0) AS mean_share FROM tide_revised "
        f"UNION ALL SELECT {head}, 'all keys', {nothing}, "
        "coalesce(sum(points_compared), 0)::BIGINT, max(largest_change), "
        "sum(mean_change * points_compared) / nullif(sum(points_compared), 0), "
        "sum(level * points_compared) / nullif(sum(points_compared), 0), "
        "max(largest_change / nullif(level, 0)), "
        "sum(mean_change * points_compared) / nullif(sum(level * points_compared), 0) "
        "FROM tide_revised"
    ).to_arrow_table()
    overall = rows.slice(rows.num_rows - 1).to_pylist()[0]
    top = con.sql(
        f"SELECT {keys} FROM tide_revised ORDER BY largest_change DESC NULLS LAST LIMIT 1"
    ).fetchall()
    outcome.revisions = {
        "keys_revised": int(con.sql("SELECT count(*) FROM tide_revised").fetchall()[0][0]),
        "points_compared": overall["points_compared"],
        "largest_change": overall["largest_change"],
        "largest_change_key": (
            {k: _plain(v) for k, v in zip(key, top[0], strict=True)} if top else None
        ),
        "mean_change": overall["mean_change"],
        "level": overall["level"],
        "largest_share": overall["largest_share"],
        "mean_share": overall["mean_share"],
    }
    return rows


def _key_types(con: Any, key: Sequence[str]) -> list[tuple[str, str]]:
    types = {r[0]: r[1] for r in con.sql("DESCRIBE tide_now").fetchall()}
    return [(k, types[k]) for k in key]


def _plain(value: Any) -> Any:
    return value if isinstance(value, (int, float, str, bool, type(None))) else str(value)
