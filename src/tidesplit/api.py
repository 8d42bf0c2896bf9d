"""The Python front: one series (``split``) or a keyed table (``split_table``)."""

from __future__ import annotations

import inspect
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from . import answers, arguments, forecast_ahead, series_profile, unusual
from . import effects as effects_front
from .answers import COMPONENTS
from .arguments import AUDIT, FORECAST, OUTLIERS, PROFILE, SPLIT, SPLIT_LIST, SPLIT_MULTI
from .batch_split import segment_counts
from .errors import ParamError
from .keyed_split import RowsResult, split_rows
from .params import SplitParams
from .status import OK, split_mask


@dataclass(frozen=True)
class Split:
    """The components of one series, on the transformed scale except ``adjusted``.

    ``remainder`` and ``weight`` are NaN where the value was missing; ``adjusted`` (the
    seasonally adjusted series) is on the original scale.
    """

    observed: np.ndarray
    trend: np.ndarray
    seasonal: np.ndarray
    remainder: np.ndarray
    adjusted: np.ndarray
    weight: np.ndarray
    period: int
    boxcox_lambda: float | None
    index: pd.Index | None = None
    seasonal_parts: dict[int, np.ndarray] | None = None  # per period, with several periods
    season_span: int | None = None  # the spans split with (chosen with choose_spans)
    trend_span: int | None = None
    # no calendar effects without times: zero, and adjusted as it is
    calendar_effect: np.ndarray | None = None
    outside_effect: np.ndarray | None = None
    adjusted_season_only: np.ndarray | None = None

    def to_frame(self) -> pd.DataFrame:
        """The components as columns of a DataFrame (the input's index, if it had one).

        >>> split([1.0, 5, 3, 7] * 4, period=4).to_frame().columns.tolist()
        ['value', 'trend', 'seasonal', 'remainder', 'adjusted', 'weight', 'calendar_effect', \
'outside_effect', 'adjusted_season_only']
        """
        data = {"value": self.observed} | {name: getattr(self, name) for name in COMPONENTS}
        return pd.DataFrame(data, index=self.index)


def split(values: Any, period: int | None = None, **given: Any) -> Split:
    """Split one series into trend, seasonal and remainder by STL.

    Parameters
    ----------
    values : array-like of numbers; None or NaN marks a missing value.
    period : points per seasonal cycle (12 for monthly data with a yearly cycle); left
        out, it is estimated from the autocorrelation (see ``calendar.estimate_period``).
    **given : season_span, trend_span, lowpass_span, the three degrees and jumps, robust,
        inner_loops, outer_loops, transform ('none', 'log', 'boxcox') and boxcox_lambda
        (None with 'boxcox': chosen by Guerrero's method), choose_spans (season and trend
        span chosen from the data); or, instead of ``period``,
        ``periods=[24, 168]`` for several seasonal periods (MSTL) with ``season_spans``
        and ``iterations``.

    Returns
    -------
    Split
        The components (``seasonal_parts`` by period with several), the period and the
        Box-Cox lambda used.

    Notes
    -----
    STL after Cleveland, Cleveland, McRae & Terpenning (1990); MSTL after Bandara,
    Hyndman & Bergmeir (2021). The series raises ``SplitError`` when it cannot be split.

    Examples
    --------
    >>> y = [10, 14, 9, 7, 11, 15, 10, 8, 12, 16, 11, 9]
    >>> parts = split(y, period=4)
    >>> bool(np.allclose(parts.trend + parts.seasonal + parts.remainder, y))
    True
    """
    index = values.index if isinstance(values, pd.Series) else None
    observed = pd.to_numeric(pd.Series(np.asarray(values, dtype=object)), errors="raise")
    y = observed.to_numpy(dtype=np.float64, na_value=np.nan)
    function = SPLIT_MULTI if given.get("periods") is not None else SPLIT_LIST
    settings = arguments.accept(function, given if period is None else {"period": period, **given})
    if settings["on_error"] != "raise":
        raise ParamError("split() splits one series and raises; split_table() can keep going")
    if "fill_gaps" in given:
        raise ParamError(
            "split() takes consecutive points without times; fill_gaps needs times (split_table)"
        )
    settings = SplitParams.from_settings(settings)
    # split_rows, so that a period left out is estimated from the data (integer positions)
    result = split_rows(
        y, np.array([0, y.size]), settings, label=lambda i: "(the series)", on_error="raise"
    ).batch
    lam = result.lambdas[0]
    parts = None
    if result.seasonal_parts is not None:
        kept = result.series_periods[0]
        parts = {p: result.seasonal_parts[k] for k, p in enumerate(kept)}
    return Split(
        seasonal_parts=parts,
        observed=y,
        trend=result.trend,
        seasonal=result.seasonal,
        remainder=result.remainder,
        adjusted=result.adjusted,
        weight=result.weight,
        period=int(result.periods[0]),
        boxcox_lambda=None if np.isnan(lam) else float(lam),
        index=index,
        season_span=int(result.season_spans[0]) if parts is None else None,
        trend_span=int(result.trend_spans[0]) if parts is None else None,
        calendar_effect=result.calendar_effect,
        outside_effect=result.outside_effect,
        adjusted_season_only=result.adjusted_season_only,
    )


