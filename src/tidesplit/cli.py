"""The ``tidesplit`` command line."""

from __future__ import annotations

import argparse
import os
import sys
import time
from collections.abc import Callable, Sequence

# The demo's two jobs, as a user would type them (the folder and database filled in).
DEMO_WEEKLY = [
    "split", "--from", "{folder}/weekly_units.parquet", "--to", "{database}:weekly_split",
    "--key", "shop", "--key", "product", "--time", "week", "--value", "units",
    "--period", "52", "--robust", "--transform", "log",
]  # fmt: skip
DEMO_HOURLY = [
    "split", "--from", "{folder}/hourly_loads.parquet", "--to", "{database}:hourly_split",
    "--key", "meter", "--time", "reading_at", "--value", "kwh", "--periods", "", "--fill-gaps",
]  # fmt: skip


def _demo_job(template: list[str], folder: str, database: str) -> tuple[list[str], float]:
    """Run one of the demo's jobs through the command line; its arguments and seconds."""
    import shlex

    argv = [part.format(folder=folder, database=database) for part in template]
    print("  tidesplit " + " ".join(shlex.quote(part) for part in argv) + "\n")
    started = time.perf_counter()
    code = main(argv)
    if code != 0:
        raise SystemExit(code)
    return argv, time.perf_counter() - started


STRENGTH_SQL = """
SELECT product,
       round(avg(strength_of_season), 2) AS strength_of_season,
       round(avg(strength_of_trend), 2) AS strength_of_trend
FROM tide_profile(weekly_units, ['shop', 'product'], 'week', 'units',
                  period := 52, robust := true, transform := 'log')
GROUP BY product ORDER BY strength_of_season DESC
""".strip()


def _print_rows(title: str, rows: list[tuple], header: Sequence[str]) -> None:
    print(f"\n{title}")
    if not rows:  # a small demo may have nothing to show here
        print("  (none)")
        return
    widths = [max([len(str(h)), *(len(str(r[i])) for r in rows)]) for i, h in enumerate(header)]
    print("  " + "  ".join(str(h).ljust(w) for h, w in zip(header, widths, strict=True)))
    for row in rows:
        print("  " + "  ".join(str(v).ljust(w) for v, w in zip(row, widths, strict=True)))


def _ends(rows: list[tuple], each: int = 3) -> list[tuple]:
    """The first and last few rows of a ranking."""
    return rows if len(rows) <= 2 * each else rows[:each] + rows[-each:]


def _between(low: int, high: int) -> Callable[[str], int]:
    """An argparse type: a whole number from ``low`` to ``high``, refused by name otherwise."""

    def whole(text: str) -> int:
        try:
            number = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
        if not low <= number <= high:
            raise argparse.ArgumentTypeError(f"{number} is not between {low} and {high}")
        return number

    return whole


def _demo_refusal(database: str | None, replace: bool) -> str | None:
    """Why the demo cannot write where it was asked to, or None."""
    if database is None:
        return None
    folder = os.path.dirname(os.path.abspath(database))
    if not os.path.isdir(folder) or not os.access(folder, os.W_OK):
        return f"cannot write in {folder} (the folder for --database {database})"
    if os.path.exists(database) and not replace:
        return (
            f"{database} exists; the demo would replace its tables weekly_units, "
            "weekly_split, hourly_loads and hourly_split: give --replace, or another file"
        )
    return None


