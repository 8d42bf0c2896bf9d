"""Pictures of splits: one series and its parts, the fleet at a glance, spans side by side,
and a self-contained HTML report.

Every picture is drawn from the results of the public Python API (``split_table``,
``profile``, ``outliers``; ``draw_spans`` calls ``split_table`` itself, once per span).
matplotlib is imported only when a picture is drawn, and only its object-oriented API is
used (a ``Figure`` with its own canvas, never pyplot), so drawing changes no global state.

The look is our own, named ``ESTUARY``: paper-coloured ground, slate ink, a terracotta
trend, kelp-green seasonal parts, a pebble-grey remainder drawn as a band about zero, and
ochre rings for unusual points; each panel is named by a tag in its top-left corner.

>>> sorted(ESTUARY)[:3]
['band', 'density_high', 'density_low']
"""

from __future__ import annotations

import base64
import html
import io
import json
import math
import re
from collections.abc import Iterable, Sequence
from contextlib import contextmanager
from importlib import resources
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

# Our palette. The names say what each colour is for.
ESTUARY: dict[str, str] = {
    "paper": "#fbf8f1",  # figure ground
    "ink": "#26323a",  # text, the observed series
    "rule": "#d9d2c3",  # axes lines, guides
    "trend": "#b5532f",  # terracotta
    "seasonal": "#2f7d5b",  # kelp green
    "seasonal_2": "#6a5a9e",  # heather, a second seasonal period
    "seasonal_3": "#a07a1c",  # mustard, a third
    "remainder": "#7d8189",  # pebble grey
    "band": "#c9ccd1",  # the remainder's band about zero
    "unusual": "#e09b10",  # ochre rings on unusual points
    "point": "#2b5876",  # one key in the fleet picture
    "density_low": "#e4ecef",
    "density_high": "#123a52",
    "label": "#8c2f1b",  # labelled keys in the fleet picture
}
SEASONAL_COLOURS = ("seasonal", "seasonal_2", "seasonal_3")

_STYLE = {
    "font.family": "DejaVu Sans",  # ships with matplotlib: the same glyphs everywhere
    "font.size": 8.5,
    "axes.facecolor": ESTUARY["paper"],
    "figure.facecolor": ESTUARY["paper"],
    "savefig.facecolor": ESTUARY["paper"],
    "axes.edgecolor": ESTUARY["rule"],
    "axes.labelcolor": ESTUARY["ink"],
    "text.color": ESTUARY["ink"],
    "xtick.color": ESTUARY["remainder"],
    "ytick.color": ESTUARY["remainder"],
    "xtick.labelsize": 7.5,
    "ytick.labelsize": 7.5,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": True,
    "axes.grid.axis": "y",
    "grid.color": "#ece6da",
    "grid.linewidth": 0.6,
    "svg.hashsalt": "tidesplit",  # deterministic ids in SVG output
    "svg.fonttype": "path",
}
DPI = 100
PANEL_WIDTH = 6.4  # inches per column of panels
KEY_SEPARATOR = " / "  # joins the values of a several-column key into one label
MAX_SHOWN = 12  # keys in one parts picture


@contextmanager
def _style():
    import matplotlib

    with matplotlib.rc_context(_STYLE):
        yield


def _figure(width: float, height: float) -> Figure:
    from matplotlib.figure import Figure

    return Figure(figsize=(width, height), dpi=DPI, layout="constrained")


def _save(figure: Figure, path: str | Path | None) -> None:
    if path is None:
        return
    suffix = Path(path).suffix.lower()
    if suffix not in (".png", ".svg"):
        raise ValueError(f"picture file {str(path)!r}: give a .png or .svg name")
    metadata = {"Software": "tidesplit"} if suffix == ".png" else {"Date": None}
    with _style():
        figure.savefig(path, dpi=DPI, metadata=metadata)


def _keys(key: str | Sequence[str]) -> list[str]:
    return [key] if isinstance(key, str) else list(key)


def key_labels(frame: pd.DataFrame, key: str | Sequence[str]) -> pd.Series:
    """One text label per row: the key's values joined by `` / ``.

    The pictures, the report and the command line's ``--pick`` all name keys this way.

    >>> key_labels(pd.DataFrame({"shop": ["Quayside"], "sku": [7]}), ["shop", "sku"]).tolist()
    ['Quayside / 7']
    """
    names = _keys(key)
    labels = frame[names[0]].astype(str)
    for name in names[1:]:
        labels = labels + KEY_SEPARATOR + frame[name].astype(str)
    return labels.reset_index(drop=True)