def _time_codes(times: pd.Series) -> tuple[np.ndarray, np.ndarray, str, str | None]:
    """Sortable int64 codes of a time column, its null mask, kind and time zone.

    Dates and timestamps become microseconds since 1970-01-01 (UTC when zone-aware).
    """
    nulls = times.isna().to_numpy()
    if pd.api.types.is_datetime64_any_dtype(times):
        zone = getattr(times.dt, "tz", None)
        stamps = times.dt.tz_convert("UTC").dt.tz_localize(None) if zone else times
        codes = stamps.astype("datetime64[us]").astype("int64").to_numpy()
        kind = "timestamptz" if zone else "timestamp"
        return np.where(nulls, 0, codes), nulls, kind, None if zone is None else str(zone)
    if times.dtype == object and not pd.api.types.is_numeric_dtype(times):
        converted = pd.to_datetime(times, errors="coerce")
        if converted.notna().sum() == (~nulls).sum():
            codes, nulls, kind, zone = _time_codes(converted)
            is_date = all(not hasattr(v, "hour") for v in times[~nulls].head(50))
            return codes, nulls, "date" if is_date and kind == "timestamp" else kind, zone
    filled = times.fillna(0) if nulls.any() else times
    return filled.to_numpy().astype(np.int64), nulls, "integer", None


def _exact_keys(data: Any, keys: list[str]) -> dict[str, list]:
    """Key columns of an Arrow table that pandas would change, as Python values: floats (pandas
    has no NULL apart from NaN, which SQL groups apart), integers with NULLs (pandas makes
    them floats, which merges keys beyond 2**53) and nested values (structs, lists)."""
    import pyarrow as pa

    exact = {}
    for name in keys:
        if name not in data.column_names:
            continue  # named in the error that follows
        column = data.column(name)
        kind = column.type
        if (
            pa.types.is_floating(kind)
            or pa.types.is_nested(kind)
            or (pa.types.is_integer(kind) and column.null_count)
        ):
            exact[name] = column.to_pylist()
    return exact


def _canonical(value: Any) -> tuple:
    """A key value as a sortable, hashable tuple, ordered as SQL orders keys: values first,
    then NaN, then NULL; structs field by field, lists item by item."""
    if value is None or value is pd.NA or value is pd.NaT:
        return (2,)
    if isinstance(value, float) and value != value:
        return (1,)
    if isinstance(value, dict):
        return (0, tuple((k, _canonical(v)) for k, v in value.items()))
    if isinstance(value, list | tuple | np.ndarray):
        return (0, tuple(_canonical(v) for v in value))
    return (0, value)


