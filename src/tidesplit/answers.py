"""The columns each answer puts beside the input's key, time and value columns, defined once.

README's column tables are written from these (a test keeps them equal), the SQL UDFs'
per-series results take their types from them, and every front gives these columns in this
order (tested across fronts). The fronts also refuse an input column named like one of them
(DuckDB would otherwise rename one of the two silently, and pandas overwrite one).
"""

from __future__ import annotations

from typing import NamedTuple


class Column(NamedTuple):
    """One column of an answer: its name, its SQL type and what it means."""

    name: str
    sql_type: str
    meaning: str


def _on_scale(what: str) -> str:
    return f"{what}, on the transformed scale"


# Per series, in every answer that has rows per time: what was used, and whether it split.
_PERIOD, _LAMBDA, _STATUS = _SERIES = (
    Column(
        "period",
        "BIGINT",
        "the period used for the series (given, or implied by its "
        "time step); NULL for a series left unsplit",
    ),
    Column(
        "boxcox_lambda",
        "DOUBLE",
        "the Box-Cox lambda the series was split with (0 for log; NULL without a transform)",
    ),
    Column(
        "status",
        "VARCHAR",
        "`ok` (or `ok; ...` with a note), or why the series was left "
        "unsplit (with `on_error := 'keep'`)",
    ),
)
# Per series, in the split and the profile: the spans it was split with.
_SPANS = (
    Column(
        "season_span",
        "BIGINT",
        "the season span the series was split with (0: a fixed pattern), given, the default "
        "or chosen with `choose_spans`; NULL for a series left unsplit",
    ),
    Column("trend_span", "BIGINT", "the same for the trend span"),
)
# The regression effects' coefficients of a series, one entry each.
EFFECTS_TYPE = "STRUCT(name VARCHAR, coefficient DOUBLE, std_error DOUBLE, t_value DOUBLE)[]"
SPLIT_COLUMNS = (
    Column("trend", "DOUBLE", _on_scale("the trend")),
    Column("seasonal", "DOUBLE", _on_scale("the seasonal part (with several periods, their sum)")),
    Column(
        "remainder",
        "DOUBLE",
        "transformed value - trend - seasonal (- calendar_effect - outside_effect); NULL where "
        "the value is NULL",
    ),
    Column(
        "adjusted",
        "DOUBLE",
        "the seasonally adjusted series (value without its seasonal part and, with "
        "`calendar_effects` or `special_days`, without its calendar effect), on the original scale",
    ),
    Column(
        "weight",
        "DOUBLE",
        "the robustness weight of the point (1 without `robust`); NULL where the value is NULL",
    ),
    Column(
        "calendar_effect",
        "DOUBLE",
        _on_scale(
            "the calendar effects fitted at the point (`calendar_effects`, `special_days`; 0 "
            "without)"
        ),
    ),
    Column(
        "outside_effect",
        "DOUBLE",
        _on_scale(
            "the effect of the outside columns at the point (`outside_columns`; 0 without, "
            "NULL where an outside value is, as in a gap filled by `fill_gaps`); it stays in "
            "`adjusted`"
        ),
    ),
    Column(
        "adjusted_season_only",
        "DOUBLE",
        "the value without its seasonal part only, on the original scale (`adjusted` keeps "
        "the calendar effect in it; equal to `adjusted` without `calendar_effects`)",
    ),
    Column(
        "inserted",
        "BOOLEAN",
        "true for a row added into a gap by `fill_gaps := true` (its value is NULL)",
    ),
    _PERIOD,
    *_SPANS,
    _LAMBDA,
    _STATUS,
)
SPLIT_MULTI_COLUMNS = (
    *(
        c
        for c in SPLIT_COLUMNS
        if c.name not in ("period", "season_span", "trend_span", "boxcox_lambda", "status")
    ),
    Column("periods", "BIGINT[]", "the periods used for the series, ascending"),
    Column(
        "seasonal_by_period",
        "STRUCT(period BIGINT, seasonal DOUBLE)[]",
        "one "
        "`{period, seasonal}` per period, ascending; in Python one `seasonal_period_<p>` "
        "column each",
    ),
    _LAMBDA,
    _STATUS,
)
PROFILE_COLUMNS = (
    Column("points", "BIGINT", "observed values"),
    Column("missing", "BIGINT", "missing values plus times missing inside the series"),
    Column(
        "time_step",
        "VARCHAR",
        "the time step found (`1 month`, `1 hour`, `15 minutes`, `3` for integers)",
    ),
    Column(
        "strength_of_trend",
        "DOUBLE",
        "F = max(0, 1 - Var(R) / Var(T + R)) (Wang, Smith & Hyndman 2006)",
    ),
    Column(
        "strength_of_season",
        "DOUBLE",
        "the same for the (summed) seasonal part S: max(0, 1 - Var(R) / Var(S + R))",
    ),
    Column(
        "seasonal_amplitude",
        "DOUBLE",
        "range of the mean seasonal part by cycle position (transformed scale)",
    ),
    Column("remainder_sd", "DOUBLE", "standard deviation of the remainder"),
    Column(
        "share_down_weighted",
        "DOUBLE",
        "share of observed points with robustness weight "
        "below 0.5 (our threshold; 0 without `robust`)",
    ),
    Column("remainder_acf1", "DOUBLE", "lag-1 autocorrelation of the remainder"),
    Column(
        "strength_by_period",
        "MAP(BIGINT, DOUBLE)",
        "with `periods`: each period's seasonal strength",
    ),
    Column(
        "peak_position",
        "BIGINT",
        "cycle position (from 0) of the highest mean seasonal value, shortest period",
    ),
    Column(
        "peak_label",
        "VARCHAR",
        "the same as a month, weekday, `Q1`..`Q4`, `week 12` or `13:00` for calendar data",
    ),
    Column("trough_position", "BIGINT", "cycle position of the lowest mean seasonal value"),
    Column("trough_label", "VARCHAR", "the same as a name"),
    Column(
        "effects",
        EFFECTS_TYPE,
        "with `calendar_effects`, `special_days` or `outside_columns`: each fitted effect's "
        "`{name, coefficient, std_error, t_value}` (transformed scale; see Calendar effects); "
        "NULL without",
    ),
    _PERIOD,
    Column("periods", "BIGINT[]", "the periods used"),
    *_SPANS,
    _LAMBDA,
    _STATUS,
)
OUTLIERS_COLUMNS = (
    Column("expected", "DOUBLE", "trend + seasonal, on the original scale"),
    Column("remainder", "DOUBLE", _on_scale("the remainder")),
    Column(
        "score",
        "DOUBLE",
        "how far out the point is: its departure from its neighbours in standard deviations "
        "of the series' ordinary departures (rule 'stepwise'), or its robust z-score ('mad')",
    ),
    Column("direction", "VARCHAR", "`high` or `low` for a flagged point"),
    Column("weight", "DOUBLE", "the robustness weight of the point"),
    Column("is_outlier", "BOOLEAN", "whether the point lies outside the fences"),
    _STATUS,
)
FORECAST_COLUMNS = (
    Column(
        "steps_ahead",
        "BIGINT",
        "1 to the `steps_ahead` asked for: steps after the series' last time",
    ),
    Column(
        "forecast",
        "DOUBLE",
        "the point forecast, on the original scale (the median when transformed)",
    ),
    Column(
        "low",
        "DOUBLE",
        "the low end of the prediction interval that holds `coverage` of future values",
    ),
    Column("high", "DOUBLE", "its high end"),
    _STATUS,
)
AUDIT_COLUMNS = (
    Column("reference", "VARCHAR", "the statsmodels function the key was split again with"),
    Column("points_compared", "BIGINT", "points of the series' grid compared"),
    Column("trend_gap", "DOUBLE", "the largest absolute difference of the trend"),
    Column("seasonal_gap", "DOUBLE", "the same for the seasonal part"),
    Column("remainder_gap", "DOUBLE", "the same for the remainder"),
    Column("status", "VARCHAR", "`ok`, or why the key was not compared (statsmodels cannot "
           "follow, or the key was not split)"),
)  # fmt: skip