def _times(column: pd.Series) -> np.ndarray:
    """Times for the x axis on their own scale: dates and timestamps as datetimes."""
    if pd.api.types.is_numeric_dtype(column):
        return column.to_numpy()
    converted = pd.to_datetime(column)
    if getattr(converted.dt, "tz", None) is not None:
        converted = converted.dt.tz_localize(None)  # wall-clock times of the series' zone
    return converted.to_numpy()


def _tag(ax: Axes, text: str, colour: str) -> None:
    """The panel's name, top left, in a chip of the panel's colour."""
    ax.text(
        0.006,
        0.96,
        text,
        transform=ax.transAxes,
        ha="left",
        va="top",
        fontsize=7.5,
        fontweight="bold",
        color=ESTUARY["paper"],
        bbox={"boxstyle": "round,pad=0.25", "facecolor": colour, "edgecolor": "none"},
        zorder=5,
    )


def _seasonal_columns(frame: pd.DataFrame) -> list[tuple[str, str]]:
    """(column, panel name) of each seasonal part: one per period with several periods."""
    several = sorted(
        (c for c in frame.columns if c.startswith("seasonal_period_")),
        key=lambda c: int(c.rsplit("_", 1)[1]),
    )
    if several:
        return [(c, f"seasonal, period {c.rsplit('_', 1)[1]}") for c in several]
    return [("seasonal", "seasonal")]


def _pick_rows(
    frame: pd.DataFrame, key: str | Sequence[str], show: Iterable[str] | str | None, what: str
) -> tuple[list[str], pd.Series]:
    labels = key_labels(frame, key)
    present = list(dict.fromkeys(labels))
    if show is None:
        if len(present) > MAX_SHOWN:
            raise ValueError(
                f"{what} has {len(present)} keys; pass show=[...] with at most {MAX_SHOWN} "
                f"of them (labels like {present[0]!r})"
            )
        return present, labels
    wanted = [show] if isinstance(show, str) else list(show)
    unknown = [w for w in wanted if w not in set(present)]
    if unknown:
        raise KeyError(f"no key {', '.join(map(repr, unknown))} in {what}")
    if not 1 <= len(wanted) <= MAX_SHOWN:
        raise ValueError(f"show between 1 and {MAX_SHOWN} keys, not {len(wanted)}")
    return list(dict.fromkeys(wanted)), labels


def draw_parts(
    parts: pd.DataFrame,
    key: str | Sequence[str],
    time: str,
    value: str,
    *,
    show: Iterable[str] | str | None = None,
    unusual: pd.DataFrame | None = None,
    columns: int = 2,
    path: str | Path | None = None,
) -> Figure:
    """One series and its parts in panels sharing the time axis; several keys side by side.

    Parameters
    ----------
    parts : the result of ``tidesplit.split_table`` (one or several periods).
    key, time, value : the column names given to ``split_table``.
    show : key labels to draw (see ``key_labels``), at most 12; default every key of
        ``parts`` when there are at most 12.
    unusual : the result of ``tidesplit.outliers`` for the same table; its flagged rows are
        ringed on the series and remainder panels. None: no marks.
    columns : keys per row of the picture (small multiples).
    path : a ``.png`` or ``.svg`` file to write; None writes nothing.

    Returns
    -------
    matplotlib.figure.Figure
        One column of panels per key: the series, the trend, each seasonal part and the
        remainder, on the series' own time axis. The series panel is on the original scale;
        with a transform the parts are on the transformed scale, and their tags say so.

    Examples
    --------
    >>> import tidesplit
    >>> t = np.arange(48)
    >>> frame = pd.DataFrame({"k": "a", "t": t, "v": 10 + np.sin(2 * np.pi * t / 12) + 0.1 * t})
    >>> picture = draw_parts(tidesplit.split_table(frame, "k", "t", "v", period=12), "k", "t", "v")
    >>> len(picture.axes)
    4
    """
    chosen, labels = _pick_rows(parts, key, show, "parts")
    seasonal = _seasonal_columns(parts)
    flagged = None
    if unusual is not None:
        marked = unusual[unusual["is_outlier"].astype(bool)] if "is_outlier" in unusual else unusual
        flagged = pd.DataFrame(
            {"label": key_labels(marked, key).to_numpy(), "time": marked[time].to_numpy()}
        )
    panels = 3 + len(seasonal)
    heights = [1.6, 1.0, *([1.0] * len(seasonal)), 0.9]
    if columns < 1:
        raise ValueError(f"columns is at least 1, not {columns}")
    grid_cols = min(columns, len(chosen))
    grid_rows = math.ceil(len(chosen) / grid_cols)
    block_height = sum(heights) + 0.45
    with _style():
        figure = _figure(PANEL_WIDTH * grid_cols, block_height * grid_rows)
        blocks = figure.add_gridspec(grid_rows, grid_cols)
        for n, label in enumerate(chosen):
            rows = parts[(labels == label).to_numpy()]
            cell = blocks[n // grid_cols, n % grid_cols].subgridspec(
                panels, 1, height_ratios=heights, hspace=0.08
            )
            axes = [figure.add_subplot(cell[0])]
            axes += [figure.add_subplot(cell[i], sharex=axes[0]) for i in range(1, panels)]
            marks = None
            if flagged is not None:
                marks = set(flagged.loc[flagged["label"] == label, "time"].tolist())
            _draw_block(axes, rows, label, time, value, seasonal, marks)
    _save(figure, path)
    return figure