def _key_codes(column: pd.Series) -> np.ndarray:
    """Integer ranks of a key column: equal keys share one, in key order, NULL last.

    An object column (structs, lists, or values read exactly from Arrow) keeps NaN apart from
    NULL, as SQL does; a pandas float column holds only NaN, which DuckDB reads as NULL, so
    there the two are one group in both fronts.

    >>> _key_codes(pd.Series([None, float("nan"), 2.0], dtype=object)).tolist()
    [2, 1, 0]
    """
    if column.dtype != object:
        codes, uniques = pd.factorize(column, sort=True, use_na_sentinel=True)
        return np.where(codes < 0, len(uniques), codes)
    canonical = [_canonical(v) for v in column.to_numpy()]
    try:
        order = sorted(set(canonical))
    except TypeError:  # values of several types in one column: an order of our own
        order = sorted(set(canonical), key=repr)
    rank = {c: i for i, c in enumerate(order)}
    return np.array([rank[c] for c in canonical], dtype=np.int64)


def _codes_to_times(codes: np.ndarray, kind: str, zone: str | None) -> pd.Series:
    if kind == "integer":
        return pd.Series(codes)
    stamps = pd.Series(codes.astype("datetime64[us]"))
    if kind == "timestamptz":
        return stamps.dt.tz_localize("UTC").dt.tz_convert(zone)
    if kind == "date":
        return stamps.dt.date
    return stamps


def _with_gaps(times: pd.Series, size: int) -> pd.Series:
    """Times placed at their rows of ``size`` rows (index), missing elsewhere; integer times
    stay integers (nullable)."""
    placed = times.reindex(np.arange(size))
    return placed.astype("Int64") if pd.api.types.is_integer_dtype(times) else placed


class _Table:
    """A keyed table sorted into series: the common first step of the table functions."""

    def __init__(
        self,
        data: Any,
        key: str | Sequence[str],
        time: str,
        value: str,
        answer: tuple[str, ...],
        outside: Sequence[str] | None = None,
    ) -> None:
        keys = [key] if isinstance(key, str) else list(key)
        outside = list(outside or ())
        exact = {} if isinstance(data, pd.DataFrame) else _exact_keys(data, keys)
        frame = data if isinstance(data, pd.DataFrame) else data.to_pandas()
        missing = [c for c in [*keys, time, value, *outside] if c not in frame.columns]
        if missing:
            raise KeyError(
                f"no column(s) named {', '.join(missing)}; the table has "
                f"{', '.join(map(str, frame.columns))}"
            )
        clashes = answers.name_clashes(keys, time, value, answer)
        clashes += answers.outside_clashes(keys, time, value, outside)
        if clashes:
            raise ParamError("; ".join(clashes))
        for name in outside:
            column = frame[name]
            if not (pd.api.types.is_numeric_dtype(column) or pd.api.types.is_bool_dtype(column)):
                raise ParamError(
                    f"the outside column {name!r} holds {column.dtype}; give numbers or true/false"
                )
        outside_frame = frame[outside].copy()
        frame = frame[[*keys, time, value]].copy()
        for i, name in enumerate(outside):
            frame[f"__outside{i}"] = outside_frame[name].to_numpy()
        for name, values in exact.items():
            frame[name] = pd.Series(values, index=frame.index, dtype=object)
        codes, time_nulls, self.kind, self.zone = _time_codes(frame[time])
        frame["__code"] = codes
        frame["__null_time"] = time_nulls
        key_codes = [f"__key{i}" for i in range(len(keys))]
        for name, column in zip(key_codes, keys, strict=True):
            frame[name] = _key_codes(frame[column])
        order = [*key_codes, "__null_time", "__code", value]
        frame = frame.sort_values(order, kind="stable", na_position="last")
        self.frame = frame.drop(columns=key_codes).reset_index(drop=True)
        ranks = frame[key_codes].to_numpy()
        changed = np.ones(len(frame), dtype=bool)
        changed[1:] = (ranks[1:] != ranks[:-1]).any(axis=1)
        self.starts = np.flatnonzero(changed)
        self.offsets = np.append(self.starts, len(frame)).astype(np.int64)
        self.values = pd.to_numeric(self.frame[value]).to_numpy(dtype=np.float64, na_value=np.nan)
        self.outside = (
            np.column_stack(
                [
                    self.frame[f"__outside{i}"]
                    .astype("Float64")
                    .to_numpy(np.float64, na_value=np.nan)
                    for i in range(len(outside))
                ]
            )
            if outside
            else None
        )
        self.first_rows = self.frame.iloc[self.starts][keys]
        self.keys, self.time, self.value = keys, time, value
        self.status = [OK] * self.starts.size
        nulls = segment_counts(self.frame["__null_time"].to_numpy(), self.offsets)
        for i in np.flatnonzero(nulls):
            self.status[i] = "a time is NULL"

    def label(self, i: int) -> str:
        row = self.first_rows.iloc[i]
        # plain Python values, so a key reads as SQL shows it (1, not np.int64(1))
        shown = {k: row[k].item() if hasattr(row[k], "item") else row[k] for k in self.keys}
        return "{" + ", ".join(f"{k!r}: {v!r}" for k, v in shown.items()) + "}"

    def split(self, settings: dict[str, Any], fill_gaps: bool) -> RowsResult:
        on_error = settings["on_error"]
        return split_rows(
            self.values,
            self.offsets,
            SplitParams.from_settings(settings),
            codes=self.frame["__code"].to_numpy(),
            kind=self.kind,
            time_zone=self.zone,
            label=self.label,
            status=list(self.status),
            on_error=on_error,
            fill_gaps=fill_gaps,
            effects=effects_front.request(settings),
            outside=self.outside,
        )

    def key_frame(self, series_of_rows: np.ndarray) -> pd.DataFrame:
        """The key columns repeated for the given series indices."""
        return self.first_rows.iloc[series_of_rows].reset_index(drop=True)


