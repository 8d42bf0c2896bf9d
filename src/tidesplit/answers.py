"""The columns each answer puts beside the input's key, time and value columns.

The SQL macros and the Python functions both refuse an input column named like one of these
(DuckDB would otherwise rename one of the two silently, and pandas overwrite one).
"""

from __future__ import annotations

from .summaries import PROFILE_COLUMNS

SPLIT = (
    "trend",
    "seasonal",
    "remainder",
    "adjusted",
    "weight",
    "inserted",
    "period",
    "status",
)
# several periods: the periods used, and one part per period (SQL: a list of structs;
# Python: one seasonal_period_<period> column each, which are refused by prefix)
SPLIT_MULTI = (*(c for c in SPLIT if c != "period"), "periods", "seasonal_by_period")
PROFILE = (
    "points",
    "missing",
    "step",
    *PROFILE_COLUMNS,
    "strength_by_period",
    "peak_position",
    "peak_label",
    "trough_position",
    "trough_label",
    "period",
    "periods",
    "boxcox_lambda",
    "status",
)
OUTLIERS = ("expected", "remainder", "score", "direction", "weight", "is_outlier", "status")
FORECAST = ("step", "forecast", "lower", "upper", "status")
AUDIT = ("reference", "points_compared", "trend_gap", "seasonal_gap", "remainder_gap", "status")


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