def run_demo(database: str | None, shops: int, products: int, years: int) -> None:
    """Write the invented shop sales to Parquet, split every series with ``tidesplit
    split`` into a DuckDB file as a scheduled job would, and summarise."""
    import shutil
    import tempfile

    import pyarrow.parquet as pq

    import tidesplit
    from tidesplit.examples.meter_loads import hourly_loads
    from tidesplit.examples.retail_chain import weekly_units

    scratch = tempfile.mkdtemp(prefix="tidesplit-demo-")
    try:
        folder = os.path.dirname(os.path.abspath(database)) if database else scratch
        database = database or os.path.join(scratch, "demo.duckdb")
        table = weekly_units(shops=shops, products=products, years=years)
        pq.write_table(table, os.path.join(folder, "weekly_units.parquet"))
        series = shops * products
        print(
            f"Lantern Lane Grocers (invented): {shops} shops x {products} products, "
            f"{years} years of weekly units = {table.num_rows:,} rows in "
            f"{folder}/weekly_units.parquet."
        )
        print("\nSplitting every series with the command line (the first run compiles "
              "the kernel):\n")  # fmt: skip
        _, elapsed = _demo_job(DEMO_WEEKLY, folder, database)
        loads = hourly_loads()
        pq.write_table(loads, os.path.join(folder, "hourly_loads.parquet"))
        con = tidesplit.connect(database)
        for name in ("weekly_units", "hourly_loads"):  # the inputs beside the answers
            con.execute(
                f"CREATE OR REPLACE TABLE {name} AS "
                f"SELECT * FROM read_parquet('{folder}/{name}.parquet')"
            )
        rows_out = con.sql("SELECT count(*) FROM weekly_split").fetchall()[0][0]
        print(
            f"\n{series:,} series, {rows_out:,} rows back (one per input row) in "
            f"{elapsed:.2f} s (with the start of the job)."
        )
        _weekly_summary(con)
        con.close()
        _hourly_demo(folder, database, loads.num_rows)
        where = database if scratch not in database else "a temporary database"
        print(f"\nTables weekly_units, weekly_split, hourly_loads and hourly_split are in {where}.")
    finally:
        shutil.rmtree(scratch, ignore_errors=True)


def _weekly_summary(con: object) -> None:
    """What the weekly split shows: strengths, the data-entry slip, the closed week."""
    _print_rows(
        "Most and least seasonal products (tide_profile's strengths, 0..1, mean over shops):",
        _ends(con.sql(STRENGTH_SQL).fetchall()),
        ("product", "seasonal", "trend"),
    )
    slips = con.sql(
        "SELECT shop, product, week, units, round(exp(trend + seasonal)) AS expected, "
        "round(weight, 3) AS weight FROM weekly_split "
        "WHERE units IS NOT NULL ORDER BY abs(remainder) DESC LIMIT 3"
    ).fetchall()
    _print_rows(
        "Largest remainders (the robust fit gives a data-entry slip weight 0):",
        slips,
        ("shop", "product", "week", "units", "expected", "weight"),
    )
    closed = con.sql(
        "SELECT shop, week, count(*) AS rows, count(trend) AS with_trend, "
        "count(remainder) AS with_remainder FROM weekly_split "
        "WHERE units IS NULL GROUP BY ALL ORDER BY ALL"
    ).fetchall()
    _print_rows(
        "Missing weeks are data, not errors: trend and seasonal are still there:",
        closed,
        ("shop", "week", "rows", "with trend", "with remainder"),
    )


def _hourly_demo(folder: str, database: str, readings: int) -> None:
    """Two cycles and gaps: hourly meter loads through tide_split_multi."""
    import tidesplit

    print(
        f"\nBrackwater Energy Cooperative (invented): {readings:,} hourly readings "
        "with holes. Two cycles (day and week) are implied by the hourly step:\n"
    )
    _, elapsed = _demo_job(DEMO_HOURLY, folder, database)
    con = tidesplit.connect(database)
    rows = con.sql(
        "SELECT meter, count(*) FILTER (WHERE inserted) AS hours_inserted, "
        "round(max(tide_part(seasonal_by_period, 24)) "
        "- min(tide_part(seasonal_by_period, 24)), 1) AS day_swing, "
        "round(max(tide_part(seasonal_by_period, 168)) "
        "- min(tide_part(seasonal_by_period, 168)), 1) AS week_swing "
        "FROM hourly_split GROUP BY meter ORDER BY meter"
    ).fetchall()
    con.close()
    _print_rows(
        f"Split in {elapsed:.2f} s; the gaps came back as inserted hours (kWh swing per cycle):",
        rows,
        ("meter", "hours inserted", "daily swing", "weekly swing"),
    )


def _quoted(name: str) -> str:
    return '"' + name.replace('"', '""') + '"'


def _read_source(source: str, table: str | None, columns: Sequence[str]) -> object:
    """The key, time and value columns of a Parquet file (or glob) or a DuckDB table."""
    import duckdb

    wanted = ", ".join(_quoted(c) for c in columns)
    if source.lower().endswith(".parquet") or "*" in source:
        if table is not None:
            raise SystemExit("--table names a table of a DuckDB file; a Parquet source has none")
        con = duckdb.connect()
        return con.sql(f"SELECT {wanted} FROM read_parquet(?)", params=[source]).df()
    if table is None:
        raise SystemExit(f"{source}: give --table, the table (or view) to read from this file")
    con = duckdb.connect(source, read_only=True)
    try:
        return con.sql(f"SELECT {wanted} FROM {_quoted(table)}").df()
    finally:
        con.close()