def _settings(function: str, period: int | None, given: dict[str, Any]) -> dict[str, Any]:
    """Every argument of ``function``, checked, defaults filled in (``arguments.accept``)."""
    return arguments.accept(function, given if period is None else {"period": period, **given})


_TABLE_PARAMETERS = """\
    Parameters
    ----------
    data : pandas.DataFrame or pyarrow.Table
        The keyed table; other columns are left out of the answer.
    key : str or sequence of str
        The key column(s), exact names; NULL keys form a group of their own.
    time : str
        An integer, date or timestamp column (README, "Time columns").
    value : str
        The numbers to split; NULL and NaN are missing values.
    period : int, optional
        Points per seasonal cycle; implied by the time step when left out.
    **given
        Every other argument, by name (Other Parameters).

    Returns
    -------
    pandas.DataFrame
        The key column(s), then the columns of ``answers.{columns}``, in that order.
"""


def _signed(function: Any, functions: tuple[str, ...], columns: str, notes: str) -> Any:
    """Give a public function the signature and the numpydoc sections its arguments and
    its answer's columns make, from the registry and ``answers``."""
    lead = [
        inspect.Parameter(name, inspect.Parameter.POSITIONAL_OR_KEYWORD)
        for name in ("data", "key", "time", "value")
    ]
    lead.append(inspect.Parameter("period", inspect.Parameter.POSITIONAL_OR_KEYWORD, default=None))
    function.__signature__ = arguments.signature(functions, lead)
    sections = (
        _TABLE_PARAMETERS.format(columns=columns)
        + "\n"
        + arguments.numpydoc_section(functions)
        + "\n\n    Notes\n    -----\n"
        + notes
        + "\n\n"
    )
    head, examples = function.__doc__.split("    Examples\n", 1)
    function.__doc__ = head + sections + "    Examples\n" + examples
    return function


