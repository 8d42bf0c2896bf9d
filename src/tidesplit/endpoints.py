"""Where a job reads its series and where it writes its answer.

Sources: Parquet (a file, a glob or a hive-partitioned folder), CSV, a table of a DuckDB
file, a PostgreSQL table or query. Targets: one Parquet file, a folder of Parquet files
(partitioned by a column or not), a table of a DuckDB file, a PostgreSQL table.

Every target is written aside and put in place in one step only when the whole run has
succeeded: a file renamed over the old one, a folder exchanged with the old one, a table
renamed in the transaction that drops the old one. A run killed at any moment leaves the
previous output as it was; what it wrote aside is removed by the next run.

PostgreSQL moves through the ADBC driver (``adbc-driver-postgresql``): it reads a query as a
stream of Arrow record batches and writes Arrow tables with PostgreSQL's binary COPY, so no
row is converted to Python objects on either way.
"""

from __future__ import annotations

import contextlib
import ctypes
import glob
import hashlib
import os
import shutil
import tempfile
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import duckdb
import pyarrow as pa

from .errors import ParamError


class UnreachableError(RuntimeError):
    """A source or target that cannot be opened, read or written."""


def quoted(name: str) -> str:
    """An identifier quoted for DuckDB and PostgreSQL alike: nothing in it is read as SQL.

    >>> quoted('a"b')
    '"a""b"'
    """
    return '"' + name.replace('"', '""') + '"'


def literal(text: str) -> str:
    """A SQL string literal.

    >>> literal("it's")
    "'it''s'"
    """
    return "'" + text.replace("'", "''") + "'"


POSTGRES_PREFIXES = ("postgresql://", "postgres://")
LEDGER_SUFFIX = "_refresh_keys"  # a refresh's ledger beside a table (``refresh``)
DUCKDB_MARK = ".duckdb:"


def is_postgres(address: str) -> bool:
    """Whether an address names a PostgreSQL database.

    >>> is_postgres("postgresql://etl@db:5432/warehouse"), is_postgres("sales.parquet")
    (True, False)
    """
    return address.lower().startswith(POSTGRES_PREFIXES)


def shown(address: str) -> str:
    """An address as it may be printed: a password in a PostgreSQL address is hidden.

    >>> shown("postgresql://etl:secret@db/warehouse")
    'postgresql://etl:***@db/warehouse'
    """
    if not is_postgres(address) or "@" not in address:
        return address
    scheme, rest = address.split("://", 1)
    who, where = rest.rsplit("@", 1)
    if ":" in who:
        who = who.split(":", 1)[0] + ":***"
    return f"{scheme}://{who}@{where}"


def _postgres(address: str) -> Any:
    """An ADBC connection to PostgreSQL, or ``UnreachableError``."""
    try:
        import adbc_driver_postgresql.dbapi as postgres
    except ImportError as error:  # pragma: no cover - the extra is installed in tests
        raise UnreachableError(
            "PostgreSQL needs the ADBC driver: pip install 'tidesplit[elt]'"
        ) from error
    try:
        return postgres.connect(address)
    except Exception as error:
        raise UnreachableError(f"cannot connect to {shown(address)}: {error}") from error


def _duckdb_address(address: str) -> tuple[str, str] | None:
    """``(file, table)`` of a ``file.duckdb:table`` address, else None."""
    if DUCKDB_MARK not in address:
        return None
    path, table = address.split(DUCKDB_MARK, 1)
    if not table:
        raise ParamError(f"{address}: name the table after the colon (warehouse.duckdb:sales)")
    return path + ".duckdb", table


# ---------------------------------------------------------------------------- sources


@dataclass
class Source:
    """A source: how DuckDB reads it (``relation``), or a PostgreSQL query to stream."""

    address: str
    relation: str = ""  # SQL that DuckDB reads the rows from (a FROM item)
    postgres_query: str = ""  # set for PostgreSQL: the query whose rows are streamed

    @property
    def is_postgres(self) -> bool:
        return bool(self.postgres_query)