def _spans(text: str) -> list[int]:
    try:
        return [int(part) for part in text.split(",") if part.strip()]
    except ValueError as error:
        raise argparse.ArgumentTypeError(f"spans are whole numbers: {text!r}") from error


def run_draw(args: argparse.Namespace) -> None:
    """Write the pictures asked for from a DuckDB table or a Parquet source."""
    import tidesplit
    from tidesplit import pictures

    outputs = {"parts": args.parts, "fleet": args.fleet, "spans": args.spans, "report": args.report}
    if not any(outputs.values()):
        raise SystemExit("nothing to draw: give --parts, --fleet, --spans and/or --report")
    if args.unusual and not args.parts:
        raise SystemExit("--unusual rings points in --parts; give --parts too")
    if (args.season_spans or args.trend_spans) and not args.spans:
        raise SystemExit("--season-spans and --trend-spans shape --spans; give --spans too")
    if args.mark_chosen and not args.spans:
        raise SystemExit("--mark-chosen marks the spans in --spans; give --spans too")
    if (args.pictured is not None or args.listed is not None) and not args.report:
        raise SystemExit("--pictured and --listed shape --report; give --report too")
    if args.label is not None and not (args.fleet or args.report):
        raise SystemExit("--label names keys in --fleet and --report; give one of them too")
    label = 8 if args.label is None else args.label
    args.pictured = 40 if args.pictured is None else args.pictured
    args.listed = 5000 if args.listed is None else args.listed
    if args.report and (args.pictured < 0 or args.listed < max(1, args.pictured + len(args.pick))):
        raise SystemExit(
            "--listed is at least --pictured plus the --pick keys: every pictured "
            "key is listed (and --pictured is at least 0)"
        )
    if args.spans and len(args.pick) != 1:
        raise SystemExit("--spans draws one key: give exactly one --pick")
    key, time_column, value = args.key, args.time, args.value
    frame = _read_source(args.source, args.table, [*key, time_column, value])
    settings = {"period": args.period, "robust": args.robust, "transform": args.transform}
    labels = pictures.key_labels(frame, key)
    unknown = sorted(set(args.pick) - set(labels))
    if unknown:
        raise SystemExit(f"no key {', '.join(map(repr, unknown))} in {args.source}")

    def rows_of(chosen: Sequence[str]) -> object:
        return frame[labels.isin(set(chosen)).to_numpy()].reset_index(drop=True)

    def unusual_of(data: object) -> object:
        # robust whatever --robust says: a plain fit bends towards the points it should find
        return tidesplit.outliers(
            data, key, time_column, value, period=args.period, transform=args.transform
        )

    if args.parts:
        chosen = args.pick or list(dict.fromkeys(labels))
        some = rows_of(chosen)
        parts = tidesplit.split_table(some, key, time_column, value, **settings)
        marks = unusual_of(some) if args.unusual else None
        pictures.draw_parts(
            parts, key, time_column, value, show=chosen, unusual=marks, path=args.parts
        )
        print(f"wrote {args.parts}: the parts of {len(chosen)} key(s)")
    profiled = None
    if args.fleet or args.report:
        profiled = tidesplit.profile(frame, key, time_column, value, **settings)
    if args.fleet:
        pictures.draw_fleet(profiled, key, label=label, label_keys=args.pick, path=args.fleet)
        print(f"wrote {args.fleet}: {len(profiled):,} keys")
    if args.spans:
        if args.period is None:
            raise SystemExit("--spans needs --period")
        extra = {}
        if args.season_spans:
            extra["season_spans"] = args.season_spans
        if args.trend_spans:
            extra["trend_spans"] = args.trend_spans
        pictures.draw_spans(
            rows_of(args.pick),
            key,
            time_column,
            value,
            pick=args.pick[0],
            period=args.period,
            robust=args.robust,
            transform=args.transform,
            path=args.spans,
            mark_chosen=args.mark_chosen,
            **extra,
        )
        print(f"wrote {args.spans}: {args.pick[0]} under each span")
    if args.report:
        unusual = unusual_of(frame)
        chosen = pictures.choose_pictured(profiled, key, unusual, args.pictured)
        chosen += [k for k in args.pick if k not in chosen]
        parts = tidesplit.split_table(rows_of(chosen), key, time_column, value, **settings)
        pictures.write_report(
            args.report,
            parts,
            profiled,
            key,
            time_column,
            value,
            unusual=unusual,
            pictured=len(chosen),
            listed=args.listed,
            label=label,
            title=f"tidesplit: {args.source}",
        )
        print(f"wrote {args.report}: {len(profiled):,} keys, {len(chosen)} pictured")