def names(columns: tuple[Column, ...]) -> tuple[str, ...]:
    return tuple(c.name for c in columns)


SPLIT = names(SPLIT_COLUMNS)
# the per-point components of a split, on every front
COMPONENTS = SPLIT[: SPLIT.index("inserted")]
SPLIT_MULTI = names(SPLIT_MULTI_COLUMNS)
PROFILE = names(PROFILE_COLUMNS)
OUTLIERS = names(OUTLIERS_COLUMNS)
FORECAST = names(FORECAST_COLUMNS)
AUDIT = names(AUDIT_COLUMNS)


def markdown_table(columns: tuple[Column, ...]) -> str:
    """An answer's columns as README shows them.

    >>> markdown_table(AUDIT_COLUMNS).splitlines()[2]
    '| `reference` | the statsmodels function the key was split again with |'
    """
    lines = ["| column | meaning |", "| --- | --- |"]
    lines += [f"| `{c.name}` | {c.meaning} |" for c in columns]
    return "\n".join(lines)


def struct_type(columns: tuple[Column, ...]) -> str:
    """The SQL STRUCT of one row of these columns (a UDF's result per series).

    >>> struct_type(AUDIT_COLUMNS)[:40]
    'STRUCT(reference VARCHAR, points_compare'
    """
    return "STRUCT(" + ", ".join(f"{c.name} {c.sql_type}" for c in columns) + ")"


# Columns the SQL macros make on the way; an outside column of one of these names is refused.
INTERNAL_COLUMNS = ("__key", "__time_row", "__time_code", "__value_row", "__value",
                    "__outside_struct")  # fmt: skip


def outside_clashes(keys: list[str], time: str, value: str, outside: list[str]) -> list[str]:
    """Reasons to refuse the outside columns (empty when fine): one that is also the key,
    time or value column, or named like a column the SQL macros make.

    >>> outside_clashes(["shop"], "day", "sales", ["price", "Sales"])[0][:34]
    'the outside column "Sales" is also'
    """
    taken = {c.lower() for c in [*keys, time, value, *INTERNAL_COLUMNS]}
    return [
        f'the outside column "{c}" is also the key, time or value column, or has a name these '
        f"queries use; give another column (SELECT {c} AS {c}_x, ...)"
        for c in outside
        if c.lower() in taken
    ]


def name_clashes(keys: list[str], time: str, value: str, answer: tuple[str, ...]) -> list[str]:
    """Reasons to refuse the input's column names for an answer (empty when fine).

    >>> name_clashes(["trend"], "t", "v", SPLIT)
    ['the input column "trend" has the name of an output column; rename it in the input']
    >>> name_clashes(["k"], "t", "t", SPLIT)
    ['key, time and value must be different columns']
    """
    given = [*keys, time, value]
    reasons = [
        f'the input column "{c}" has the name of an output column; rename it in the input'
        for c in given
        if c.lower() in answer
        or ("seasonal_by_period" in answer and c.lower().startswith("seasonal_period_"))
    ]
    if len({c.lower() for c in given}) < len(given):
        reasons.append("key, time and value must be different columns")
    return reasons
