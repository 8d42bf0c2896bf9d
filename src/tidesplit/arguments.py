"""Every named argument of every function, defined once.

From this registry come the SQL macros' signatures and type checks (``sql_build``), the
Python functions' signatures and their checks (``accept``), and the argument table in
README (``markdown_table``; a test keeps the two equal). Checks of a value's range that
depend on other settings (a span odd and at least 3, at least one step ahead) live beside
the rule that uses them (``params``, ``answers``) and raise the same ``ParamError``.
"""

from __future__ import annotations

import difflib
import inspect
import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from .errors import ParamError
from .tuning import DEFAULT_MAD_THRESHOLD, DEFAULT_SIGNIFICANCE, EASTER_WINDOW_DAYS

# The functions, by the name of their SQL macro without the ``tide_`` prefix.
SPLIT = "split"
SPLIT_MULTI = "split_multi"
SPLIT_LIST = "split_list"
PROFILE = "profile"
OUTLIERS = "outliers"
FORECAST = "forecast"
AUDIT = "audit"
FUNCTIONS = (SPLIT, SPLIT_MULTI, SPLIT_LIST, PROFILE, OUTLIERS, FORECAST, AUDIT)
_ANSWERS = (PROFILE, OUTLIERS, FORECAST, AUDIT)
_ONE_PERIOD = (SPLIT, SPLIT_LIST, *_ANSWERS)
_EVERY_SPLIT = (SPLIT, SPLIT_MULTI, SPLIT_LIST, *_ANSWERS)
_SEVERAL_PERIODS = (SPLIT_MULTI, *_ANSWERS)
# the functions that fit regression effects beside the split; the forecast takes those
# known ahead (the calendar's), not outside columns, whose future values it has not
_EFFECTS = (SPLIT, SPLIT_MULTI, PROFILE, OUTLIERS, FORECAST)
_OUTSIDE = (SPLIT, SPLIT_MULTI, PROFILE, OUTLIERS)

# What an argument holds: how SQL declares and checks it, how Python checks it.
WHOLE = "whole number"
NUMBER = "number"
FLAG = "true or false"
TEXT = "text"
WHOLE_LIST = "list of whole numbers"
NUMBER_LIST = "list of numbers"
NAME_LIST = "list of column names"
DAY_LIST = "list of named days"
SQL_TYPES = {WHOLE: "DOUBLE", NUMBER: "DOUBLE", FLAG: "BOOLEAN", TEXT: "VARCHAR",
             WHOLE_LIST: "DOUBLE[]", NUMBER_LIST: "DOUBLE[]", NAME_LIST: "VARCHAR[]",
             DAY_LIST: "STRUCT(day DATE, name VARCHAR)[]"}  # fmt: skip


@dataclass(frozen=True)
class Argument:
    """One named argument: what it holds, its default, which functions take it, and why."""

    name: str
    kind: str
    meaning: str
    functions: tuple[str, ...]
    default: Any = None  # None: left to a published rule, or to the data (``default_text``)
    default_text: str = ""  # README's wording of the default, when it is a rule
    choices: tuple[str, ...] = ()
    # (function, default) pairs where one function defaults otherwise
    default_for: tuple[tuple[str, Any], ...] = ()
    # True for the settings of the decomposition itself (they make up ``SplitParams``)
    decomposition: bool = True
    # the largest value (each entry, for a list) taken: a bound on the work and memory an
    # argument can ask for, checked before any series runs
    most: float | None = None

    def default_in(self, function: str) -> Any:
        return dict(self.default_for).get(function, self.default)