def _draw_block(
    axes: list[Axes],
    rows: pd.DataFrame,
    label: str,
    time: str,
    value: str,
    seasonal: list[tuple[str, str]],
    marks: set | None,
) -> None:
    x = _times(rows[time])
    observed = rows[value].to_numpy(dtype=float, na_value=np.nan)
    remainder = rows["remainder"].to_numpy(dtype=float, na_value=np.nan)
    status = str(rows["status"].iloc[0]) if "status" in rows else "ok"
    sums = rows["trend"] + rows[[c for c, _ in seasonal]].fillna(0).sum(axis=1) + rows["remainder"]
    both = sums.notna() & rows[value].notna()
    transformed = bool(both.any()) and not np.allclose(sums[both], rows[value][both], rtol=1e-6)
    scale = " (transformed)" if transformed else ""
    axes[0].plot(x, observed, color=ESTUARY["ink"], linewidth=0.9)
    axes[0].set_title(label, loc="left", fontsize=9.5, fontweight="bold", color=ESTUARY["ink"])
    _tag(axes[0], "series", ESTUARY["ink"])
    axes[1].plot(x, rows["trend"].to_numpy(dtype=float, na_value=np.nan), color=ESTUARY["trend"])
    _tag(axes[1], "trend" + scale, ESTUARY["trend"])
    for i, (column, name) in enumerate(seasonal):
        ax = axes[2 + i]
        colour = ESTUARY[SEASONAL_COLOURS[i % len(SEASONAL_COLOURS)]]
        ax.plot(x, rows[column].to_numpy(dtype=float, na_value=np.nan), color=colour, lw=0.9)
        _tag(ax, name + scale, colour)
    last = axes[-1]
    last.fill_between(x, 0, remainder, color=ESTUARY["band"], linewidth=0, step="mid")
    last.plot(x, remainder, color=ESTUARY["remainder"], linewidth=0.6, drawstyle="steps-mid")
    last.axhline(0, color=ESTUARY["rule"], linewidth=0.8)
    _tag(last, "remainder" + scale, ESTUARY["remainder"])
    if marks:
        hit = rows[time].isin(marks).to_numpy()
        ring = {"s": 34, "facecolors": "none", "edgecolors": ESTUARY["unusual"], "zorder": 4}
        axes[0].scatter(x[hit], observed[hit], linewidths=1.6, label="unusual", **ring)
        last.scatter(x[hit], remainder[hit], linewidths=1.4, **ring)
        axes[0].legend(loc="upper right", frameon=False, fontsize=7, handletextpad=0.2)
    if not status.startswith("ok"):
        axes[1].text(
            0.5,
            0.5,
            f"not split: {status}",
            transform=axes[1].transAxes,
            ha="center",
            va="center",
            color=ESTUARY["trend"],
        )
    for ax in axes[:-1]:
        ax.tick_params(labelbottom=False, length=0)
    last.tick_params(length=2)
    last.set_xlabel(time, loc="right", fontsize=7.5, color=ESTUARY["remainder"])


# ---------------------------------------------------------------------------------------
# The fleet at a glance

REGIONS = (  # (name, x, y, horizontal alignment) in strength coordinates: reading aids
    ("noise", 0.02, 0.02, "left"),
    ("seasonal", 0.98, 0.02, "right"),
    ("trending", 0.02, 0.98, "left"),
    ("seasonal and trending", 0.98, 0.98, "right"),
)
GUIDE = 0.5  # the guide lines between the regions (our reading aid, not a test)


