"""Publish for BI tools: components, profiles and seasonal factors as plain tables of a
DuckDB file or a PostgreSQL schema, with plain-SQL views over them (``sql/publish_views.sql``).

``tidesplit publish`` is a refresh (``refresh``) with four parts per key: the split
(``components``), the profile (``profiles``), the seasonal part of the latest cycle
(``latest_cycle``) and its projection over the next cycle (``next_cycle``). The views are
dropped and made again in the transaction that replaces the changed keys' rows, so a
reader sees the whole of one refresh or the whole of the previous one.
"""

from __future__ import annotations

from importlib import resources
from typing import Any

from .errors import ParamError
from .refresh import Part, ledger_name

TABLES = ("components", "profiles", "latest_cycle", "next_cycle")
VIEWS = ("adjusted_series", "seasonal_factors", "projected_factors", "provisional_adjusted",
         "last_refresh")  # fmt: skip
VIEWS_FILE = "publish_views.sql"
OK_STATUS = "(status = 'ok' OR starts_with(status, 'ok; '))"


def view_text() -> str:
    """The view definitions as shipped (``sql/publish_views.sql``), names in braces.

    >>> "CREATE VIEW {adjusted_series}" in view_text()
    True
    """
    return resources.files("tidesplit.sql").joinpath(VIEWS_FILE).read_text()


def _q(name: str) -> str:
    from .endpoints import quoted

    return quoted(name)


def _named(settings: dict[str, Any], drop: tuple[str, ...] = (), **more: Any) -> str:
    from .elt import _sql_value

    chosen = {n: v for n, v in settings.items() if n not in drop}
    chosen.update(more)
    return "".join(f", {n} := {_sql_value(v)}" for n, v in chosen.items())


def parts_of(job: Any, settings: dict[str, Any], outcome: Any, source: Any) -> list[Part]:
    """The four parts of a publish, answered from ``tide_batch_rows``."""
    from . import elt
    from .endpoints import literal

    if job.partition_by is not None or job.target_table is not None:
        raise ParamError("publish names its own tables: no --to-table or --partition-by")
    _raw_table(job, source)  # refused early when there is none
    key = "[" + ", ".join(literal(k) for k in job.key) + "]"
    columns = f"tide_batch_rows, {key}, {literal(job.time)}, {literal(job.value)}"
    keys = ", ".join(_q(k) for k in job.key)
    time = _q(job.time)
    quiet = _named(settings, ("fill_gaps", "on_error"), on_error="keep")
    cycles: dict[str, Any] = {}

    def components(con: Any) -> Any:
        # one split on the whole regular grid serves both the components (the input's rows:
        # a gap's rows only when fill_gaps was asked for) and the latest cycle below; the
        # inserted rows change no number of the others (tested against tide_split)
        import pyarrow.compute as pc

        cycles.clear()
        filled = elt.answer_batch(con, job, {**settings, "fill_gaps": True}, outcome)
        cycles["filled"] = filled
        if settings.get("fill_gaps"):
            return filled
        return filled.filter(pc.invert(pc.fill_null(filled["inserted"], False)))

    def profiles(con: Any) -> Any:
        return con.sql(f"SELECT * FROM tide_profile({columns}{quiet})").to_arrow_table()

    def latest_cycle(con: Any) -> Any:
        # on the regular grid (gaps filled), so the last `period` rows are one whole cycle
        # and a row's cycle position is its place on the grid modulo the period, as in
        # tide_profile's peak_position
        con.register("tide_filled_rows", cycles.pop("filled"))
        try:
            rows = con.sql(
                f"""
                SELECT {keys}, {time}, grid_index % period AS cycle_position, period,
                       seasonal, boxcox_lambda
                FROM (SELECT *, row_number() OVER (PARTITION BY {keys} ORDER BY {time}) - 1
                                AS grid_index,
                             count(*) OVER (PARTITION BY {keys}) AS grid_points
                      FROM tide_filled_rows WHERE {OK_STATUS})
                WHERE grid_index >= grid_points - period
                """
            ).to_arrow_table()
        finally:
            con.unregister("tide_filled_rows")
        cycles["latest"] = rows
        return rows

    def next_cycle(con: Any) -> Any:
        latest = cycles["latest"]
        con.register("tide_latest_cycle", latest)
        try:
            longest = con.sql("SELECT coalesce(max(period), 1) FROM tide_latest_cycle")
            steps = int(longest.fetchall()[0][0])
            # the times of the next cycle, as tide_forecast's calendar gives them; the
            # seasonal part carried forward from the latest cycle (Hyndman & Athanasopoulos,
            # Forecasting: Principles and Practice, 3rd ed., section 5.7: the seasonal
            # component forecast by the seasonal naive method)
            # only the future times are read: the effects' arguments are left out (the
            # forecast takes no outside columns, whose future values are unknown)
            effects = ("calendar_effects", "easter_days", "special_days", "outside_columns")
            ahead = _named(settings, ("fill_gaps", "on_error", *effects), on_error="keep",
                           steps_ahead=steps)  # fmt: skip
            return con.sql(
                f"""
                SELECT {keys}, f.{time}, f.steps_ahead, c.cycle_position, c.period,
                       c.seasonal, c.boxcox_lambda
                FROM (SELECT {keys}, {time}, steps_ahead
                      FROM tide_forecast({columns}{ahead})) AS f
                JOIN (SELECT *, row_number() OVER (PARTITION BY {keys} ORDER BY {time})
                                AS steps_ahead FROM tide_latest_cycle) AS c
                USING ({keys}, steps_ahead)
                """
            ).to_arrow_table()
        finally:
            con.unregister("tide_latest_cycle")

    return [
        Part("components", components, revised=True),
        Part("profiles", profiles),
        Part("latest_cycle", latest_cycle),
        Part("next_cycle", next_cycle),
    ]