REGISTRY: tuple[Argument, ...] = (
    Argument(
        "period",
        WHOLE,
        "points per seasonal cycle (12 for monthly data with a yearly cycle)",
        _ONE_PERIOD,
        default_text="implied by the time step",
        most=10_000_000,
    ),
    Argument(
        "periods",
        WHOLE_LIST,
        "several seasonal periods (MSTL); `[]` takes those the time step implies",
        _SEVERAL_PERIODS,
        default_text="implied by the step (tide_split_multi); one period (answers)",
        most=10_000_000,
    ),
    Argument(
        "season_span",
        WHOLE,
        "loess span of the cycle-subseries smoothing, odd >= 3; "
        "`0` means an infinite span: a fixed seasonal pattern, the same every cycle (the "
        "weighted mean of each cycle position)",
        _EVERY_SPLIT,
        default_text="13 (common practice); 7 + 4 i for the i-th of several periods",
        most=10_000_001,
    ),
    Argument(
        "season_spans",
        WHOLE_LIST,
        "one season span per period",
        _SEVERAL_PERIODS,
        default_text="7 + 4 i (Bandara et al. 2021)",
        most=10_000_001,
    ),
    Argument(
        "trend_span",
        WHOLE,
        "loess span of the trend smoothing, odd >= 3",
        _EVERY_SPLIT,
        default_text="smallest odd >= 1.5 period / (1 - 1.5 / season_span)",
        most=10_000_001,
    ),
    Argument(
        "lowpass_span",
        WHOLE,
        "loess span of the low-pass filter, odd >= 3",
        _EVERY_SPLIT,
        default_text="smallest odd >= period",
        most=10_000_001,
    ),
    Argument(
        "season_degree",
        WHOLE,
        "loess degree of the seasonal smoothing, 0 (local mean) or 1 (local line)",
        _EVERY_SPLIT,
        default_text="1",
    ),
    Argument(
        "trend_degree",
        WHOLE,
        "loess degree of the trend smoothing, 0 or 1",
        _EVERY_SPLIT,
        default_text="1",
    ),
    Argument(
        "lowpass_degree",
        WHOLE,
        "loess degree of the low-pass filter, 0 or 1",
        _EVERY_SPLIT,
        default_text="1",
    ),
    Argument(
        "season_jump",
        WHOLE,
        "fit the seasonal loess every k-th point and interpolate",
        _EVERY_SPLIT,
        default_text="about a tenth of the span",
        most=10_000_000,
    ),
    Argument(
        "trend_jump",
        WHOLE,
        "the same for the trend",
        _EVERY_SPLIT,
        default_text="about a tenth of the span",
        most=10_000_000,
    ),
    Argument(
        "lowpass_jump",
        WHOLE,
        "the same for the low-pass filter",
        _EVERY_SPLIT,
        default_text="about a tenth of the span",
        most=10_000_000,
    ),
    Argument(
        "robust",
        FLAG,
        "robustness weights: bisquare of abs(remainder) / (6 x median abs(remainder))",
        _EVERY_SPLIT,
        default=False,
        default_for=((OUTLIERS, True),),
    ),
    Argument(
        "inner_loops",
        WHOLE,
        "passes of the inner loop",
        _EVERY_SPLIT,
        default_text="2, or 1 with robust; 2 in tide_outliers",
        default_for=((OUTLIERS, 2),),
        most=100,
    ),
    Argument(
        "outer_loops",
        WHOLE,
        "robustness passes (only with robust)",
        _EVERY_SPLIT,
        default_text="0, or 10 with robust; 1 in tide_outliers (see there)",
        default_for=((OUTLIERS, 1),),
        most=100,
    ),
    Argument(
        "iterations",
        WHOLE,
        "rounds over the periods (MSTL)",
        _SEVERAL_PERIODS,
        default_text="2 (Bandara et al. 2021)",
        most=100,
    ),
    Argument(
        "transform",
        TEXT,
        "applied before splitting; the components add up on its scale",
        _EVERY_SPLIT,
        default="none",
        choices=("none", "log", "boxcox"),
    ),
    Argument(
        "boxcox_lambda",
        NUMBER,
        "the Box-Cox lambda; left out with 'boxcox', chosen per series by Guerrero's (1993) method",
        _EVERY_SPLIT,
        default_text="chosen per series",
    ),
    Argument(
        "boxcox_bounds",
        NUMBER_LIST,
        "the interval Guerrero's lambda is chosen in (only with 'boxcox' and no "
        "boxcox_lambda; see Choosing lambda)",
        _EVERY_SPLIT,
        default_text="[0, 1] (ours: from the log to no transform)",
    ),
    Argument(
        "choose_spans",
        FLAG,
        "choose season_span and trend_span per series from the data, by an information "
        "criterion of the fit (see Choosing spans); a span given is kept and the other chosen",
        (SPLIT, SPLIT_LIST, PROFILE),
        default=False,
    ),
    Argument(
        "calendar_effects",
        TEXT,
        "calendar effects fitted beside the split (see Calendar effects), "
        "comma-separated: 'weekdays' (trading days: a coefficient per weekday and one for "
        "the period's length; monthly and quarterly dates), 'easter' (the days before "
        "Easter), or 'none'",
        _EFFECTS,
        default="none",
        decomposition=False,
    ),
    Argument(
        "easter_days",
        WHOLE,
        "how many days before Easter Sunday the Easter effect lasts (with 'easter')",
        _EFFECTS,
        default_text=f"{EASTER_WINDOW_DAYS} (common practice)",
        decomposition=False,
        most=30,
    ),
    Argument(
        "special_days",
        DAY_LIST,
        "days with an effect of their own (see Holidays and outside variables), a list of "
        "`{day, name}`: each name becomes one coefficient, the days of that name a period "
        "holds its column; part of the calendar effect",
        _EFFECTS,
        default_text="none",
        decomposition=False,
        most=100_000,
    ),
    Argument(
        "outside_columns",
        NAME_LIST,
        "numeric (or true/false) columns of the input fitted beside the split, one "
        "coefficient each (price, promotion, temperature); their effect is `outside_effect`",
        _OUTSIDE,
        default_text="none",
        decomposition=False,
        most=50,
    ),
    Argument(
        "fill_gaps",
        FLAG,
        "also return a row for every time missing inside a series, marked `inserted`",
        (SPLIT, SPLIT_MULTI),
        default=False,
        decomposition=False,
    ),
    Argument(
        "on_error",
        TEXT,
        "'raise' fails at the first bad series; 'keep' goes on and says why in `status`",
        _EVERY_SPLIT,
        default="raise",
        choices=("raise", "keep"),
        decomposition=False,
    ),
    Argument(
        "rule",
        TEXT,
        "how a point is judged unusual: our stepwise test, or robust z-scores of the "
        "remainder; see tide_outliers",
        (OUTLIERS,),
        default="stepwise",
        choices=("stepwise", "mad"),
        decomposition=False,
    ),
    Argument(
        "significance",
        NUMBER,
        "the stepwise test's significance, per point: the share of pure noise's points flagged",
        (OUTLIERS,),
        default_text=f"{DEFAULT_SIGNIFICANCE:g} (with 'stepwise')",
        decomposition=False,
    ),
    Argument(
        "threshold",
        NUMBER,
        "the robust z-score beyond which 'mad' flags",
        (OUTLIERS,),
        default_text=f"{DEFAULT_MAD_THRESHOLD:g} (with 'mad')",
        decomposition=False,
    ),
    Argument(
        "all_rows",
        FLAG,
        "return every row with its flag, for joining back",
        (OUTLIERS,),
        default=False,
        decomposition=False,
    ),
    Argument(
        "steps_ahead",
        WHOLE,
        "how many steps ahead to forecast",
        (FORECAST,),
        default=12,
        decomposition=False,
        most=100_000,
    ),
    Argument(
        "coverage",
        NUMBER,
        "the share of future values the prediction intervals are to hold",
        (FORECAST,),
        default=0.95,
        decomposition=False,
    ),
    Argument(
        "trend_model",
        TEXT,
        "the forecast of the seasonally adjusted series: a damped trend, a random walk with "
        "drift, one without (flat), or per series the one of those that did best on its own "
        "past",
        (FORECAST,),
        default="damped",
        choices=("damped", "drift", "flat", "select"),
        decomposition=False,
    ),
    Argument(
        "sample",
        WHOLE,
        "how many keys to split again with the reference implementation (chosen by a hash "
        "of the key)",
        (AUDIT,),
        default=20,
        decomposition=False,
        most=100_000,
    ),
)