def standouts(profiled: pd.DataFrame, count: int, apart: float = 0.06) -> np.ndarray:
    """Row positions of up to ``count`` keys farthest from the fleet's middle.

    The distance is measured in the plane of seasonal and trend strength from the median
    key. Keys are taken farthest first, skipping any within ``apart`` of one already
    taken, so that a crowd at one far spot gets one name, not all of them. Keys that were
    not split (NaN strengths) never stand out here.

    >>> frame = pd.DataFrame({"strength_of_season": [0.5, 0.52, 0.49, 0.99, 0.98],
    ...                       "strength_of_trend": [0.5, 0.48, 0.51, 0.02, 0.02]})
    >>> standouts(frame, 2).tolist()
    [3, 2]
    """
    x = profiled["strength_of_season"].to_numpy(dtype=float, na_value=np.nan)
    y = profiled["strength_of_trend"].to_numpy(dtype=float, na_value=np.nan)
    found = np.isfinite(x) & np.isfinite(y)
    if not found.any() or count <= 0:
        return np.array([], dtype=np.int64)
    distance = np.hypot(x - np.median(x[found]), y - np.median(y[found]))
    distance[~found] = -np.inf
    order = np.argsort(-distance, kind="stable")[: int(found.sum())]
    taken: list[int] = []
    for i in order[:20_000]:  # enough candidates to fill any sensible count
        if all(np.hypot(x[i] - x[j], y[i] - y[j]) >= apart for j in taken):
            taken.append(int(i))
            if len(taken) == count:
                break
    return np.array(taken, dtype=np.int64)


def _rail(heights: np.ndarray, gap: float = 0.042) -> np.ndarray:
    """Label heights on the rail beside the plot: in the order of the points' heights, at
    least ``gap`` apart, kept within [0, 1] where they fit."""
    order = np.argsort(heights, kind="stable")
    placed = np.clip(heights[order].astype(float), 0.0, 1.0)
    for k in range(1, placed.size):
        placed[k] = max(placed[k], placed[k - 1] + gap)
    overshoot = placed[-1] - 1.0 if placed.size else 0.0
    if overshoot > 0:
        placed = np.maximum(placed - overshoot, np.arange(placed.size) * gap)
        for k in range(placed.size - 2, -1, -1):
            placed[k] = min(placed[k], placed[k + 1] - gap)
    out = np.empty_like(placed)
    out[order] = placed
    return out