def _part_columns(
    parts: np.ndarray, series_periods: list[tuple[int, ...]], lengths: np.ndarray
) -> dict[str, np.ndarray]:
    """``seasonal_period_<period>`` columns, one per period any series used (NaN where a
    series did not use it). Plain columns rather than a dict per row: pandas handles them
    natively, and building millions of dicts took as long as the split itself."""
    columns = {}
    for period in sorted({p for periods in series_periods for p in periods}):
        part_of = np.array(
            [periods.index(period) if period in periods else -1 for periods in series_periods],
            dtype=np.int64,
        )
        row_part = np.repeat(part_of, lengths)
        rows = np.flatnonzero(row_part >= 0)
        column = np.full(row_part.size, np.nan)
        column[rows] = parts[row_part[rows], rows]
        columns[f"seasonal_period_{period}"] = column
    return columns


def _spans_used(result: RowsResult) -> dict[str, np.ndarray]:
    """The season and trend span of each series, NaN where it was not split (as period)."""
    return {
        name: np.where(used >= 0, used, np.nan)
        for name, used in (
            ("season_span", result.batch.season_spans),
            ("trend_span", result.batch.trend_spans),
        )
    }


def split_table(
    data: Any,
    key: str | Sequence[str],
    time: str,
    value: str,
    period: int | None = None,
    **given: Any,
) -> pd.DataFrame:
    """Split every series of a keyed table (pandas DataFrame or Arrow table).

    Returns one row per input row, ordered by key and time: the key column(s), time and
    value under their own names, then trend, seasonal, remainder, adjusted, weight,
    inserted, the period, season and trend span used, the Box-Cox lambda and status
    (``'ok'``, or why the series was left unsplit under ``on_error='keep'``). With
    ``fill_gaps=True`` there is also a row for every time missing inside a series
    (``inserted`` true, value NaN). With ``periods=[...]`` (or
    ``periods=[]`` for those the step implies) the split has several seasonal periods, one
    ``seasonal_period_<period>`` column each (``seasonal_period_24``,
    ``seasonal_period_168``; NaN for a series that did not use that period) and a
    ``periods`` column. NULL keys form a group of their own.

    Examples
    --------
    >>> frame = pd.DataFrame({"shop": ["a"] * 8 + ["b"] * 8, "t": list(range(8)) * 2,
    ...                       "units": [3.0, 5, 4, 6, 3, 5, 4, 6] * 2})
    >>> split_table(frame, "shop", "t", "units", period=2).shape
    (16, 17)
    """
    multi = given.get("periods") is not None
    settings = _settings(SPLIT_MULTI if multi else SPLIT, period, given)
    answer = answers.SPLIT_MULTI if multi else answers.SPLIT
    table = _Table(data, key, time, value, answer, settings.get("outside_columns"))
    frame, keys, starts, first_rows, kind, zone = (
        table.frame,
        table.keys,
        table.starts,
        table.first_rows,
        table.kind,
        table.zone,
    )
    result = table.split(settings, fill_gaps=settings["fill_gaps"])
    lengths = np.diff(result.offsets)
    if result.source is not None:
        source = result.source
        taken = frame.iloc[np.where(source >= 0, source, 0)].reset_index(drop=True)
        out = taken[keys].copy()
        series_of = np.repeat(np.arange(starts.size), lengths)
        out[keys] = first_rows.iloc[series_of].to_numpy()
        # input rows keep their own time (a series left unsplit keeps even a NULL or a
        # repeated one); inserted rows take the grid's
        grid_times = _codes_to_times(result.codes, kind, zone)
        out[time] = grid_times.where(source < 0, taken[time])
        if kind == "integer":
            out[time] = out[time].astype("Int64")
        out[value] = np.where(
            source >= 0, taken[value].to_numpy(dtype=float, na_value=np.nan), np.nan
        )
    else:
        out = frame[[*keys, time, value]].copy()
    for name in COMPONENTS:
        out[name] = getattr(result, name)
    if result.seasonal_parts is not None:
        parts = _part_columns(result.seasonal_parts, result.batch.series_periods, lengths)
        out = out.assign(**parts)
    out["inserted"] = result.inserted
    if result.seasonal_parts is not None:
        per_series = np.empty(lengths.size, dtype=object)
        per_series[:] = result.batch.series_periods
        out["periods"] = np.repeat(per_series, lengths)
    else:
        used = result.batch.periods.astype(float)
        out["period"] = np.repeat(np.where(used > 0, used, np.nan), lengths)
        for name, spans in _spans_used(result).items():
            out[name] = np.repeat(spans, lengths)
    out["boxcox_lambda"] = np.repeat(result.batch.lambdas, lengths)
    out["status"] = np.repeat(np.array(result.status, dtype=object), lengths)
    return out