def _add_draw(commands: argparse._SubParsersAction) -> None:
    draw = commands.add_parser(
        "draw",
        help="draw pictures of the split of a DuckDB table or a Parquet source",
        description="Split the series of a table and write pictures: one or more keys and "
        "their parts (--parts), the whole fleet by trend and seasonal strength (--fleet), one "
        "key under several spans (--spans), and a self-contained HTML report (--report). "
        "Pictures are PNG or SVG by the file name. Keys are named by their values joined "
        "by ' / ' (for example 'Quayside / sun cream').",
        epilog="example:\n  tidesplit draw demo.duckdb --table weekly_units --key shop "
        "--key product \\\n    --time week --value units --period 52 --fleet fleet.png",
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    draw.add_argument("source", help="a DuckDB database file (with --table) or a Parquet file")
    draw.add_argument("--table", help="the table or view to read from a DuckDB file")
    draw.add_argument(
        "--key", action="append", required=True, help="a key column; repeat for several"
    )
    draw.add_argument("--time", required=True, help="the time column")
    draw.add_argument("--value", required=True, help="the value column")
    draw.add_argument("--period", type=int, help="points per cycle (default: from the step)")
    draw.add_argument("--robust", action="store_true", help="robust split")
    draw.add_argument(
        "--transform",
        default="none",
        choices=("none", "log", "boxcox"),
        help="transform before splitting (default none)",
    )
    draw.add_argument(
        "--pick",
        action="append",
        default=[],
        help="a key to draw (--parts, --spans) or to name (--fleet, --report); repeat for several",
    )
    draw.add_argument("--parts", metavar="FILE", help="write the parts of the picked keys")
    draw.add_argument(
        "--unusual", action="store_true", help="ring unusual points (robust outliers) in --parts"
    )
    draw.add_argument("--fleet", metavar="FILE", help="write the fleet picture")
    draw.add_argument(
        "--label",
        type=int,
        help="keys farthest from the fleet's middle to name, in --fleet and the report's "
        "fleet picture (default 8)",
    )
    draw.add_argument("--spans", metavar="FILE", help="write one key under several spans")
    draw.add_argument("--season-spans", type=_spans, help="comma-separated (default 7,13,35,0)")
    draw.add_argument(
        "--trend-spans",
        type=_spans,
        help="comma-separated (default a half to four times the default)",
    )
    draw.add_argument(
        "--mark-chosen",
        action="store_true",
        help="in --spans, mark the season and trend span choose_spans picks for the key",
    )
    draw.add_argument("--report", metavar="FILE", help="write a self-contained HTML report")
    draw.add_argument("--pictured", type=int, help="keys pictured in the report (default 40)")
    draw.add_argument("--listed", type=int, help="keys listed in the report (default 5000)")


# ----------------------------------------------------------------- split, profile, ...

EXAMPLES = {
    "split": "tidesplit split --from lake/sales/ --to warehouse.duckdb:sales_split \\\n"
    "    --key store --key sku --time month --value units --period 12 --robust \\\n"
    "    --transform log --report split.json",
    "profile": "tidesplit profile --from 'lake/sales/*.parquet' --to profiles.parquet \\\n"
    "    --key store --key sku --time month --value units --period 12",
    "outliers": "tidesplit outliers --from postgresql://etl@db:5432/shop --from-table sales \\\n"
    "    --to unusual.parquet --key sku --time month --value units --rule mad",
    "forecast": "tidesplit forecast --from warehouse.duckdb:sales \\\n"
    "    --to postgresql://etl@db/shop --to-table sales_ahead \\\n"
    "    --key sku --time month --value units --steps-ahead 6",
    "publish": "tidesplit publish --from warehouse.duckdb:sales --to warehouse.duckdb \\\n"
    "    --schema adjusted --key store --key sku --time month --value units --period 12 \\\n"
    "    --transform log",
}
WHAT = {
    "split": "trend, seasonal and remainder of every series, one row per input row "
    "(tide_split; tide_split_multi with --periods)",
    "profile": "one row per series: strengths, peak and trough, status (tide_profile)",
    "outliers": "the unusual rows of every series (tide_outliers)",
    "forecast": "future rows of every series with intervals (tide_forecast)",
    "publish": "components, profiles and seasonal factors as tables of a DuckDB file or a "
    "PostgreSQL schema, with plain-SQL views for BI tools; a rerun refreshes only the keys "
    "that changed (tide_split, tide_profile)",
}
# Settings of a run besides the SQL function's arguments: (option, job-file name, help).
PLACES = (
    (
        "--from",
        "from",
        "the source: a Parquet file, glob or (hive-partitioned) folder, a "
        "CSV file, FILE.duckdb:TABLE, or a postgresql:// address with --from-table/--from-query",
    ),
    (
        "--to",
        "to",
        "the target: FILE.parquet, a folder (with --partition-by COLUMN or not), "
        "FILE.duckdb:TABLE, or a postgresql:// address with --to-table",
    ),
    ("--from-table", "from_table", "the table (or view) to read from PostgreSQL"),
    ("--from-query", "from_query", "a query to read from PostgreSQL instead of a table"),
    ("--to-table", "to_table", "the table to write in PostgreSQL"),
    ("--time", "time", "the time column"),
    ("--value", "value", "the value column"),
    (
        "--partition-by",
        "partition_by",
        "a key or answer column to partition a folder target by (hive style: COLUMN=VALUE folders)",
    ),
    (
        "--report",
        "report",
        "write what the run did (the last line's figures, the exit code, "
        "the bad keys and why) to this JSON file",
    ),
)


def _whole(text: str) -> int:
    try:
        return int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"a whole number, not {text!r}") from None