def open_source(
    con: duckdb.DuckDBPyConnection,
    address: str,
    table: str | None = None,
    query: str | None = None,
) -> Source:
    """Resolve a source address on a DuckDB connection (attaching a DuckDB file read-only).

    >>> import duckdb, pyarrow.parquet as pq, pyarrow as pa, tempfile, os
    >>> folder = tempfile.mkdtemp()
    >>> pq.write_table(pa.table({"k": [1]}), os.path.join(folder, "a.parquet"))
    >>> source = open_source(duckdb.connect(), os.path.join(folder, "a.parquet"))
    >>> source.relation.startswith("read_parquet(")
    True
    """
    if is_postgres(address):
        if (table is None) == (query is None):
            raise ParamError("a PostgreSQL source takes --from-table or --from-query (one)")
        statement = query if query is not None else f"SELECT * FROM {quoted(table)}"
        return Source(address, postgres_query=statement)
    if query is not None:
        raise ParamError("--from-query reads PostgreSQL; for files name the file (and table)")
    in_duckdb = _duckdb_address(address)
    if in_duckdb is not None or address.endswith(".duckdb"):
        path, name = in_duckdb or (address, table)
        if name is None:
            raise ParamError(f"{address}: name the table, as {address}:TABLE")
        if in_duckdb is not None and table is not None:
            raise ParamError("the table is named twice: in the address and in --from-table")
        if not os.path.isfile(path):
            raise UnreachableError(f"no DuckDB file {path}")
        alias = attach(con, path, read_only=True)
        found = con.execute(
            "SELECT count(*) FROM duckdb_tables() WHERE database_name = ? AND table_name = ? "
            "UNION ALL SELECT count(*) FROM duckdb_views() WHERE database_name = ? "
            "AND view_name = ?",
            [alias, name, alias, name],
        ).fetchall()
        if not any(n for (n,) in found):
            raise UnreachableError(f"no table {name!r} in {path}")
        return Source(address, relation=f"{quoted(alias)}.{quoted(name)}")
    if table is not None:
        raise ParamError("--from-table names a table of a database; a file source has none")
    lowered = address.lower()
    if os.path.isdir(address):
        pattern = os.path.join(address, "**", "*.parquet")
        if not glob.glob(pattern, recursive=True):
            raise UnreachableError(f"no Parquet files under {address}")
        return Source(
            address, relation=f"read_parquet({literal(pattern)}, hive_partitioning = true)"
        )
    if not glob.glob(address, recursive=True):
        raise UnreachableError(f"no file matches {address}")
    if lowered.endswith((".csv", ".csv.gz", ".tsv", ".txt")):
        return Source(address, relation=f"read_csv({literal(address)})")
    return Source(address, relation=f"read_parquet({literal(address)})")


@contextlib.contextmanager
def stream_postgres(source: Source, columns: list[str]) -> Iterator[Any]:
    """The chosen columns of a PostgreSQL source as a stream of Arrow record batches (a
    reader, open while the context is)."""
    connection = _postgres(source.address)
    wanted = ", ".join(quoted(c) for c in columns)
    try:
        with connection.cursor() as cursor:
            try:
                cursor.execute(f"SELECT {wanted} FROM ({source.postgres_query}) AS tide_source")
                reader = cursor.fetch_record_batch()
            except Exception as error:
                raise UnreachableError(f"cannot read {shown(source.address)}: {error}") from error
            yield reader
    finally:
        connection.close()


def attach(con: duckdb.DuckDBPyConnection, path: str, *, read_only: bool) -> str:
    """Attach a DuckDB file once per connection; the alias it is known by.

    A file attached read-only is attached again for writing when a later call needs it
    (the source and the target can be one file).

    >>> import duckdb, os, tempfile
    >>> con, path = duckdb.connect(), os.path.join(tempfile.mkdtemp(), "w.duckdb")
    >>> alias = attach(con, path, read_only=False)
    >>> alias == attach(con, path, read_only=True), alias.startswith("tide_db_")
    (True, True)
    """
    real = os.path.realpath(path)
    alias = "tide_db_" + hashlib.sha1(real.encode()).hexdigest()[:12]
    found = con.execute(
        "SELECT readonly FROM duckdb_databases() WHERE database_name = ?", [alias]
    ).fetchall()
    if found and (read_only or not found[0][0]):
        return alias
    if found:
        con.execute(f"DETACH {quoted(alias)}")
    try:
        options = " (READ_ONLY)" if read_only else ""
        con.execute(f"ATTACH {literal(real)} AS {quoted(alias)}{options}")
    except duckdb.Error as error:
        raise UnreachableError(f"cannot open {path}: {error}") from error
    return alias