def profile(
    data: Any,
    key: str | Sequence[str],
    time: str,
    value: str,
    period: int | None = None,
    **given: Any,
) -> pd.DataFrame:
    """One row per series: points, missing points, time step, period(s), lambda, trend and
    seasonal strength (Wang, Smith & Hyndman 2006), peak and trough of the cycle, seasonal
    amplitude, remainder spread, share down-weighted, remainder lag-1 autocorrelation, status.

    Examples
    --------
    >>> t = np.arange(48)
    >>> frame = pd.DataFrame({"k": "a", "t": t, "v": 10 + np.sin(2 * np.pi * t / 12)})
    >>> float(profile(frame, "k", "t", "v", period=12)["strength_of_season"].iloc[0].round(2))
    1.0
    """
    settings = _settings(PROFILE, period, given)
    table = _Table(data, key, time, value, answers.PROFILE, settings.get("outside_columns"))
    result = table.split(settings, fill_gaps=True)
    found = series_profile.profile(result, table.kind)
    out = table.key_frame(np.arange(table.starts.size))
    out["points"] = found.points
    out["missing"] = found.missing
    out["time_step"] = found.step
    for k, name in enumerate(series_profile.PROFILE_COLUMNS):
        out[name] = found.values[:, k]
    out["strength_by_period"] = found.strength_by_period or [None] * len(out)
    out["peak_position"] = np.where(found.peak >= 0, found.peak, np.nan)
    out["peak_label"] = found.peak_label
    out["trough_position"] = np.where(found.trough >= 0, found.trough, np.nan)
    out["trough_label"] = found.trough_label
    out["effects"] = _effect_lists(result.batch.coefficients, len(out))
    used = result.batch.periods
    out["period"] = np.where(used > 0, used, np.nan)
    several = result.batch.series_periods or [(int(u),) if u > 0 else () for u in used]
    out["periods"] = [list(p) if p else None for p in several]
    for name, spans in _spans_used(result).items():
        out[name] = spans
    out["boxcox_lambda"] = result.batch.lambdas
    out["status"] = result.status
    return out


def _effect_lists(
    coefficients: list[list[tuple[str, float, float, float]] | None] | None, count: int
) -> list[list[dict[str, Any]] | None]:
    """Each series' coefficients as a list of dicts (the SQL front's list of structs)."""
    if coefficients is None:
        return [None] * count
    keys = ("name", "coefficient", "std_error", "t_value")
    return [
        None if rows is None else [dict(zip(keys, row, strict=True)) for row in rows]
        for rows in coefficients
    ]