def draw_fleet(
    profiled: pd.DataFrame,
    key: str | Sequence[str],
    *,
    label: int = 8,
    label_keys: Iterable[str] = (),
    points_up_to: int = 2000,
    crowded: int = 4,
    bins: int = 64,
    path: str | Path | None = None,
) -> Figure:
    """Every key as a point: trend strength against seasonal strength.

    Parameters
    ----------
    profiled : the result of ``tidesplit.profile``.
    key : the key column name(s) given to ``profile``.
    label : how many of the keys farthest from the fleet's middle to name (``standouts``).
    label_keys : key labels to name besides those.
    points_up_to : up to this many keys every key is a point; above it, cells of a
        ``bins`` x ``bins`` grid holding at least ``crowded`` keys are drawn as density
        (shaded by the log of their count) and the keys in the other cells as points.
    path : a ``.png`` or ``.svg`` file to write; None writes nothing.

    Returns
    -------
    matplotlib.figure.Figure
        One axes (plus a colour bar when density is drawn). Keys that were not split are
        counted in the title, never dropped silently.

    Examples
    --------
    >>> frame = pd.DataFrame({"k": list("abc"), "strength_of_season": [0.9, 0.1, 0.5],
    ...                       "strength_of_trend": [0.2, 0.8, 0.5], "status": "ok"})
    >>> picture = draw_fleet(frame, "k")
    >>> len(picture.axes), len(picture.axes[0].collections[0].get_offsets())
    (1, 3)
    """
    from matplotlib.colors import LinearSegmentedColormap, LogNorm

    limits = {
        "label": (label, 0),
        "points_up_to": (points_up_to, 0),
        "crowded": (crowded, 1),
        "bins": (bins, 2),
    }
    for name, (given, least) in limits.items():
        if given < least:
            raise ValueError(f"{name} is at least {least}, not {given}")
    extra = set(label_keys)
    asked: list[int] = []
    if extra:  # labels of a million keys take a while: made only when asked for
        labels = key_labels(profiled, key)
        unknown = extra - set(labels)
        if unknown:
            raise KeyError(f"no key {', '.join(map(repr, sorted(unknown)))} in the profile")
        asked = list(np.flatnonzero(labels.isin(extra)))
    x = profiled["strength_of_season"].to_numpy(dtype=float, na_value=np.nan)
    y = profiled["strength_of_trend"].to_numpy(dtype=float, na_value=np.nan)
    found = np.isfinite(x) & np.isfinite(y)
    total, unsplit = len(profiled), int((~found).sum())
    edges = np.linspace(0.0, 1.0, bins + 1)
    with _style():
        figure = _figure(8.4, 6.0)
        ax = figure.add_subplot()
        for name, gx, gy, align in REGIONS:
            ax.text(
                gx,
                gy,
                name,
                ha=align,
                va="top" if gy > 0.5 else "bottom",
                color=ESTUARY["ink"],
                fontsize=9,
                style="italic",
                zorder=4,
                bbox={
                    "boxstyle": "round,pad=0.2",
                    "facecolor": ESTUARY["paper"],
                    "edgecolor": "none",
                    "alpha": 0.8,
                },
            )
        ax.axvline(GUIDE, color=ESTUARY["rule"], lw=0.8, zorder=0)
        ax.axhline(GUIDE, color=ESTUARY["rule"], lw=0.8, zorder=0)
        sparse = found.copy()
        if found.sum() > points_up_to:
            counts, _, _ = np.histogram2d(x[found], y[found], bins=[edges, edges])
            cx = np.clip(np.searchsorted(edges, x[found], side="right") - 1, 0, bins - 1)
            cy = np.clip(np.searchsorted(edges, y[found], side="right") - 1, 0, bins - 1)
            dense_cell = counts >= crowded
            sparse[np.flatnonzero(found)[dense_cell[cx, cy]]] = False
            shade = np.where(dense_cell, counts, np.nan).T  # rows are y for pcolormesh
            ramp = LinearSegmentedColormap.from_list(
                "estuary_depth", [ESTUARY["density_low"], ESTUARY["density_high"]]
            )
            mesh = ax.pcolormesh(
                edges,
                edges,
                np.ma.masked_invalid(shade),
                cmap=ramp,
                norm=LogNorm(vmin=crowded, vmax=max(crowded + 1, counts.max())),
                zorder=2,
                rasterized=True,
            )
            bar = figure.colorbar(mesh, ax=ax, shrink=0.7, pad=0.01)
            bar.set_label("keys per cell", color=ESTUARY["ink"])
            bar.outline.set_visible(False)
            top = max(crowded + 1, counts.max())
            steps = [
                v
                for v in (1, 2, 5, 10, 20, 50, 100, 200, 500, 1000, 2000, 5000, 10_000)
                if crowded <= v <= top
            ]
            ticks = steps or [crowded]
            bar.set_ticks(ticks, labels=[f"{v:,.0f}" for v in ticks])
            bar.ax.minorticks_off()
        ax.scatter(
            x[sparse],
            y[sparse],
            s=14 if sparse.sum() < 500 else 5,
            color=ESTUARY["point"],
            alpha=0.75,
            linewidths=0,
            zorder=3,
            rasterized=bool(sparse.sum() > 5000),
        )
        named = list(standouts(profiled, label))
        named += [i for i in asked if i not in named]
        named = [i for i in named if found[i]]
        names = key_labels(profiled.iloc[named], key)
        for n, (i, rail_y) in enumerate(zip(named, _rail(y[named]), strict=True)):
            ax.annotate(
                names[n],
                (x[i], y[i]),
                xytext=(1.06, rail_y),
                textcoords="data",
                ha="left",
                va="center",
                fontsize=7.5,
                color=ESTUARY["label"],
                zorder=6,
                annotation_clip=False,
                arrowprops={
                    "arrowstyle": "-",
                    "color": ESTUARY["label"],
                    "lw": 0.5,
                    "alpha": 0.7,
                    "shrinkA": 1,
                    "shrinkB": 3,
                },
            )
            ax.scatter(
                [x[i]],
                [y[i]],
                s=30,
                facecolors="none",
                edgecolors=ESTUARY["label"],
                linewidths=1.1,
                zorder=5,
            )
        ax.set_xlim(-0.02, 1.02)
        ax.set_ylim(-0.02, 1.02)
        ax.set_aspect("equal")
        ax.grid(False)
        ax.set_xlabel("strength of season (0 none, 1 all)")
        ax.set_ylabel("strength of trend (0 none, 1 all)")
        note = f"{total:,} keys" + (f", {unsplit:,} not split (not drawn)" if unsplit else "")
        ax.set_title(f"The fleet: {note}", loc="left", fontsize=10, fontweight="bold")
    _save(figure, path)
    return figure


# ---------------------------------------------------------------------------------------
# Spans side by side


def _odd_at_least(value: float) -> int:
    n = max(3, math.ceil(value))
    return n if n % 2 else n + 1


def default_trend_span(period: int, season_span: int = 13) -> int:
    """The published default trend span: the smallest odd integer at least
    1.5 period / (1 - 1.5 / season_span) (Cleveland et al. 1990, section 3); with an
    infinite season span (0), 1.5 period.

    >>> default_trend_span(12), default_trend_span(52)
    (21, 89)
    """
    factor = 1.0 if season_span == 0 else 1.0 - 1.5 / season_span
    return _odd_at_least(1.5 * period / factor - 1e-9)