# ---------------------------------------------------------------------------- targets


def _stage_name(table: str) -> str:
    """A fixed, harmless name for the table a run writes aside (at most 63 bytes, as
    PostgreSQL allows), the same for every run into one table so a leftover is found."""
    return "tide_stage_" + hashlib.sha1(table.encode()).hexdigest()[:20]


def _without_nested(con: duckdb.DuckDBPyConnection, result: pa.Table) -> pa.Table:
    """Lists, structs and maps as JSON text, which every PostgreSQL column type can hold."""
    nested = [
        f.name for f in result.schema if pa.types.is_nested(f.type) or pa.types.is_map(f.type)
    ]
    if not nested:
        return result
    con.register("tide_nested", result)
    try:
        replaced = ", ".join(f"to_json({quoted(n)})::VARCHAR AS {quoted(n)}" for n in nested)
        return con.sql(f"SELECT * REPLACE ({replaced}) FROM tide_nested").to_arrow_table()
    finally:
        con.unregister("tide_nested")


class Target:
    """Where the answer goes. ``open`` checks it can be written and clears what a killed
    run left; ``write`` takes one batch's answer; ``commit`` puts the whole in place;
    ``abort`` drops what was written aside."""

    def __init__(self, address: str) -> None:
        self.address = address

    def open(self) -> None:  # pragma: no cover - every target overrides it
        raise NotImplementedError

    def write(self, result: pa.Table, batch: int) -> None:  # pragma: no cover
        raise NotImplementedError

    def commit(self) -> None:  # pragma: no cover
        raise NotImplementedError

    def abort(self) -> None:  # pragma: no cover
        raise NotImplementedError


def usual_mode(path: str, folder: bool = False) -> None:
    """Give a file (or folder) made by ``tempfile`` (private: 0600, 0700) the mode a plain
    new file would have under the umask, since it becomes the output.

    >>> import os, tempfile
    >>> handle, path = tempfile.mkstemp(); os.close(handle); usual_mode(path)
    >>> oct(os.stat(path).st_mode & 0o600)
    '0o600'
    """
    mask = os.umask(0)
    os.umask(mask)
    os.chmod(path, (0o777 if folder else 0o666) & ~mask)


def _fsync(path: str) -> None:
    descriptor = os.open(path, os.O_RDONLY)
    try:
        os.fsync(descriptor)
    finally:
        os.close(descriptor)


class ParquetFile(Target):
    """One Parquet file, written to a hidden file beside it and renamed over it."""

    def open(self) -> None:
        import pyarrow.parquet as pq  # noqa: F401 - fail early if Parquet is missing

        target = Path(self.address).absolute()
        self.folder = target.parent
        if not self.folder.is_dir():
            raise UnreachableError(f"no folder {self.folder} to write {target.name} into")
        for stale in self.folder.glob(f".{target.name}.tide-*"):  # a refresh's are folders
            if stale.is_dir():
                shutil.rmtree(stale, ignore_errors=True)
            else:
                stale.unlink(missing_ok=True)
        try:
            handle, name = tempfile.mkstemp(
                prefix=f".{target.name}.tide-", suffix=".tmp", dir=self.folder
            )
        except OSError as error:
            raise UnreachableError(f"cannot write into {self.folder}: {error}") from error
        os.close(handle)
        usual_mode(name)
        self.aside, self.target, self.writer = name, str(target), None

    def write(self, result: pa.Table, batch: int) -> None:
        import pyarrow.parquet as pq

        if self.writer is None:
            self.writer = pq.ParquetWriter(self.aside, result.schema)
        self.writer.write_table(result.cast(self.writer.schema))

    def commit(self) -> None:
        if self.writer is not None:
            self.writer.close()
        _fsync(self.aside)
        os.replace(self.aside, self.target)
        _fsync(str(self.folder))

    def abort(self) -> None:
        if self.writer is not None:
            self.writer.close()
        Path(self.aside).unlink(missing_ok=True)