def _raw_table(job: Any, source: Any) -> str:
    """Where raw rows that arrive between refreshes are read from: ``--raw-table``, or
    the source itself when it is a table of the published database."""
    import os

    from .endpoints import _duckdb_address, is_postgres

    if job.raw_table:
        return job.raw_table
    same_server = is_postgres(job.source) and job.source == job.target
    if same_server and job.source_table:
        return job.source_table
    found = _duckdb_address(job.source) if ".duckdb:" in job.source else None
    if found and os.path.realpath(found[0]) == os.path.realpath(job.target):
        return found[1]
    raise ParamError(
        "publish makes a view of raw rows newer than the last refresh: give --raw-table, the "
        "table of the published database new rows land in (or publish from such a table)"
    )


def view_statements(job: Any, place: Any, source: Any) -> tuple[list[str], list[str]]:
    """The statements that drop the views (before the tables change) and make them again
    (after), in the refresh's transaction."""
    from .endpoints import is_postgres

    raw = _raw_table(job, source)
    # views by their full name (a DuckDB file is attached under an alias of our own);
    # the tables they read by their name inside the file, which any client can open
    names = {n: place.name(n, inside=True) for n in TABLES}
    names.update({n: place.name(n) for n in VIEWS})
    names["refresh_keys"] = place.name(ledger_name("components"), inside=True)
    names["raw"] = _q(raw) if is_postgres(job.target) else f"main.{_q(raw)}"
    names["keys"] = ", ".join(_q(k) for k in job.key)
    names["time"], names["value"] = _q(job.time), _q(job.value)
    # statements split before the names go in: a name may hold a semicolon
    statements = [s.strip() for s in _without_comments(view_text()).split(";")]
    before = [f"DROP VIEW IF EXISTS {place.name(v)}" for v in VIEWS]
    return before, [s.format(**names) for s in statements if s]


def _without_comments(text: str) -> str:
    return "\n".join(line for line in text.splitlines() if not line.lstrip().startswith("--"))