def outliers(
    data: Any,
    key: str | Sequence[str],
    time: str,
    value: str,
    period: int | None = None,
    **given: Any,
) -> pd.DataFrame:
    """Rows whose remainder is too far out to be noise, with a score, the direction and the
    expected value (trend + seasonal, on the original scale); all rows with ``all_rows``.

    ``rule='stepwise'`` (default) tests the most extreme remainders one after another
    (Rosner's 1983 generalized extreme Studentized deviate procedure) at ``significance``
    (default 0.0005, per point: the share of pure noise's points flagged); ``rule='mad'``
    flags robust z-scores beyond ``threshold`` (default 3.5). See
    ``unusual.unusual_points``.

    The split is robust by default, so that the points being judged do not pull the fit
    towards themselves.

    Examples
    --------
    >>> t = np.arange(120)
    >>> v = 10 + np.sin(2 * np.pi * t / 12) + np.random.default_rng(1).normal(0, 0.1, 120)
    >>> v[30] += 5
    >>> frame = pd.DataFrame({"k": "a", "t": t, "v": v})
    >>> row = outliers(frame, "k", "t", "v", period=12).query("t == 30").iloc[0]
    >>> row["direction"], float(row["expected"].round(1))
    ('high', 10.0)
    """
    settings = _settings(OUTLIERS, period, given)
    table = _Table(data, key, time, value, answers.OUTLIERS, settings.get("outside_columns"))
    result = table.split(settings, fill_gaps=True)
    found = unusual.unusual_points(
        result,
        settings["rule"],
        settings["threshold"],
        settings["significance"],
        SplitParams.from_settings(settings),
    )
    rows = result.source >= 0
    out = table.frame[[*table.keys, table.time, table.value]].copy()
    out["expected"] = found.expected[rows]
    out["remainder"] = found.remainder[rows]
    out["score"] = found.score[rows]
    out["direction"] = np.array(found.direction, dtype=object)[rows]
    out["weight"] = result.weight[rows]
    out["is_outlier"] = found.flagged[rows]
    out["status"] = np.repeat(np.array(result.status, dtype=object), np.diff(table.offsets))
    if settings["all_rows"]:
        return out
    keep = out["is_outlier"] | ~split_mask(out["status"].tolist())
    return out[keep].reset_index(drop=True)


def forecast(
    data: Any,
    key: str | Sequence[str],
    time: str,
    value: str,
    period: int | None = None,
    **given: Any,
) -> pd.DataFrame:
    """Future rows per series, ``steps_ahead`` of them, with prediction intervals that are to
    hold ``coverage`` of future values.

    The decomposition forecast: the seasonal part carried forward from the last cycle, the
    seasonally adjusted series forecast by a damped trend (``trend_model='damped'``), a random
    walk with drift (``'drift'``) or without (``'flat'``), or per series whichever did best
    on its own past (``'select'``), added back and inverse-transformed; intervals
    calibrated on the series' own past (see ``forecast_ahead.forecast``).

    Examples
    --------
    >>> t = np.arange(48)
    >>> frame = pd.DataFrame({"k": "a", "t": t, "v": 10 + 0.1 * t + np.sin(2 * np.pi * t / 12)})
    >>> forecast(frame, "k", "t", "v", period=12, steps_ahead=3, trend_model="drift")["t"].tolist()
    [48, 49, 50]
    """
    settings = _settings(FORECAST, period, given)
    horizon, level, method = forecast_ahead.forecast_arguments(
        settings["steps_ahead"], settings["coverage"], settings["trend_model"]
    )
    on_error = settings["on_error"]
    table = _Table(data, key, time, value, answers.FORECAST, settings.get("outside_columns"))
    result = table.split(settings, fill_gaps=True)
    ahead = forecast_ahead.forecast(
        result,
        table.kind,
        table.zone,
        horizon,
        level,
        method,
        params=SplitParams.from_settings(settings),
        effects=effects_front.request(settings),
    )
    ok = forecast_ahead.settle_forecast(result, ahead, on_error, table.label)
    # steps_ahead rows per series; one row beside the status of a series left unsplit
    counts = np.where(ok, horizon, 1)
    present = np.repeat(ok, counts)
    out = table.key_frame(np.repeat(np.arange(ok.size), counts))
    times = _codes_to_times(ahead.codes, table.kind, table.zone).to_numpy()
    out[table.time] = _with_gaps(pd.Series(times, index=np.flatnonzero(present)), present.size)
    for name, values in (
        ("steps_ahead", ahead.step),
        ("forecast", ahead.point),
        ("low", ahead.lower),
        ("high", ahead.upper),
    ):
        column = np.full(present.size, np.nan)
        column[present] = values
        out[name] = column
    out["steps_ahead"] = out["steps_ahead"].astype("Int64")
    out["status"] = np.repeat(np.array(result.status, dtype=object), counts)
    return out