def default_of(name: str, function: str = SPLIT) -> Any:
    """The default of one argument in one function.

    >>> default_of("robust"), default_of("robust", OUTLIERS)
    (False, True)
    """
    return next(a for a in of(function) if a.name == name).default_in(function)


def of(function: str) -> tuple[Argument, ...]:
    """The arguments a function takes, in the registry's order.

    >>> [a.name for a in of("forecast")][-3:]
    ['steps_ahead', 'coverage', 'trend_model']
    """
    return tuple(a for a in REGISTRY if function in a.functions)


def _check_kind(argument: Argument, value: Any) -> Any:
    """The value as its kind, or ``ParamError``; ``None`` passes (it means the default)."""
    name, kind = argument.name, argument.kind
    if value is None:
        return None
    if kind == FLAG:
        if not isinstance(value, bool) and type(value).__name__ != "bool_":
            raise ParamError(f"{name} must be true or false, got {value!r}")
        return bool(value)
    if kind == TEXT:
        if not isinstance(value, str):
            raise ParamError(f"{name} must be text, got {value!r}")
        if argument.choices and value.lower() not in argument.choices:
            raise ParamError(f"{name} must be one of {', '.join(argument.choices)}, got {value!r}")
        return value.lower() if argument.choices else value
    if kind == WHOLE_LIST:
        if isinstance(value, (str, bytes)) or not hasattr(value, "__iter__"):
            raise ParamError(f"{name} must be a list of whole numbers, got {value!r}")
        return tuple(_at_most(argument, whole_number(name, v)) for v in value)
    if kind == NUMBER_LIST:
        if isinstance(value, (str, bytes)) or not hasattr(value, "__iter__"):
            raise ParamError(f"{name} must be a list of numbers, got {value!r}")
        return tuple(_check_kind(Argument(name, NUMBER, "", ()), v) for v in value)
    if kind == NAME_LIST:
        return _column_names(argument, value)
    if kind == DAY_LIST:
        return named_days(argument, value)
    if kind == WHOLE:
        return _at_most(argument, whole_number(name, value))
    if isinstance(value, bool) or (
        not isinstance(value, (int, float)) and not hasattr(value, "__float__")
    ):
        raise ParamError(f"{name} must be a number, got {value!r}")
    number = float(value)
    if not math.isfinite(number):
        raise ParamError(f"{name} must be finite, got {value!r}")
    return _at_most(argument, number)


