"""The Python front: one series (``split``) or a keyed table (``split_table``)."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from .decompose import OK, BatchResult, split_batch
from .params import SplitParams

COMPONENTS = ("trend", "seasonal", "remainder", "adjusted", "weight")


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

    def to_frame(self) -> pd.DataFrame:
        """The components as columns of a DataFrame (the input's index, if it had one).

        >>> split([1.0, 5, 3, 7] * 4, period=4).to_frame().columns.tolist()
        ['value', 'trend', 'seasonal', 'remainder', 'adjusted', 'weight']
        """
        data = {"value": self.observed} | {name: getattr(self, name) for name in COMPONENTS}
        return pd.DataFrame(data, index=self.index)


def split(values: Any, period: int | None = None, **params: Any) -> Split:
    """Split one series into trend, seasonal and remainder by STL.

    Parameters
    ----------
    values : array-like of numbers; None or NaN marks a missing value.
    period : points per seasonal cycle (12 for monthly data with a yearly cycle).
    **params : season_span, trend_span, lowpass_span, the three degrees and jumps, robust,
        inner_loops, outer_loops, transform ('none', 'log', 'boxcox') and boxcox_lambda
        (None with 'boxcox': chosen by Guerrero's method).

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
    settings = SplitParams.from_kwargs(period=period, **params)
    result = split_batch(
        y, np.array([0, y.size]), settings, label=lambda i: "(the series)", on_error="raise"
    )
    lam = result.lambdas[0]
    return Split(
        observed=y,
        trend=result.trend,
        seasonal=result.seasonal,
        remainder=result.remainder,
        adjusted=result.adjusted,
        weight=result.weight,
        period=int(result.periods[0]),
        boxcox_lambda=None if np.isnan(lam) else float(lam),
        index=index,
    )


def _time_codes(times: pd.Series) -> tuple[np.ndarray, np.ndarray]:
    """Sortable int64 codes of a time column (microseconds for dates and timestamps)."""
    nulls = times.isna().to_numpy()
    if pd.api.types.is_datetime64_any_dtype(times):
        codes = times.dt.tz_convert("UTC") if getattr(times.dt, "tz", None) else times
        codes = codes.astype("datetime64[us]").astype("int64", copy=False)
        return np.where(nulls, 0, codes.to_numpy()), nulls
    if isinstance(times.dtype, pd.ArrowDtype) or times.dtype == object:
        converted = pd.to_datetime(times, utc=False, errors="coerce")
        if converted.notna().sum() == (~nulls).sum() and not pd.api.types.is_numeric_dtype(times):
            return _time_codes(converted)
    filled = times.fillna(0) if nulls.any() else times
    return filled.to_numpy().astype(np.int64), nulls


def split_table(
    data: Any,
    key: str | Sequence[str],
    time: str,
    value: str,
    period: int | None = None,
    *,
    on_error: str = "raise",
    **params: Any,
) -> pd.DataFrame:
    """Split every series of a keyed table (pandas DataFrame or Arrow table).

    Returns one row per input row, ordered by key and time: the key column(s), time and
    value under their own names, then trend, seasonal, remainder, adjusted, weight and
    status (``'ok'``, or why the series was left unsplit under ``on_error='keep'``).
    NULL keys form a group of their own.

    Examples
    --------
    >>> frame = pd.DataFrame({"shop": ["a"] * 8 + ["b"] * 8, "t": list(range(8)) * 2,
    ...                       "units": [3.0, 5, 4, 6, 3, 5, 4, 6] * 2})
    >>> split_table(frame, "shop", "t", "units", period=2).shape
    (16, 9)
    """
    keys = [key] if isinstance(key, str) else list(key)
    frame = (
        data.to_pandas()
        if hasattr(data, "to_pandas") and not isinstance(data, pd.DataFrame)
        else data
    )
    missing = [c for c in [*keys, time, value] if c not in frame.columns]
    if missing:
        raise KeyError(f"no column(s) named {', '.join(missing)}")
    frame = frame[[*keys, time, value]].copy()
    codes, time_nulls = _time_codes(frame[time])
    frame["__code"] = codes
    frame["__null_time"] = time_nulls
    frame = frame.sort_values(
        [*keys, "__null_time", "__code", value], kind="stable", na_position="last"
    )
    frame = frame.reset_index(drop=True)
    group_ids = frame.groupby(keys, sort=False, dropna=False).ngroup().to_numpy()
    starts = np.flatnonzero(np.diff(group_ids, prepend=-1) != 0)
    offsets = np.append(starts, len(frame)).astype(np.int64)
    y = pd.to_numeric(frame[value]).to_numpy(dtype=np.float64, na_value=np.nan)
    first_rows = frame.iloc[starts][keys]
    status = [OK] * starts.size
    from .decompose import segment_counts

    for i in np.flatnonzero(segment_counts(frame["__null_time"].to_numpy(), offsets)):
        status[i] = "a time is NULL"

    def label(i: int) -> str:
        row = first_rows.iloc[i]
        return "{" + ", ".join(f"{k!r}: {row[k]!r}" for k in keys) + "}"

    result: BatchResult = split_batch(
        y,
        offsets,
        SplitParams.from_kwargs(period=period, **params),
        label=label,
        times=frame["__code"].to_numpy(),
        status=status,
        on_error=on_error,
    )
    out = frame[[*keys, time, value]].copy()
    for name in COMPONENTS:
        out[name] = getattr(result, name)
    out["status"] = np.repeat(np.array(result.status, dtype=object), np.diff(offsets))
    return out
