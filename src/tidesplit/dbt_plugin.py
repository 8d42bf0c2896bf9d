"""The dbt front: a dbt-duckdb plugin that lets dbt SQL models call the ``tide_*`` functions.

Name it in the DuckDB output of ``profiles.yml``::

    plugins:
      - module: tidesplit.dbt_plugin

dbt-duckdb opens one DuckDB connection per run and gives each model a cursor of it. The
UDFs live on the connection and so reach every cursor; the macros in ``sql/`` are TEMP
macros, which live on the cursor that made them only, so each cursor gets its own (a few
milliseconds). Models that call our functions must be materialised as tables: a view over
a Python function can be read only inside a process that registered it, so no other client
(a BI tool, the DuckDB shell) could read it.
"""

from __future__ import annotations

from typing import Any

import duckdb
from dbt.adapters.duckdb.plugins import BasePlugin

from .duckdb_ext import register


class Plugin(BasePlugin):
    """Registers the ``tide_*`` functions on dbt-duckdb's connection and on each cursor.

    The plugin takes no settings of its own: any given under ``config:`` is refused by name
    (dbt-duckdb also hands every plugin the profile's ``settings``, which are DuckDB's and
    pass through untouched).

    Examples
    --------
    >>> import duckdb
    >>> plugin = Plugin(name="tidesplit", plugin_config={})
    >>> con = duckdb.connect()
    >>> plugin.configure_connection(con)
    >>> cursor = con.cursor()
    >>> plugin.configure_cursor(cursor)
    >>> sql = "SELECT len(tide_split_list([1, 3, 2, 4, 1, 3, 2, 4]::DOUBLE[], 2).trend)"
    >>> cursor.sql(sql).fetchall()
    [(8,)]
    """

    def initialize(self, plugin_config: dict[str, Any]) -> None:
        """Refuse settings given to the plugin; the profile's DuckDB settings pass through."""
        duckdb_settings = (self.creds.settings if self.creds is not None else None) or {}
        ours = sorted(
            key
            for key, value in plugin_config.items()
            if key not in duckdb_settings or duckdb_settings[key] != value
        )
        if ours:
            raise ValueError(
                f"the tidesplit dbt plugin takes no settings; remove {', '.join(ours)} from "
                "its config in profiles.yml (the functions' arguments go in each model's SQL)"
            )

    def configure_connection(self, conn: duckdb.DuckDBPyConnection) -> None:
        """Register the UDFs (and macros) on the run's connection."""
        register(conn)

    def configure_cursor(self, cursor: duckdb.DuckDBPyConnection) -> None:
        """Make the TEMP macros on a cursor models run on; the UDFs are there already."""
        register(cursor)