def _count_at_most(argument: Argument, count: int) -> None:
    if argument.most is not None and count > argument.most:
        raise ParamError(
            f"{argument.name} takes at most {argument.most:,.0f} entries, got {count:,}"
        )


def _column_names(argument: Argument, value: Any) -> tuple[str, ...] | None:
    """Distinct column names (compared without case, as SQL does); an empty list is none."""
    name = argument.name
    if isinstance(value, (str, bytes)) or not hasattr(value, "__iter__"):
        raise ParamError(f"{name} must be a list of column names, got {value!r}")
    names = tuple(value)
    for item in names:
        if not isinstance(item, str) or not item:
            raise ParamError(f"{name} must hold column names (non-empty text), got {item!r}")
    folded = [n.lower() for n in names]
    twice = sorted({n for n in names if folded.count(n.lower()) > 1})
    if twice:
        raise ParamError(f"{name} names {twice[0]!r} more than once")
    _count_at_most(argument, len(names))
    return names or None


def named_days(argument: Argument, value: Any) -> tuple[tuple[int, str], ...] | None:
    """Named days as ``(day, name)`` pairs, days since 1970-01-01, sorted; from a list of
    ``{day, name}`` mappings or pairs, or a table (pandas or Arrow) with those columns.
    Days are dates (``datetime.date``, ``numpy.datetime64``, pandas timestamps or ISO text);
    a day named twice under one name counts once. An empty list is none.

    >>> named_days(next(a for a in REGISTRY if a.name == "special_days"),
    ...            [{"day": "2024-12-25", "name": "midwinter"}])
    ((20082, 'midwinter'),)
    """
    import numpy as np

    name = argument.name
    if hasattr(value, "to_pylist") and hasattr(value, "column_names"):
        value = value.to_pylist()  # an Arrow table
    elif hasattr(value, "to_dict") and hasattr(value, "columns"):
        value = value.to_dict("records")  # a pandas DataFrame
    if isinstance(value, (str, bytes, dict)) or not hasattr(value, "__iter__"):
        raise ParamError(f"{name} must be a list of {{day, name}} entries, got {value!r}")
    found: set[tuple[int, str]] = set()
    for i, entry in enumerate(value):
        if isinstance(entry, Mapping):
            unknown = sorted(set(entry) - {"day", "name"})
            if unknown:
                raise ParamError(f"{name} entries hold day and name; entry {i} has {unknown[0]!r}")
            day, label = entry.get("day"), entry.get("name")
        elif isinstance(entry, (tuple, list)) and len(entry) == 2:
            day, label = entry
        else:
            raise ParamError(f"{name} entry {i} must be {{day, name}}, got {entry!r}")
        if not isinstance(label, str) or not label.strip():
            raise ParamError(f"{name} entry {i} has no name (a non-empty text), got {label!r}")
        try:
            as_day = np.datetime64(day, "D") if day is not None else np.datetime64("NaT")
        except (TypeError, ValueError):
            raise ParamError(f"{name} entry {i} ({label}) has no date, got {day!r}") from None
        if np.isnat(as_day):
            raise ParamError(f"{name} entry {i} ({label}) has no date, got {day!r}")
        found.add((int(as_day.astype(np.int64)), label.strip()))
    _count_at_most(argument, len(found))
    return tuple(sorted(found)) or None


def _at_most(argument: Argument, value: Any) -> Any:
    if argument.most is not None and value is not None and value > argument.most:
        raise ParamError(f"{argument.name} must be at most {argument.most:,.0f}, got {value:g}")
    return value


def whole_number(name: str, value: Any) -> int | None:
    """A whole number given as any numeric type (None stays None); ``ParamError`` otherwise.

    >>> whole_number("steps_ahead", 12.0), whole_number("steps_ahead", None)
    (12, None)
    """
    if value is None:
        return None
    if isinstance(value, bool):
        raise ParamError(f"{name} must be a whole number, got {value!r}")
    try:
        as_float = float(value)
    except (TypeError, ValueError):
        raise ParamError(f"{name} must be a whole number, got {value!r}") from None
    if not math.isfinite(as_float) or as_float != int(as_float):
        raise ParamError(f"{name} must be a whole number, got {value!r}")
    return int(as_float)