def audit(
    data: Any,
    key: str | Sequence[str],
    time: str,
    value: str,
    period: int | None = None,
    **given: Any,
) -> pd.DataFrame:
    """Split a sample of the series again with statsmodels' STL (or MSTL with several
    periods) under the same settings, and give the largest difference of each component.

    A check an ELT job or an auditor can run on a fleet's numbers against the reference
    implementation. ``sample`` keys (default 20) are chosen by a hash of the key. Where
    statsmodels cannot follow the settings (missing values on the series' grid, a fixed
    seasonal pattern, settings its functions do not take), the status says so and no
    difference is given.

    Examples
    --------
    >>> t = np.arange(96)
    >>> frame = pd.DataFrame({"k": np.repeat(["a", "b"], 48), "t": np.tile(t[:48], 2),
    ...                       "v": 10 + np.sin(2 * np.pi * t / 12) + 0.01 * t})
    >>> found = audit(frame, "k", "t", "v", period=12)
    >>> found["reference"].tolist(), bool(found["trend_gap"].max() < 1e-8)
    (['statsmodels STL', 'statsmodels STL'], True)
    """
    from .crosscheck import audit as _audit
    from .crosscheck import sample_by_hash

    settings = _settings(AUDIT, period, given)
    table = _Table(data, key, time, value, answers.AUDIT)
    chosen = sample_by_hash([table.label(i) for i in range(table.starts.size)], settings["sample"])
    rows = np.concatenate(
        [np.arange(table.offsets[i], table.offsets[i + 1]) for i in chosen]
        or [np.zeros(0, dtype=np.int64)]
    )
    lengths = np.diff(table.offsets)[chosen]
    params = SplitParams.from_settings(settings)
    result = split_rows(
        table.values[rows],
        np.concatenate(([0], np.cumsum(lengths))).astype(np.int64),
        params,
        codes=table.frame["__code"].to_numpy()[rows],
        kind=table.kind,
        time_zone=table.zone,
        label=lambda i: table.label(int(chosen[i])),
        status=[table.status[i] for i in chosen],
        on_error=settings["on_error"],
        fill_gaps=True,
    )
    found = _audit(result, params)
    out = table.key_frame(chosen)
    out["reference"] = found.reference
    out["points_compared"] = found.compared
    for k, name in enumerate(("trend_gap", "seasonal_gap", "remainder_gap")):
        out[name] = found.gaps[:, k]
    out["status"] = found.status
    return out


_signed(
    split_table,
    (SPLIT, SPLIT_MULTI),
    "SPLIT_COLUMNS",
    "    STL as published by Cleveland, Cleveland, McRae & Terpenning (1990), with the\n"
    "    reference routines' details; several periods by MSTL (Bandara, Hyndman & Bergmeir\n"
    "    2021). With several periods, one ``seasonal_period_<p>`` column per period stands\n"
    "    for SQL's ``seasonal_by_period``.",
)
_signed(
    profile,
    (PROFILE,),
    "PROFILE_COLUMNS",
    "    Strengths of trend and season after Wang, Smith & Hyndman (2006).",
)
_signed(
    outliers,
    (OUTLIERS,),
    "OUTLIERS_COLUMNS",
    "    The stepwise rule tests departures from the neighbours by Rosner's (1983)\n"
    "    generalized extreme Studentized deviate procedure (README, tide_outliers).",
)
_signed(
    forecast,
    (FORECAST,),
    "FORECAST_COLUMNS",
    "    The damped trend is Gardner & McKenzie's (1985); the intervals are scaled by the\n"
    "    series' own rolling-origin errors as split conformal prediction does (Vovk,\n"
    "    Gammerman & Shafer 2005).",
)
_signed(
    audit,
    (AUDIT,),
    "AUDIT_COLUMNS",
    "    The reference is statsmodels' ``STL`` (a port of the authors' reference routines)\n"
    "    or ``MSTL``.",
)
