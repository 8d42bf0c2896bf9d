"""tidesplit: seasonal-trend decomposition (STL) of every series of a table, in SQL.

>>> import tidesplit
>>> con = tidesplit.connect()
>>> sorted(n for n in tidesplit.__all__)[:3]
['BatchResult', 'ParamError', 'Split']
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from .decompose import BatchResult, SplitError, split_batch
from .params import ParamError, SplitParams

if TYPE_CHECKING:
    import duckdb

__all__ = [
    "BatchResult",
    "ParamError",
    "Split",
    "SplitError",
    "SplitParams",
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


def __getattr__(name: str) -> Any:
    # pandas and duckdb load only when a front that needs them is first used.
    if name in ("split", "split_table", "Split", "profile", "outliers", "forecast"):
        from . import api

        return getattr(api, name)
    raise AttributeError(f"module 'tidesplit' has no attribute {name!r}")


def connect(database: str | None = None, **kwargs: Any) -> duckdb.DuckDBPyConnection:
    """A DuckDB connection with every ``tide_*`` function registered.

    >>> connect().sql("SELECT 2").fetchall()
    [(2,)]
    """
    from .duckdb_ext import connect as _connect

    return _connect(database, **kwargs)


def register(con: duckdb.DuckDBPyConnection, *, replace: bool = False) -> duckdb.DuckDBPyConnection:
    """Register the ``tide_*`` functions on an existing DuckDB connection (idempotent).

    >>> import duckdb
    >>> register(duckdb.connect()).sql("SELECT 3").fetchall()
    [(3,)]
    """
    from .duckdb_ext import register as _register

    return _register(con, replace=replace)