def _exchange(first: str, second: str) -> bool:
    """Swap two paths in one step (Linux ``renameat2`` with RENAME_EXCHANGE); False where
    the system cannot."""
    try:
        libc = ctypes.CDLL(None, use_errno=True)
        renameat2 = libc.renameat2
    except (OSError, AttributeError):
        return False
    at_cwd, rename_exchange = -100, 2
    done = renameat2(at_cwd, first.encode(), at_cwd, second.encode(), rename_exchange)
    return done == 0


class ParquetFolder(Target):
    """A folder of Parquet files, hive-partitioned by ``partition_by`` if given, written
    to a hidden folder beside it and exchanged with it in one step."""

    def __init__(self, address: str, partition_by: str | None, con: duckdb.DuckDBPyConnection):
        super().__init__(address)
        self.partition_by, self.con = partition_by, con

    def open(self) -> None:
        target = Path(self.address.rstrip("/") or "/").absolute()
        parent = target.parent
        if not parent.is_dir():
            raise UnreachableError(f"no folder {parent} to write {target.name} into")
        if target.exists() and not target.is_dir():
            raise UnreachableError(f"{target} is a file; a folder target replaces a folder")
        previous = parent / f".{target.name}.tide-previous"
        if not target.exists() and previous.is_dir():
            previous.rename(target)  # a run killed between the two renames of the fallback
        for stale in parent.glob(f".{target.name}.tide-*"):
            shutil.rmtree(stale, ignore_errors=True)
        try:
            self.aside = tempfile.mkdtemp(prefix=f".{target.name}.tide-", dir=parent)
        except OSError as error:
            raise UnreachableError(f"cannot write into {parent}: {error}") from error
        usual_mode(self.aside, folder=True)
        self.target, self.previous = str(target), str(previous)

    def write(self, result: pa.Table, batch: int) -> None:
        if self.partition_by is None:
            import pyarrow.parquet as pq

            pq.write_table(result, os.path.join(self.aside, f"part-{batch:06d}.parquet"))
            return
        self.con.register("tide_result_out", result)
        try:
            self.con.execute(
                f"COPY tide_result_out TO {literal(self.aside)} (FORMAT parquet, "
                f"PARTITION_BY ({quoted(self.partition_by)}), OVERWRITE_OR_IGNORE, "
                f"FILENAME_PATTERN {literal(f'part-{batch:06d}-{{i}}')})"
            )
        finally:
            self.con.unregister("tide_result_out")

    def commit(self) -> None:
        for root, _folders, files in os.walk(self.aside):
            for name in files:
                _fsync(os.path.join(root, name))
        if not os.path.exists(self.target):
            os.rename(self.aside, self.target)
        elif _exchange(self.aside, self.target):
            shutil.rmtree(self.aside, ignore_errors=True)  # now the previous output
        else:  # two renames; ``open`` of the next run restores a kill between them
            os.rename(self.target, self.previous)
            os.rename(self.aside, self.target)
            shutil.rmtree(self.previous, ignore_errors=True)

    def abort(self) -> None:
        shutil.rmtree(self.aside, ignore_errors=True)