def _is_list(argument: object) -> bool:
    from . import arguments

    return arguments.SQL_TYPES[argument.kind].endswith("[]")


def _option_type(argument: object) -> object:
    """How an option's text becomes the value its kind holds (lists: comma-separated);
    the registry checks the value after."""
    from . import arguments

    whole = argument.kind in (arguments.WHOLE, arguments.WHOLE_LIST)
    if argument.kind == arguments.DAY_LIST:
        return str  # a file of day, name rows, read when the job is checked
    if argument.kind == arguments.NAME_LIST:

        def names(text: str) -> list[str]:
            return [part.strip() for part in text.split(",") if part.strip()]

        return names
    if _is_list(argument):
        one = _whole if whole else float

        def comma_list(text: str) -> list:
            return [one(part.strip()) for part in text.split(",") if part.strip()]

        return comma_list
    if argument.kind == arguments.TEXT:
        return str
    return _whole if whole else float


def _default_help(argument: object, function: str) -> str:
    if argument.default_text:
        return argument.default_text
    default = argument.default_in(function)
    return str(default).lower() if isinstance(default, bool) else str(default)


def _add_job_command(commands: argparse._SubParsersAction, command: str) -> None:
    """One answer command; its function arguments are written from the registry."""
    from . import arguments
    from .elt import COMMANDS, EXIT_CODES, options_of

    exits = "\n".join(f"  {code}  {words}" for code, words in sorted(EXIT_CODES.items()))
    parser = commands.add_parser(
        command,
        help=WHAT[command],
        description=f"Answer every series of a source with tide_{COMMANDS[command][0]}: "
        f"{WHAT[command]}. Keys are processed in batches (by a hash of the key), so memory "
        "follows --batch-rows, not the table; the target is replaced only when the whole "
        "run has succeeded.",
        epilog=f"example:\n  {EXAMPLES[command]}\n\nexit codes:\n{exits}",
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    places = parser.add_argument_group("source, target and columns")
    publishing = command == "publish"
    for option, name, words in PLACES[:2]:
        if publishing and name == "to":
            words = "the DuckDB file (FILE.duckdb) or the postgresql:// address to publish into"
        places.add_argument(option, dest=name, metavar="ADDRESS", help=words)
    places.add_argument(
        "--key", action="append", dest="key", help="a key column; repeat for several"
    )
    for option, name, words in PLACES[2:]:
        if publishing and name in ("to_table", "partition_by"):
            continue  # publish names its own tables
        places.add_argument(option, dest=name, help=words)
    run = parser.add_argument_group("the run")
    run.add_argument(
        "--job",
        metavar="FILE.toml",
        help="take the settings from a job file "
        "(the option names with _ for -); options given here override it",
    )
    run.add_argument(
        "--batch-rows",
        dest="batch_rows",
        type=_whole,
        help="rows per batch of keys (default 2,000,000): what bounds memory",
    )
    run.add_argument(
        "--quiet", action="store_true", default=None, help="no progress bar and no last line"
    )
    if command == "publish":
        places.add_argument(
            "--schema",
            dest="schema",
            help="the schema of the published tables and views (default: main in DuckDB, "
            "the connection's search path in PostgreSQL)",
        )
        places.add_argument(
            "--raw-table",
            dest="raw_table",
            help="the table new raw rows land in, read by the provisional view (default: the "
            "source, when it is a table of the published database)",
        )
    else:
        run.add_argument(
            "--refresh",
            action="store_true",
            default=None,
            help="recompute only the keys whose rows or arguments changed since the last "
            "refresh, keep the rest, drop vanished keys, and record how far published "
            "adjusted values moved (a Parquet file, a DuckDB or a PostgreSQL table)",
        )
    if not publishing:
        run.add_argument(
            "--engine",
            choices=("duckdb", "spark"),
            help="where the series are split (default duckdb); spark reads Parquet or CSV "
            "with Spark, splits the keys on its executors (tidesplit.spark) and writes Parquet",
        )
    named = parser.add_argument_group(
        f"arguments of tide_{COMMANDS[command][0]} (as in SQL; see README's table)"
    )
    for argument in options_of(command):
        function = next(f for f in COMMANDS[command] if f in argument.functions)
        words = f"{argument.meaning} (default: {_default_help(argument, function)})"
        if argument.kind == arguments.DAY_LIST:
            words = "a CSV or Parquet file with columns day and name: " + words
        words = words.replace("%", "%%")
        option = "--" + argument.name.replace("_", "-")
        if argument.kind == arguments.FLAG:
            named.add_argument(
                option,
                dest=argument.name,
                default=None,
                action=argparse.BooleanOptionalAction,
                help=words,
            )
            continue
        named.add_argument(
            option,
            dest=argument.name,
            type=_option_type(argument),
            choices=argument.choices or None,
            metavar={arguments.NAME_LIST: "NAME,NAME", arguments.DAY_LIST: "FILE"}.get(
                argument.kind, "N,N" if _is_list(argument) else None
            ),
            help=words,
        )
    parser.set_defaults(job_command=command)


_RUN_SETTINGS = ("from", "to", "from_table", "from_query", "to_table", "key", "time",
                 "value", "partition_by", "report", "batch_rows", "quiet", "engine", "refresh",
                 "schema", "raw_table")  # fmt: skip


def read_job_file(path: str, command: str) -> dict[str, object]:
    """The settings of a TOML job file, checked by name (the nearest known name is
    suggested for an unknown one)."""
    import difflib
    import tomllib

    from .elt import options_of
    from .errors import ParamError

    try:
        with open(path, "rb") as handle:
            settings = tomllib.load(handle)
    except OSError as error:
        raise ParamError(f"cannot read the job file {path}: {error}") from error
    except tomllib.TOMLDecodeError as error:
        raise ParamError(f"job file {path}: {error}") from error
    known = [*_RUN_SETTINGS, *(a.name for a in options_of(command))]
    for name in settings:
        if name not in known:
            near = difflib.get_close_matches(name, known, n=1)
            hint = f"; did you mean {near[0]}?" if near else ""
            raise ParamError(f"job file {path}: unknown setting {name} of {command}{hint}")
    if isinstance(settings.get("key"), str):
        settings["key"] = [settings["key"]]
    return settings


def run_job(args: argparse.Namespace) -> int:
    """Merge the job file and the options, run, print the last line; the exit code."""
    from . import elt
    from .errors import ParamError

    command = args.job_command
    given = {n: v for n, v in vars(args).items() if v is not None}
    try:
        settings = read_job_file(args.job, command) if args.job else {}
        settings.update(
            {n: v for n, v in given.items() if n not in ("command", "job", "job_command")}
        )
        missing = [n for n in ("from", "to", "key", "time", "value") if not settings.get(n)]
        if missing:
            raise ParamError(
                "missing " + ", ".join("--" + n for n in missing) + " (here or in --job)"
            )
        for name in (
            "from",
            "to",
            "time",
            "value",
            "from_table",
            "from_query",
            "to_table",
            "partition_by",
            "report",
            "engine",
            "schema",
            "raw_table",
        ):
            if name in settings and not isinstance(settings[name], str):
                raise ParamError(f"{name} must be text, got {settings[name]!r}")
        strays = [n for n in ("schema", "raw_table") if n in settings and command != "publish"]
        if strays:
            raise ParamError(f"{strays[0]} is a setting of publish, not of {command}")
        keys = settings["key"]
        if not isinstance(keys, list) or not all(isinstance(k, str) for k in keys):
            raise ParamError(f"key must be a column name or a list of them, got {keys!r}")
        named = {a.name for a in elt.options_of(command)}
        job = elt.Job(
            command,
            settings["from"],
            settings["to"],
            keys,
            settings["time"],
            settings["value"],
            given={n: v for n, v in settings.items() if n in named},
            source_table=settings.get("from_table"),
            source_query=settings.get("from_query"),
            target_table=settings.get("to_table"),
            partition_by=settings.get("partition_by"),
            batch_rows=settings.get("batch_rows", elt.DEFAULT_BATCH_ROWS),
            report=settings.get("report"),
            engine=settings.get("engine", "duckdb"),
            refresh=command == "publish" or bool(settings.get("refresh")),
            schema=settings.get("schema"),
            raw_table=settings.get("raw_table"),
        )
    except ParamError as error:
        print(f"tidesplit {command}: {error}", file=sys.stderr)
        return elt.EXIT_BAD_ARGUMENTS
    quiet = bool(settings.get("quiet"))
    outcome = elt.run(job, show_progress=not quiet)
    if outcome.message:
        print(f"tidesplit {command}: {outcome.message}", file=sys.stderr)
    if not quiet:
        print(outcome.line())
    return outcome.exit_code


COMMANDS = ("demo", "draw", "split", "profile", "outliers", "forecast", "publish")


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``tidesplit`` command."""
    args = build_parser().parse_args(argv)
    if args.command == "demo":
        refused = _demo_refusal(args.database, args.replace)
        if refused:
            print(f"tidesplit demo: {refused}", file=sys.stderr)
            return 2
        run_demo(args.database, args.shops, args.products, args.years)
    elif args.command == "draw":
        run_draw(args)
    else:
        return run_job(args)
    return 0


def build_parser() -> argparse.ArgumentParser:
    """The parser of every command."""
    parser = argparse.ArgumentParser(
        prog="tidesplit", description="Seasonal-trend decomposition of keyed series in DuckDB."
    )
    commands = parser.add_subparsers(dest="command", required=True)
    demo = commands.add_parser(
        "demo",
        help="split an invented shop-sales table and print a summary",
        description="Build an invented table of weekly unit sales, write it to Parquet, "
        "split every series with tidesplit split (the tide_split query on batches of keys) "
        "into a DuckDB file, and print what came out.",
        epilog="example:\n  tidesplit demo --database demo.duckdb",
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    demo.add_argument(
        "--database", help="DuckDB file to keep the tables in (default: a temporary one)"
    )
    demo.add_argument(
        "--replace", action="store_true", help="replace the demo's tables in an existing --database"
    )
    demo.add_argument(
        "--shops",
        type=_between(1, 1000),
        default=12,
        help="number of shops, 1 to 1,000 (default 12)",
    )
    demo.add_argument(
        "--products",
        type=_between(1, 1000),
        default=20,
        help="products per shop, 1 to 1,000 (default 20)",
    )
    demo.add_argument(
        "--years",
        type=_between(3, 50),
        default=6,
        help="years of weekly data, 3 to 50 (default 6; two yearly cycles and one to spare "
        "are the least a robust split of weekly data wants)",
    )
    _add_draw(commands)
    for command in COMMANDS[2:]:
        _add_job_command(commands, command)
    return parser


if __name__ == "__main__":
    sys.exit(main())
