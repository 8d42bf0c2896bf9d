"""tidesplit: seasonal-trend decomposition (STL) of every series of a table, in SQL.

``import tidesplit`` is light: numba, DuckDB, pandas and pyarrow load when a function that
needs them is first used.

>>> import tidesplit
>>> con = tidesplit.connect()
>>> sorted(n for n in tidesplit.__all__)[:3]
['BatchResult', 'ParamError', 'Split']
"""

from __future__ import annotations

from importlib import import_module
from typing import TYPE_CHECKING, Any

from .errors import ParamError, SplitError

if TYPE_CHECKING:
    import duckdb

__all__ = [
    "BatchResult",
    "ParamError",
    "Split",
    "SplitError",
    "SplitParams",
    "audit",
    "connect",
    "forecast",
    "outliers",
    "profile",
    "register",
    "split",
    "split_batch",
    "split_table",
]

__version__ = "0.1.0"

# Where each public name lives; its module is imported on first use.
_HOMES = {
    "split": "api",
    "split_table": "api",
    "Split": "api",
    "profile": "api",
    "outliers": "api",
    "forecast": "api",
    "audit": "api",
    "split_batch": "batch_split",
    "BatchResult": "batch_split",
    "SplitParams": "params",
}


def __getattr__(name: str) -> Any:
    if name in _HOMES:
        return getattr(import_module(f".{_HOMES[name]}", __name__), name)
    raise AttributeError(f"module 'tidesplit' has no attribute {name!r}")


def connect(database: str | None = None, **kwargs: Any) -> duckdb.DuckDBPyConnection:
    """A DuckDB connection with every ``tide_*`` function registered.

    Parameters
    ----------
    database : str, optional
        A DuckDB file; an in-memory database when left out.
    **kwargs
        Passed to ``duckdb.connect``.

    Returns
    -------
    duckdb.DuckDBPyConnection

    Examples
    --------
    >>> connect().sql("SELECT 2").fetchall()
    [(2,)]
    """
    from .duckdb_ext import connect as _connect

    return _connect(database, **kwargs)


def register(con: duckdb.DuckDBPyConnection, *, replace: bool = False) -> duckdb.DuckDBPyConnection:
    """Register the ``tide_*`` functions on an existing DuckDB connection (idempotent).

    Parameters
    ----------
    con : duckdb.DuckDBPyConnection
        The connection, or a cursor of one (each cursor needs its own call: DuckDB's
        temporary macros live on one connection; the UDFs are shared and made once).
    replace : bool
        Make the UDFs again even where they exist.

    Returns
    -------
    duckdb.DuckDBPyConnection
        ``con``, for chaining.

    Examples
    --------
    >>> import duckdb
    >>> register(duckdb.connect()).sql("SELECT 3").fetchall()
    [(3,)]
    """
    from .duckdb_ext import register as _register

    return _register(con, replace=replace)