def accept(function: str, given: Mapping[str, Any]) -> dict[str, Any]:
    """Every argument of ``function``: the given ones checked for kind and choices, the
    others at their defaults (``None`` where a published rule or the data decides).

    An unknown name is refused with the nearest known one suggested.

    >>> accept("forecast", {"steps_ahead": 6.0})["steps_ahead"], accept("forecast", {})["coverage"]
    (6, 0.95)
    >>> accept("split", {"sesonal_span": 7})
    Traceback (most recent call last):
    ...
    tidesplit.errors.ParamError: unknown argument sesonal_span of tide_split; did you mean \
season_span?
    """
    known = {a.name: a for a in of(function)}
    unknown = [name for name in given if name not in known]
    if unknown:
        name = unknown[0]
        near = difflib.get_close_matches(name, list(known), n=1)
        hint = f"; did you mean {near[0]}?" if near else f"; it takes {', '.join(known)}"
        raise ParamError(f"unknown argument {name} of tide_{function}{hint}")
    settings = {}
    for name, argument in known.items():
        value = _check_kind(argument, given.get(name))
        settings[name] = argument.default_in(function) if value is None else value
    return settings


def signature(functions: tuple[str, ...], lead: list[inspect.Parameter]) -> inspect.Signature:
    """The Python signature of a front serving ``functions``: its ``lead`` parameters, then
    every argument of theirs as a keyword with its default (the first function's)."""
    named: dict[str, inspect.Parameter] = {}
    for function in functions:
        for a in of(function):
            if a.name not in named and a.name not in {p.name for p in lead}:
                default = a.default_in(function)
                named[a.name] = inspect.Parameter(
                    a.name, inspect.Parameter.KEYWORD_ONLY, default=default
                )
    return inspect.Signature([*lead, *named.values()])


def default_words(argument: Argument) -> str:
    """How README and help texts state an argument's default.

    >>> default_words(next(a for a in REGISTRY if a.name == "robust"))
    'false, true in tide_outliers'
    """
    return _default_words(argument)


def numpydoc_section(
    functions: tuple[str, ...], skip: tuple[str, ...] = ("period",), indent: str = "    "
) -> str:
    """An "Other Parameters" docstring section of every argument of ``functions`` (but
    ``skip``, which the function's own Parameters describe).

    >>> numpydoc_section(("forecast",)).splitlines()[2].strip()
    'periods : list of whole numbers, optional'
    """
    lines = [f"{indent}Other Parameters", f"{indent}----------------"]
    seen: set[str] = set(skip)
    for function in functions:
        for a in of(function):
            if a.name in seen:
                continue
            seen.add(a.name)
            meaning = a.meaning.replace("`", "``")
            if a.choices:
                meaning += f" (one of {', '.join(repr(c) for c in a.choices)})"
            if a.most is not None:
                meaning += f"; at most {a.most:,.0f}"
            lines.append(f"{indent}{a.name} : {a.kind}, optional")
            lines.append(f"{indent}    {meaning}. Default: {_default_words(a).replace('`', '')}.")
    return "\n".join(lines)


def _default_words(argument: Argument) -> str:
    if argument.default_text:
        return argument.default_text
    shown = {True: "true", False: "false"}.get(argument.default, argument.default)
    words = f"`'{shown}'`" if isinstance(argument.default, str) else f"{shown}"
    others = [f"{'true' if v is True else v} in tide_{f}" for f, v in argument.default_for]
    return ", ".join([words, *others])


def markdown_table() -> str:
    """README's argument table, written from the registry.

    >>> markdown_table().splitlines()[0]
    '| argument | default | functions | meaning |'
    """
    lines = ["| argument | default | functions | meaning |", "| --- | --- | --- | --- |"]
    for argument in REGISTRY:
        takers = (
            "all"
            if set(argument.functions) == set(_EVERY_SPLIT)
            else ", ".join(f"`tide_{f}`" for f in argument.functions)
        )
        meaning = argument.meaning
        if argument.choices:
            meaning += f" ({', '.join(repr(c) for c in argument.choices)})"
        if argument.most is not None:
            meaning += f"; at most {argument.most:,.0f}"
        lines.append(f"| `{argument.name}` | {_default_words(argument)} | {takers} | {meaning} |")
    return "\n".join(lines)


if __name__ == "__main__":
    print(markdown_table())