def draw_spans(
    data: Any,
    key: str | Sequence[str],
    time: str,
    value: str,
    *,
    pick: str,
    period: int,
    season_spans: Sequence[int] = (7, 13, 35, 0),
    trend_spans: Sequence[int] | None = None,
    path: str | Path | None = None,
    mark_chosen: bool = False,
    **params: Any,
) -> Figure:
    """For one key, the parts under several season spans and several trend spans, side by side.

    Parameters
    ----------
    data : the table (pandas DataFrame or Arrow table) as given to ``split_table``.
    key, time, value : its column names.
    pick : the key label (see ``key_labels``) of the series to draw.
    period : points per cycle.
    season_spans : season spans for the top rows (odd >= 3, or 0 for a fixed pattern).
    trend_spans : trend spans for the bottom rows; default a half, one, two and four times
        the published default (``default_trend_span``), each made odd.
    path : a ``.png`` or ``.svg`` file to write; None writes nothing.
    mark_chosen : also split the key with ``choose_spans`` and mark the pair chosen: its
        season span and trend span join the sweep if they are not in it, their panels are
        titled "(chosen)" and split with the chosen pair together.
    **params : the other split arguments (robust, transform, ...), the same in every split.

    Returns
    -------
    matplotlib.figure.Figure
        Four rows of panels, one column per span: seasonal and remainder under each season
        span, then trend (over the adjusted series) and remainder under each trend span.
        Panels of a row share their y axis so that the spans compare at a glance.

    Examples
    --------
    >>> t = np.arange(72)
    >>> frame = pd.DataFrame({"k": "a", "t": t, "v": 10 + np.sin(2 * np.pi * t / 12) + 0.1 * t})
    >>> picture = draw_spans(frame, "k", "t", "v", pick="a", period=12,
    ...                      season_spans=(7, 0), trend_spans=(15, 23, 45))
    >>> len(picture.axes)
    10
    """
    if "periods" in params or "season_spans" in params:
        raise ValueError("draw_spans draws one period; give period=, not periods=")
    for name in ("season_span", "trend_span"):
        if name in params:
            raise ValueError(f"draw_spans varies {name} itself; give {name}s=[...] instead")
    import tidesplit

    frame = data if isinstance(data, pd.DataFrame) else data.to_pandas()
    labels = key_labels(frame, key)
    rows = frame[(labels == pick).to_numpy()]
    if rows.empty:
        raise KeyError(f"no key {pick!r} in the table")
    season_spans = list(season_spans)
    if trend_spans is None:
        base = default_trend_span(period)
        trend_spans = sorted({_odd_at_least(base * f) for f in (0.5, 1, 2, 4)})
    trend_spans = list(trend_spans)
    if not season_spans or not trend_spans:
        raise ValueError("give at least one season span and one trend span")

    chosen = {}
    if mark_chosen:
        found = tidesplit.split_table(
            rows, key, time, value, period=period, choose_spans=True, **params
        )
        chosen = {
            "seasonal": int(found["season_span"].iloc[0]),
            "trend": int(found["trend_span"].iloc[0]),
        }
        if chosen["seasonal"] not in season_spans:
            season_spans.append(chosen["seasonal"])
        if chosen["trend"] not in trend_spans:
            trend_spans = sorted([*trend_spans, chosen["trend"]])

    def run(**spans: int) -> pd.DataFrame:
        # a panel of the chosen span shows the chosen pair
        if chosen and spans.get("season_span") == chosen["seasonal"]:
            spans["trend_span"] = chosen["trend"]
        elif chosen and spans.get("trend_span") == chosen["trend"]:
            spans["season_span"] = chosen["seasonal"]
        return tidesplit.split_table(rows, key, time, value, period=period, **spans, **params)

    by_season = [run(season_span=s) for s in season_spans]
    by_trend = [run(trend_span=t) for t in trend_spans]
    season_default = 13  # the split's own default (common practice)
    defaults = {"seasonal": season_default, "trend": default_trend_span(period, season_default)}
    width = max(len(season_spans), len(trend_spans))
    x = _times(by_season[0][time])
    with _style():
        figure = _figure(2.6 * width + 0.6, 8.2)
        figure.suptitle(
            f"{pick}: the same series under each span",
            x=0.01,
            ha="left",
            fontsize=10,
            fontweight="bold",
        )
        grid = figure.add_gridspec(4, width, height_ratios=[1.1, 0.8, 1.1, 0.8])
        sections = (
            (by_season, season_spans, "season span", "seasonal", 0),
            (by_trend, trend_spans, "trend span", "trend", 2),
        )
        for results, spans, title, part, top in sections:
            upper, lower = [], []
            for c, (result, span) in enumerate(zip(results, spans, strict=True)):
                share = {"sharey": upper[0]} if upper else {}
                ax = figure.add_subplot(grid[top, c], **share)
                below = figure.add_subplot(
                    grid[top + 1, c], sharex=ax, **({"sharey": lower[0]} if lower else {})
                )
                upper.append(ax)
                lower.append(below)
                shown = "0 (fixed)" if span == 0 else str(span)
                tags = [
                    tag
                    for tag, value in (("default", defaults[part]), ("chosen", chosen.get(part)))
                    if span == value
                ]
                if tags:
                    shown += f" ({', '.join(tags)})"
                spread = np.nanstd(result["remainder"].to_numpy(dtype=float, na_value=np.nan))
                ax.set_title(
                    f"{title} {shown}",
                    loc="left",
                    fontsize=8.5,
                    fontweight="bold",
                    color=ESTUARY[part],
                )
                below.text(
                    0.99,
                    0.97,
                    f"sd {spread:.3g}",
                    transform=below.transAxes,
                    ha="right",
                    va="top",
                    fontsize=7,
                    color=ESTUARY["remainder"],
                )
                if part == "trend":
                    level = result["trend"] + result["remainder"]
                    ax.plot(x, level, color=ESTUARY["band"], lw=0.8)
                ax.plot(x, result[part], color=ESTUARY[part], lw=1.0)
                remainder = result["remainder"].to_numpy(dtype=float, na_value=np.nan)
                below.fill_between(x, 0, remainder, color=ESTUARY["band"], lw=0, step="mid")
                below.plot(x, remainder, color=ESTUARY["remainder"], lw=0.5, drawstyle="steps-mid")
                below.axhline(0, color=ESTUARY["rule"], lw=0.8)
                ax.tick_params(labelbottom=False, length=0)
                below.tick_params(length=2, labelsize=6.5)
                if c:
                    ax.tick_params(labelleft=False)
                    below.tick_params(labelleft=False)
            upper[0].set_ylabel(part)
            lower[0].set_ylabel("remainder")
            lower[-1].set_xlabel(time, loc="right", fontsize=7.5, color=ESTUARY["remainder"])
    _save(figure, path)
    return figure