class DuckDBTable(Target):
    """A table of a DuckDB file: written to a stage table of the same file, then renamed
    in the transaction that drops the previous table."""

    def __init__(self, address: str, con: duckdb.DuckDBPyConnection, table: str | None):
        super().__init__(address)
        in_duckdb = _duckdb_address(address)
        if in_duckdb is not None and table is not None:
            raise ParamError("the table is named twice: in the address and in --to-table")
        self.path, self.table = in_duckdb or (address, table)
        if self.table is None:
            raise ParamError(f"{address}: name the table, as {address}:TABLE")
        self.con = con

    def open(self) -> None:
        if not os.path.isdir(os.path.dirname(os.path.abspath(self.path))):
            raise UnreachableError(f"no folder to hold {self.path}")
        self.alias = attach(self.con, self.path, read_only=False)
        self.stage = f"{quoted(self.alias)}.main.{quoted(_stage_name(self.table))}"
        self.con.execute(f"DROP TABLE IF EXISTS {self.stage}")
        self.started = False

    def write(self, result: pa.Table, batch: int) -> None:
        self.con.register("tide_result_out", result)
        try:
            if self.started:
                self.con.execute(f"INSERT INTO {self.stage} SELECT * FROM tide_result_out")
            else:
                self.con.execute(f"CREATE TABLE {self.stage} AS SELECT * FROM tide_result_out")
                self.started = True
        finally:
            self.con.unregister("tide_result_out")

    def commit(self) -> None:
        final = f"{quoted(self.alias)}.main.{quoted(self.table)}"
        ledger = f"{quoted(self.alias)}.main.{quoted(self.table + LEDGER_SUFFIX)}"
        self.con.execute("BEGIN TRANSACTION")
        try:
            self.con.execute(f"DROP TABLE IF EXISTS {final}")
            # a full run leaves no ledger of a refresh that no longer describes the table
            self.con.execute(f"DROP TABLE IF EXISTS {ledger}")
            self.con.execute(f"ALTER TABLE {self.stage} RENAME TO {quoted(self.table)}")
            self.con.execute("COMMIT")
        except duckdb.Error:
            self.con.execute("ROLLBACK")
            raise
        self.con.execute(f"CHECKPOINT {quoted(self.alias)}")

    def abort(self) -> None:
        # should this fail, the next run into the same table drops the stage
        with contextlib.suppress(duckdb.Error):
            self.con.execute(f"DROP TABLE IF EXISTS {self.stage}")


class PostgresTable(Target):
    """A PostgreSQL table: batches appended to a stage table with binary COPY (ADBC), then
    renamed in the transaction that drops the previous table. The name is used as given
    (quoted) in the connection's search path; pick a schema with the address's
    ``options=-csearch_path%3Dschema``."""

    def __init__(self, address: str, table: str | None, con: duckdb.DuckDBPyConnection):
        super().__init__(address)
        if table is None:
            raise ParamError("a PostgreSQL target takes --to-table")
        self.table, self.con = table, con

    def open(self) -> None:
        self.connection = _postgres(self.address)
        self.stage = _stage_name(self.table)
        with self.connection.cursor() as cursor:
            cursor.execute(f"DROP TABLE IF EXISTS {quoted(self.stage)}")
        self.connection.commit()
        self.started = False

    def write(self, result: pa.Table, batch: int) -> None:
        flat = _without_nested(self.con, result)
        with self.connection.cursor() as cursor:
            cursor.adbc_ingest(self.stage, flat, mode="append" if self.started else "create")
        self.connection.commit()
        self.started = True

    def commit(self) -> None:
        with self.connection.cursor() as cursor:
            cursor.execute(f"DROP TABLE IF EXISTS {quoted(self.table)}")
            cursor.execute(f"DROP TABLE IF EXISTS {quoted(self.table + LEDGER_SUFFIX)}")
            cursor.execute(f"ALTER TABLE {quoted(self.stage)} RENAME TO {quoted(self.table)}")
        self.connection.commit()
        self.connection.close()

    def abort(self) -> None:
        try:
            self.connection.rollback()
            with self.connection.cursor() as cursor:
                cursor.execute(f"DROP TABLE IF EXISTS {quoted(self.stage)}")
            self.connection.commit()
        finally:
            self.connection.close()


def open_target(
    con: duckdb.DuckDBPyConnection,
    address: str,
    table: str | None = None,
    partition_by: str | None = None,
) -> Target:
    """The target an address names (not yet opened).

    >>> type(open_target(None, "out.parquet")).__name__
    'ParquetFile'
    """
    if partition_by is not None and (is_postgres(address) or DUCKDB_MARK in address):
        raise ParamError("--partition-by partitions a Parquet folder target")
    if is_postgres(address):
        return PostgresTable(address, table, con)
    if DUCKDB_MARK in address or address.endswith(".duckdb"):
        return DuckDBTable(address, con, table)
    if table is not None:
        raise ParamError("--to-table names a table of a database; a file target has none")
    if address.lower().endswith(".parquet") and partition_by is None:
        return ParquetFile(address)
    return ParquetFolder(address, partition_by, con)