# ---------------------------------------------------------------------------------------
# The report


def _picture_bytes(figure: Figure) -> str:
    buffer = io.BytesIO()
    with _style():
        figure.savefig(buffer, format="png", dpi=DPI, metadata={"Software": "tidesplit"})
    return base64.b64encode(buffer.getvalue()).decode("ascii")


def _unusual_counts(unusual: pd.DataFrame | None, key: str | Sequence[str]) -> pd.Series:
    if unusual is None or unusual.empty:
        return pd.Series(dtype=np.int64)
    marked = unusual[unusual["is_outlier"].astype(bool)] if "is_outlier" in unusual else unusual
    return key_labels(marked, key).value_counts()


def choose_pictured(
    profiled: pd.DataFrame,
    key: str | Sequence[str],
    unusual: pd.DataFrame | None = None,
    count: int = 40,
) -> list[str]:
    """The key labels a report pictures: taken in turn from the most unusual points, the
    strongest season, the strongest trend, the weakest of both (noise), and keys not split.

    Split only these keys to keep a report's parts small for a fleet of any size.

    >>> frame = pd.DataFrame({"k": list("abcd"), "strength_of_season": [0.9, 0.1, 0.5, 0.0],
    ...                       "strength_of_trend": [0.2, 0.8, 0.5, 0.1], "status": "ok"})
    >>> choose_pictured(frame, "k", count=3)
    ['a', 'b', 'd']
    """
    labels = key_labels(profiled, key)
    season = profiled["strength_of_season"].to_numpy(dtype=float, na_value=np.nan)
    trend = profiled["strength_of_trend"].to_numpy(dtype=float, na_value=np.nan)
    hits = _unusual_counts(unusual, key).reindex(labels).fillna(0).to_numpy()
    status = (
        profiled["status"].astype(str) if "status" in profiled else pd.Series(["ok"] * len(labels))
    )
    rankings = [
        [i for i in np.argsort(-hits, kind="stable") if hits[i] > 0],
        list(np.argsort(-np.nan_to_num(season, nan=-1), kind="stable")),
        list(np.argsort(-np.nan_to_num(trend, nan=-1), kind="stable")),
        list(np.argsort(np.nan_to_num(np.fmax(season, trend), nan=2), kind="stable")),
        list(np.flatnonzero(~status.str.startswith("ok").to_numpy())),
    ]
    chosen: dict[str, None] = {}
    depth = 0
    while len(chosen) < min(count, len(labels)) and depth < len(labels):
        for ranking in rankings:
            if depth < len(ranking) and len(chosen) < count:
                chosen.setdefault(labels[ranking[depth]])
        depth += 1
    return list(chosen)


def write_report(
    path: str | Path,
    parts: pd.DataFrame,
    profiled: pd.DataFrame,
    key: str | Sequence[str],
    time: str,
    value: str,
    *,
    unusual: pd.DataFrame | None = None,
    pictured: int = 40,
    listed: int = 5000,
    label: int = 8,
    title: str = "tidesplit report",
) -> Path:
    """One self-contained HTML file: the fleet picture, a searchable and sortable list of
    keys, and the parts of each pictured key (pictures embedded; no server, no network).

    Parameters
    ----------
    path : the ``.html`` file to write.
    parts : ``tidesplit.split_table`` results; for every key, or only for those
        ``choose_pictured`` names (enough for the report).
    profiled : ``tidesplit.profile`` of the whole fleet.
    key, time, value : the column names given to the API.
    unusual : ``tidesplit.outliers`` results, counted per key and ringed in the parts.
    pictured : at most this many keys get a parts picture (about 90 KB each), chosen by
        ``choose_pictured`` among the keys present in ``parts``.
    listed : at most this many keys are listed (about 100 bytes each): the pictured ones
        first, then the fleet in ``choose_pictured``'s order; the report says how many of
        how many.
    label : keys named in the fleet picture (see ``draw_fleet``).
    title : the page title.

    Returns
    -------
    pathlib.Path
        The file written. Its size is bounded by ``pictured`` and ``listed``, not by the
        size of the fleet.

    Examples
    --------
    >>> import tempfile, tidesplit
    >>> t = np.arange(48)
    >>> frame = pd.DataFrame({"k": "a", "t": t, "v": 10 + np.sin(2 * np.pi * t / 12) + 0.1 * t})
    >>> parts = tidesplit.split_table(frame, "k", "t", "v", period=12)
    >>> profiled = tidesplit.profile(frame, "k", "t", "v", period=12)
    >>> folder = tempfile.mkdtemp()
    >>> written = write_report(Path(folder) / "run.html", parts, profiled, "k", "t", "v")
    >>> "http" in written.read_text()
    False
    """
    if pictured < 0 or listed < max(1, pictured):
        raise ValueError(
            f"pictured ({pictured}) is at least 0 and listed ({listed}) at least 1 and at "
            "least pictured: every pictured key is listed"
        )
    labels = key_labels(profiled, key)
    part_labels = key_labels(parts, key)
    present = set(part_labels)
    in_parts = profiled[labels.isin(present).to_numpy()].reset_index(drop=True)
    pictured_keys = choose_pictured(in_parts, key, unusual, pictured) if pictured > 0 else []
    order = pictured_keys + [
        k for k in choose_pictured(profiled, key, unusual, listed) if k not in set(pictured_keys)
    ]
    order = order[:listed]
    hits = _unusual_counts(unusual, key)
    position = pd.Series(np.arange(len(labels)), index=labels)
    position = position[~position.index.duplicated()]
    entries = []
    is_pictured = set(pictured_keys)
    for name in order:
        row = profiled.iloc[int(position[name])]
        entries.append(
            {
                "key": name,
                "season": _number(row.get("strength_of_season")),
                "trend": _number(row.get("strength_of_trend")),
                "unusual": int(hits.get(name, 0)),
                "status": str(row.get("status", "ok")),
                "pictured": name in is_pictured,
            }
        )
    pictures = {}
    marked = unusual
    if unusual is not None:  # only the pictured keys' rows, labelled once
        marked = unusual[key_labels(unusual, key).isin(is_pictured).to_numpy()]
    rows_of = pd.Series(np.arange(len(parts))).groupby(part_labels).indices
    for name in pictured_keys:  # each key's rows handed over alone: no search per picture
        rows = parts.iloc[rows_of[name]]
        figure = draw_parts(rows, key, time, value, show=[name], unusual=marked)
        pictures[name] = _picture_bytes(figure)
    fleet = _picture_bytes(draw_fleet(profiled, key, label=label))
    template = resources.files("tidesplit").joinpath("report.html").read_text(encoding="utf-8")
    summary = (
        f"{len(labels):,} keys; {len(order):,} listed; parts pictured for "
        f"{len(pictured_keys):,} (in turn: most unusual points, strongest season, strongest "
        f"trend, weakest both, not split)."
    )
    payload = json.dumps({"keys": entries, "pictures": pictures}, separators=(",", ":"))
    fields = {
        "TITLE": html.escape(title),
        "SUMMARY": html.escape(summary),
        "FLEET": fleet,
        "DATA": payload.replace("<", "\\u003c"),  # no tag can close the data block
    }
    # one pass, so that no field's text is read as a placeholder
    page = re.sub(r"@@([A-Z]+)@@", lambda m: fields[m.group(1)], template)
    target = Path(path)
    target.write_text(page, encoding="utf-8")
    return target


def _number(value: Any) -> float | None:
    try:
        number = float(value)
    except (TypeError, ValueError):
        return None
    return round(number, 4) if math.isfinite(number) else None
