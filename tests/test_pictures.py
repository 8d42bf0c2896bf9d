"""Pictures: sizes, panels and points counted, files read back, the report in a real browser."""

from __future__ import annotations

import base64
import io
import json
import re
import shutil
import subprocess
import sys
import tempfile
import xml.etree.ElementTree as ET
from pathlib import Path

import duckdb
import numpy as np
import pandas as pd
import pytest

pytest.importorskip("matplotlib")  # the test extra installs it; the package does not need it
import matplotlib.image
from tidesplit.examples.meter_loads import hourly_loads
from tidesplit.examples.retail_chain import weekly_units

import tidesplit
from tidesplit import cli, pictures

KEY = ["shop", "product"]
SETTINGS = {"period": 52, "robust": True, "transform": "log"}


@pytest.fixture(scope="module")
def sales() -> pd.DataFrame:
    return weekly_units(shops=3, products=4, years=5).to_pandas()


@pytest.fixture(scope="module")
def parts(sales) -> pd.DataFrame:
    return tidesplit.split_table(sales, KEY, "week", "units", **SETTINGS)


@pytest.fixture(scope="module")
def profiled(sales) -> pd.DataFrame:
    return tidesplit.profile(sales, KEY, "week", "units", **SETTINGS)


@pytest.fixture(scope="module")
def unusual(sales) -> pd.DataFrame:
    return tidesplit.outliers(sales, KEY, "week", "units", period=52, transform="log")


def many_series(keys: int, points: int = 120, period: int = 12, seed: int = 3) -> pd.DataFrame:
    """Short monthly-like series of four kinds: seasonal, trending, both, noise."""
    rng = np.random.default_rng(seed)
    t = np.arange(points)
    kind = np.arange(keys) % 4
    cycle = np.sin(2 * np.pi * t / period)
    season = np.where(kind[:, None] % 2 == 0, 3.0, 0.0) * cycle
    trend = np.where(kind[:, None] >= 2, 0.3, 0.0) * t
    values = 20 + season + trend + rng.normal(0, 0.5, (keys, points))
    return pd.DataFrame(
        {
            "series": np.repeat([f"s{i:05d}" for i in range(keys)], points),
            "t": np.tile(t, keys),
            "v": values.ravel(),
        }
    )


def png_size(path: Path) -> tuple[int, int]:
    """(width, height) of a PNG as matplotlib's own reader decodes it."""
    image = matplotlib.image.imread(path)
    return image.shape[1], image.shape[0]


def dots(ax) -> int:
    """Points drawn by the scatter collections of an axes."""
    from matplotlib.collections import PathCollection

    return sum(len(c.get_offsets()) for c in ax.collections if isinstance(c, PathCollection))


# ---------------------------------------------------------------------------------------
# One series and its parts


def test_parts_of_one_key_png_and_svg(parts, unusual, tmp_path):
    # a key with unusual points under the default rule
    label = pictures.key_labels(unusual, KEY).iloc[0]
    figure = pictures.draw_parts(
        parts, KEY, "week", "units", show=label, unusual=unusual, path=tmp_path / "one.png"
    )
    # series, trend, seasonal, remainder; all on one time axis
    assert len(figure.axes) == 4
    assert all(ax.get_shared_x_axes().joined(figure.axes[0], ax) for ax in figure.axes)
    width, height = figure.get_size_inches() * pictures.DPI
    assert png_size(tmp_path / "one.png") == (round(width), round(height))
    # every unusual point of this key is ringed on the series and on the remainder
    flagged = unusual[pictures.key_labels(unusual, KEY) == label]
    assert len(flagged) > 0
    assert dots(figure.axes[0]) == dots(figure.axes[-1]) == len(flagged)
    # the lines are the split's own numbers on the original time scale (week 0, 1, ...)
    rows = parts[pictures.key_labels(parts, KEY) == label]
    trend_line = figure.axes[1].get_lines()[0]
    np.testing.assert_array_equal(trend_line.get_xdata(), rows["week"].to_numpy())
    np.testing.assert_array_equal(trend_line.get_ydata(), rows["trend"].to_numpy())
    # the log transform is said in the tags of the parts
    tags = [t.get_text() for ax in figure.axes for t in ax.texts]
    assert "trend (transformed)" in tags and "series" in tags

    pictures.draw_parts(parts, KEY, "week", "units", show=label, path=tmp_path / "one.svg")
    root = ET.parse(tmp_path / "one.svg").getroot()
    assert root.tag == "{http://www.w3.org/2000/svg}svg"
    assert root.get("width") == f"{width * 72 / pictures.DPI:g}pt"
    # the file itself holds the four panels, each with its tag
    groups = [g.get("id") for g in root.iter("{http://www.w3.org/2000/svg}g")]
    assert sorted(g for g in groups if g and re.fullmatch(r"axes_\d+", g)) == [
        "axes_1",
        "axes_2",
        "axes_3",
        "axes_4",
    ]


def test_parts_without_marks_unless_asked(parts):
    figure = pictures.draw_parts(parts, KEY, "week", "units", show="Quayside / oat loaf")
    assert dots(figure.axes[0]) == 0


def test_several_keys_as_small_multiples(parts, tmp_path):
    shown = list(dict.fromkeys(pictures.key_labels(parts, KEY)))[:5]
    figure = pictures.draw_parts(
        parts, KEY, "week", "units", show=shown, columns=2, path=tmp_path / "five.png"
    )
    assert len(figure.axes) == 5 * 4
    titles = [ax.get_title(loc="left") for ax in figure.axes if ax.get_title(loc="left")]
    assert titles == shown
    width, height = png_size(tmp_path / "five.png")
    assert width == round(2 * pictures.PANEL_WIDTH * pictures.DPI)
    assert height == round(figure.get_size_inches()[1] * pictures.DPI)
    block = 1.6 + 1.0 + 1.0 + 0.9 + 0.45  # inches: four panels and the title of one key
    assert height == round(3 * block * pictures.DPI)  # five keys, two a row: three rows


def test_parts_with_two_periods_have_a_panel_each():
    loads = hourly_loads(meters=3, weeks=4).to_pandas()
    split = tidesplit.split_table(loads, "meter", "reading_at", "kwh", periods=[24, 168])
    figure = pictures.draw_parts(split, "meter", "reading_at", "kwh")
    assert len(figure.axes) == 3 * 5  # series, trend, two seasonal parts, remainder
    tags = {t.get_text() for ax in figure.axes for t in ax.texts}
    assert {"seasonal, period 24", "seasonal, period 168"} <= tags
    # timestamps stay timestamps on the time axis
    line = figure.axes[0].get_lines()[0]
    assert np.issubdtype(np.asarray(line.get_xdata()).dtype, np.datetime64)


def test_parts_refuses_what_it_cannot_draw(parts, tmp_path):
    with pytest.raises(KeyError, match="no key 'Nowhere / nothing'"):
        pictures.draw_parts(parts, KEY, "week", "units", show="Nowhere / nothing")
    with pytest.raises(ValueError, match=r"\.png or \.svg"):
        pictures.draw_parts(
            parts, KEY, "week", "units", show="Quayside / oat loaf", path=tmp_path / "x.jpg"
        )
    many = tidesplit.split_table(many_series(13), "series", "t", "v", period=12)
    with pytest.raises(ValueError, match="has 13 keys; pass show"):
        pictures.draw_parts(many, "series", "t", "v")


def test_unsplit_keys_and_filled_gaps_are_shown_not_dropped(tmp_path):
    frame = many_series(3, points=48)
    short = pd.DataFrame({"series": "short", "t": np.arange(10), "v": np.arange(10.0)})
    gappy = frame[frame["series"] == "s00001"].copy()
    gappy = gappy[~gappy["t"].isin([20, 21])].assign(series="gappy")
    data = pd.concat([frame, short, gappy], ignore_index=True)
    parts = tidesplit.split_table(
        data, "series", "t", "v", period=12, on_error="keep", fill_gaps=True
    )
    figure = pictures.draw_parts(parts, "series", "t", "v", show=["short", "gappy"])
    texts = [t.get_text() for ax in figure.axes for t in ax.texts]
    status = parts.loc[parts["series"] == "short", "status"].iloc[0]
    assert f"not split: {status}" in texts
    # the two missing times are back as inserted rows: a break in the series' line, while
    # the trend runs through them
    series_line, trend_line = figure.axes[4].get_lines()[0], figure.axes[5].get_lines()[0]
    assert len(series_line.get_xdata()) == 48
    assert np.isnan(series_line.get_ydata()[20:22]).all()
    assert np.isfinite(trend_line.get_ydata()).all()
    profiled = tidesplit.profile(data, "series", "t", "v", period=12, on_error="keep")
    fleet = pictures.draw_fleet(profiled, "series")
    assert "5 keys, 1 not split (not drawn)" in fleet.axes[0].get_title(loc="left")
    assert len(fleet.axes[0].collections[0].get_offsets()) == 4


def test_settings_out_of_range_are_refused(parts, profiled, tmp_path):
    with pytest.raises(ValueError, match="columns is at least 1"):
        pictures.draw_parts(parts, KEY, "week", "units", show="Quayside / oat loaf", columns=0)
    with pytest.raises(ValueError, match="crowded is at least 1"):
        pictures.draw_fleet(profiled, KEY, crowded=0)
    with pytest.raises(ValueError, match="bins is at least 2"):
        pictures.draw_fleet(profiled, KEY, bins=1)
    with pytest.raises(KeyError, match="no key 'Nowhere'"):
        pictures.draw_fleet(profiled, KEY, label_keys=["Nowhere"])
    with pytest.raises(ValueError, match="every pictured key is listed"):
        pictures.write_report(
            tmp_path / "r.html", parts, profiled, KEY, "week", "units", pictured=10, listed=5
        )
    assert not (tmp_path / "r.html").exists()


def test_same_picture_twice_is_the_same_file(parts, tmp_path):
    for name in ("a.png", "b.png", "a.svg", "b.svg"):
        pictures.draw_parts(
            parts, KEY, "week", "units", show="Quayside / oat loaf", path=tmp_path / name
        )
    assert (tmp_path / "a.png").read_bytes() == (tmp_path / "b.png").read_bytes()
    assert (tmp_path / "a.svg").read_bytes() == (tmp_path / "b.svg").read_bytes()


# ---------------------------------------------------------------------------------------
# The fleet


def test_fleet_of_a_few_keys_is_one_point_each(profiled, tmp_path):
    figure = pictures.draw_fleet(profiled, KEY, label=3, path=tmp_path / "fleet.png")
    assert len(figure.axes) == 1  # no colour bar: no density drawn
    ax = figure.axes[0]
    points = ax.collections[0].get_offsets()
    assert len(points) == len(profiled)
    np.testing.assert_array_equal(points[:, 0], profiled["strength_of_season"])
    np.testing.assert_array_equal(points[:, 1], profiled["strength_of_trend"])
    assert len(ax.texts) - len(pictures.REGIONS) == 3  # three keys named
    assert png_size(tmp_path / "fleet.png") == (840, 600)
    # in the SVG file, the first point collection holds one mark per key
    pictures.draw_fleet(profiled, KEY, label=3, path=tmp_path / "fleet.svg")
    svg = "{http://www.w3.org/2000/svg}"
    root = ET.parse(tmp_path / "fleet.svg").getroot()
    first = next(g for g in root.iter(f"{svg}g") if g.get("id") == "PathCollection_1")
    assert len(list(first.iter(f"{svg}use"))) == len(profiled)


def test_fleet_of_many_keys_from_a_real_profile(tmp_path):
    # more than 2048 series: several batches inside the API
    frame = many_series(2600)
    profiled = tidesplit.profile(frame, "series", "t", "v", period=12)
    figure = pictures.draw_fleet(profiled, "series", points_up_to=1000, path=tmp_path / "f.png")
    assert len(figure.axes) == 2  # the plot and its colour bar
    ax = figure.axes[0]
    drawn = ax.collections[0]  # the density cells come first, the loose points after
    cells = np.ma.filled(drawn.get_array(), 0).sum()
    loose = len(ax.collections[1].get_offsets())
    assert cells + loose == len(profiled) == 2600
    assert cells > loose  # four tight groups: mostly density
    # each kind of invented series lands in its own region of the picture
    kind = profiled["series"].str[1:].astype(int) % 4
    middle = profiled.groupby(kind)[["strength_of_season", "strength_of_trend"]].median()
    regions = (middle > pictures.GUIDE).apply(tuple, axis=1).tolist()
    assert regions == [(True, False), (False, False), (True, True), (False, True)]
    assert png_size(tmp_path / "f.png") == (840, 600)


def test_fleet_of_100k_keys_counts_every_key(tmp_path):
    rng = np.random.default_rng(9)
    keys = 100_000
    season = np.clip(rng.normal(rng.choice([0.15, 0.9], keys), 0.1), 0, 1)
    trend = np.clip(rng.normal(rng.choice([0.2, 0.85], keys), 0.1), 0, 1)
    season[:37] = np.nan  # keys that were not split
    profiled = pd.DataFrame(
        {"k": np.arange(keys), "strength_of_season": season, "strength_of_trend": trend}
    )
    figure = pictures.draw_fleet(profiled, "k", path=tmp_path / "f.svg")
    ax = figure.axes[0]
    cells = np.ma.filled(ax.collections[0].get_array(), 0).sum()
    assert cells + len(ax.collections[1].get_offsets()) == keys - 37
    assert "100,000 keys, 37 not split" in ax.get_title(loc="left")
    ET.parse(tmp_path / "f.svg")  # well-formed
    assert (tmp_path / "f.svg").stat().st_size < 1_000_000  # density, not 100,000 marks


def test_standouts_name_far_keys_once_per_spot():
    frame = pd.DataFrame(
        {
            "strength_of_season": [0.5, 0.5, 0.5, 0.0, 0.0, 1.0, np.nan],
            "strength_of_trend": [0.5, 0.5, 0.5, 0.0, 0.001, 1.0, 1.0],
        }
    )
    # (0, 0) and (1, 1) are equally far: the first of them in row order comes first; the
    # twin at (0, 0.001) is skipped, and the unsplit key never stands out
    assert pictures.standouts(frame, 3).tolist() == [3, 5, 0]


# ---------------------------------------------------------------------------------------
# Spans


def test_spans_side_by_side_are_the_splits_for_each_span(sales, tmp_path):
    label = "Quayside / plum jam"
    figure = pictures.draw_spans(
        sales,
        KEY,
        "week",
        "units",
        pick=label,
        season_spans=(7, 13, 0),
        trend_spans=(45, 89, 179, 357),
        path=tmp_path / "spans.png",
        **SETTINGS,
    )
    width = 4
    assert len(figure.axes) == 2 * 3 + 2 * width
    assert png_size(tmp_path / "spans.png") == tuple(
        round(v) for v in figure.get_size_inches() * pictures.DPI
    )
    rows = sales[pictures.key_labels(sales, KEY) == label]
    seasonal_panels = [ax for ax in figure.axes if ax.get_title(loc="left").startswith("season")]
    titles = [ax.get_title(loc="left") for ax in seasonal_panels]
    assert titles == ["season span 7", "season span 13 (default)", "season span 0 (fixed)"]
    lines = []
    for ax, span in zip(seasonal_panels, (7, 13, 0), strict=True):
        expected = tidesplit.split_table(rows, KEY, "week", "units", season_span=span, **SETTINGS)[
            "seasonal"
        ].to_numpy()
        drawn = ax.get_lines()[0].get_ydata()
        np.testing.assert_array_equal(drawn, expected)
        lines.append(drawn)
    assert not np.allclose(lines[0], lines[2])  # the span changes the seasonal part
    # a fixed pattern repeats exactly every cycle (Cleveland et al. 1990 with an infinite span)
    np.testing.assert_allclose(lines[2][52:104], lines[2][:52], atol=1e-9)
    trend_titles = [
        ax.get_title(loc="left")
        for ax in figure.axes
        if ax.get_title(loc="left").startswith("trend")
    ]
    assert trend_titles[1] == "trend span 89 (default)"
    # the panels of a row share their y axis, so the spans compare at a glance
    assert all(ax.get_ylim() == seasonal_panels[0].get_ylim() for ax in seasonal_panels)


def test_default_trend_span_is_the_published_rule_the_split_uses():
    # Cleveland et al. (1990), section 3: smallest odd integer >= 1.5 n_p / (1 - 1.5 / n_s)
    # monthly: 18 / (1 - 1.5 / 13) = 20.35 -> 21; weekly: 78 / 0.8846 = 88.2 -> 89
    assert pictures.default_trend_span(12) == 21
    assert pictures.default_trend_span(52) == 89
    assert pictures.default_trend_span(12, season_span=0) == 19  # infinite span: 1.5 n_p = 18
    t = np.arange(60)
    y = 10 + np.sin(2 * np.pi * t / 12) + 0.05 * t + np.random.default_rng(2).normal(0, 0.2, 60)
    plain = tidesplit.split(y, period=12)
    given = tidesplit.split(y, period=12, trend_span=pictures.default_trend_span(12))
    np.testing.assert_array_equal(plain.trend, given.trend)


def test_spans_refuses_arguments_it_varies(sales):
    with pytest.raises(ValueError, match="season_spans"):
        pictures.draw_spans(
            sales, KEY, "week", "units", pick="Quayside / plum jam", period=52, season_span=13
        )
    with pytest.raises(ValueError, match="one period"):
        pictures.draw_spans(
            sales, KEY, "week", "units", pick="Quayside / plum jam", period=52, periods=[52]
        )
    with pytest.raises(KeyError, match="no key"):
        pictures.draw_spans(sales, KEY, "week", "units", pick="Nowhere", period=52)


# ---------------------------------------------------------------------------------------
# The report

EXTERNAL = re.compile(
    r"""(https?:|ftp:|//[a-z0-9.-]+\.[a-z]{2,}|<link\b|\bsrc=["'](?!data:))""", re.IGNORECASE
)


def report_data(page: str) -> dict:
    found = re.search(
        r'<script type="application/json" id="report-data">(.*?)</script>', page, re.DOTALL
    )
    return json.loads(found.group(1))


def test_report_is_one_self_contained_file(parts, profiled, unusual, tmp_path):
    path = pictures.write_report(
        tmp_path / "run.html", parts, profiled, KEY, "week", "units", unusual=unusual, pictured=5
    )
    page = path.read_text()
    assert EXTERNAL.search(page) is None  # no address outside the file: no server, no network
    data = report_data(page)
    assert len(data["keys"]) == len(profiled) == 12
    assert len(data["pictures"]) == 5
    assert {k["key"] for k in data["keys"] if k["pictured"]} == set(data["pictures"])
    # the counts of unusual points are those of outliers()
    counted = pictures.key_labels(unusual, KEY).value_counts()
    for entry in data["keys"]:
        assert entry["unusual"] == counted.get(entry["key"], 0)
    # every embedded picture is a PNG of the parts picture's size
    for encoded in data["pictures"].values():
        image = matplotlib.image.imread(io.BytesIO(base64.b64decode(encoded)), format="png")
        assert image.shape[1] == round(pictures.PANEL_WIDTH * pictures.DPI)
    assert "12 keys; 12 listed; parts pictured for 5" in page


def test_report_stays_small_for_many_keys(tmp_path):
    frame = many_series(2600)
    profiled = tidesplit.profile(frame, "series", "t", "v", period=12)
    chosen = pictures.choose_pictured(profiled, "series", count=8)
    assert len(chosen) == 8
    # split only the keys the report pictures
    some = frame[frame["series"].isin(chosen)]
    parts = tidesplit.split_table(some, "series", "t", "v", period=12)
    path = pictures.write_report(
        tmp_path / "run.html", parts, profiled, "series", "t", "v", pictured=8, listed=300
    )
    data = report_data(path.read_text())
    assert len(data["keys"]) == 300
    assert sorted(data["pictures"]) == sorted(chosen)
    assert [k["key"] for k in data["keys"][:8]] == chosen  # pictured keys listed first
    assert "2,600 keys; 300 listed; parts pictured for 8" in path.read_text()
    # bounded by the pictured and listed counts (about 100 KB a picture), not the fleet
    assert path.stat().st_size < 8 * 150_000 + 300 * 200 + 200_000


def test_report_keeps_awkward_key_names_as_text(tmp_path):
    frame = many_series(2, points=48)
    frame["series"] = frame["series"].map({"s00000": "</script><b>bold", "s00001": "a & b"})
    parts = tidesplit.split_table(frame, "series", "t", "v", period=12)
    profiled = tidesplit.profile(frame, "series", "t", "v", period=12)
    page = pictures.write_report(
        tmp_path / "r.html", parts, profiled, "series", "t", "v", title="<i>run</i> @@DATA@@"
    ).read_text()
    assert "<b>" not in page and "<i>" not in page
    assert "<title>&lt;i&gt;run&lt;/i&gt; @@DATA@@</title>" in page  # text, not a placeholder
    data = report_data(page)
    assert sorted(k["key"] for k in data["keys"]) == ["</script><b>bold", "a & b"]
    assert sorted(data["pictures"]) == ["</script><b>bold", "a & b"]


def test_choose_pictured_takes_each_ranking_in_turn():
    profiled = pd.DataFrame(
        {
            "k": list("abcdef"),
            "strength_of_season": [0.9, 0.1, 0.5, 0.0, 0.95, np.nan],
            "strength_of_trend": [0.2, 0.8, 0.5, 0.1, 0.3, np.nan],
            "status": ["ok"] * 5 + ["too short"],
        }
    )
    unusual = pd.DataFrame({"k": ["c", "c", "b"], "is_outlier": [True, True, True]})
    # most unusual c, strongest season e, strongest trend b, weakest d, not split f
    assert pictures.choose_pictured(profiled, "k", unusual, 5) == ["c", "e", "b", "d", "f"]


def chromium() -> str:
    found = shutil.which("chromium") or shutil.which("chromium-browser")
    if found is None:
        pytest.skip("chromium is not installed (.ci/run installs it)")
    return found


def browse(page: Path, fragment: str, *extra: str) -> subprocess.CompletedProcess:
    """Open the page in headless chromium (as CI runs it: root, no network)."""
    with tempfile.TemporaryDirectory(ignore_cleanup_errors=True) as profile:
        flags = [
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            f"--user-data-dir={profile}",
            "--window-size=1400,1000",
            *extra,
        ]
        return subprocess.run(
            [chromium(), *flags, page.as_uri() + fragment],
            capture_output=True,
            text=True,
            timeout=120,
            check=True,
        )


def test_report_in_a_real_browser(parts, profiled, unusual, tmp_path):
    chromium()
    page = pictures.write_report(
        tmp_path / "run.html", parts, profiled, KEY, "week", "units", unusual=unusual
    )
    # typing part of a name into the finder and pressing Enter (#find= does both)
    dom = browse(page, "#find=" + "millbrook%20%2F%20sea", "--dump-dom").stdout
    assert re.search(r'<h2 id="parts-title">Millbrook / sea salt</h2>', dom)
    assert re.search(
        r'<img id="parts-picture" alt="series and parts of Millbrook / sea salt"'
        r' src="data:image/png;base64,',
        dom,
    )
    assert "1 of 12 listed keys match" in dom
    # both pictures decoded in the browser, at the width they were drawn
    assert 'data-fleet-width="840"' in dom
    assert f'data-parts-width="{round(pictures.PANEL_WIDTH * pictures.DPI)}"' in dom
    assert re.search(r'<tr class="row picked" data-key="Millbrook / sea salt">', dom)

    shot = tmp_path / "shot.png"
    browse(page, "#key=Quayside%20%2F%20plum%20jam", f"--screenshot={shot}")
    image = matplotlib.image.imread(shot)
    assert image.shape[:2] == (1000, 1400)
    # the header's terracotta rule and the parts' kelp-green seasonal line are on screen
    pixels = (image[..., :3] * 255).round().astype(int).reshape(-1, 3)
    for colour in ("trend", "seasonal"):
        rgb = np.array([int(pictures.ESTUARY[colour][i : i + 2], 16) for i in (1, 3, 5)])
        assert (np.abs(pixels - rgb).max(axis=1) <= 6).sum() > 200, colour


def test_report_search_and_sort_by_hand(parts, profiled, unusual, tmp_path):
    """Typing, Enter and clicks through chromium's DevTools protocol, as a person would."""
    chromium()
    from browser import Browser

    page = pictures.write_report(
        tmp_path / "run.html", parts, profiled, KEY, "week", "units", unusual=unusual
    )
    rows = "[...document.querySelectorAll('#rows tr')]"
    with Browser() as browser:
        browser.open(page.as_uri())
        browser.wait_for("document.body.dataset.fleetWidth === '840'")
        assert browser.evaluate(f"{rows}.length") == 12
        # search: type part of a name, the list narrows; Enter shows the first match
        browser.click("#finder")
        browser.type("plum")
        names = browser.evaluate(f"{rows}.map(r => r.dataset.key)")
        assert names and all("plum" in n for n in names)
        expected_names = sorted(k for k in set(pictures.key_labels(profiled, KEY)) if "plum" in k)
        assert sorted(names) == expected_names
        browser.press_enter()
        browser.wait_for(
            f"document.getElementById('parts-title').textContent === {json.dumps(names[0])}"
        )
        browser.wait_for(
            "document.getElementById('parts-picture').naturalWidth === "
            f"{round(pictures.PANEL_WIDTH * pictures.DPI)}"
        )
        assert browser.evaluate("document.querySelector('tr.picked').dataset.key") == names[0]
        shot = tmp_path / "found.png"
        shot.write_bytes(browser.screenshot())
        assert png_size(shot) == (1400, 1000)
        # sort: clear the search, click the unusual column, most first, then fewest first
        browser.evaluate(
            "document.getElementById('finder').value = ''; "
            "document.getElementById('finder').dispatchEvent(new Event('input'))"
        )
        counts = pictures.key_labels(unusual, KEY).value_counts()
        browser.click("th[data-field='unusual']")
        shown = browser.evaluate(f"{rows}.map(r => Number(r.children[3].textContent))")
        assert shown == sorted(shown, reverse=True) and shown[0] == counts.max()
        browser.click("th[data-field='unusual']")
        shown = browser.evaluate(f"{rows}.map(r => Number(r.children[3].textContent))")
        assert shown == sorted(shown)
        browser.click("th[data-field='season']")
        season = browser.evaluate(f"{rows}.map(r => Number(r.children[1].textContent))")
        assert season == sorted(season, reverse=True)
        assert season[0] == round(profiled["strength_of_season"].max(), 2)


# ---------------------------------------------------------------------------------------
# The command line


@pytest.fixture(scope="module")
def sources(sales, tmp_path_factory) -> dict[str, Path]:
    folder = tmp_path_factory.mktemp("sources")
    database = folder / "shop.duckdb"
    con = duckdb.connect(str(database))
    con.register("frame", sales)
    con.execute("CREATE TABLE weekly_units AS SELECT * FROM frame")
    con.close()
    parquet = folder / "shop.parquet"
    sales.to_parquet(parquet)
    return {"database": database, "parquet": parquet}


def test_draw_writes_every_picture_from_a_database(sources, tmp_path, capsys):
    out = {name: tmp_path / name for name in ("p.png", "f.svg", "s.png", "r.html")}
    code = cli.main(
        [
            "draw",
            str(sources["database"]),
            "--table",
            "weekly_units",
            "--key",
            "shop",
            "--key",
            "product",
            "--time",
            "week",
            "--value",
            "units",
            "--period",
            "52",
            "--robust",
            "--transform",
            "log",
            "--pick",
            "Quayside / plum jam",
            "--pick",
            "Millbrook / oat loaf",
            "--unusual",
            "--parts",
            str(out["p.png"]),
            "--fleet",
            str(out["f.svg"]),
            "--report",
            str(out["r.html"]),
            "--pictured",
            "3",
        ]
    )
    assert code == 0
    printed = capsys.readouterr().out
    assert "the parts of 2 key(s)" in printed and "12 keys" in printed
    assert png_size(out["p.png"]) == (
        round(2 * pictures.PANEL_WIDTH * pictures.DPI),
        round((1.6 + 1 + 1 + 0.9 + 0.45) * pictures.DPI),
    )
    ET.parse(out["f.svg"])
    data = report_data(out["r.html"].read_text())
    # three chosen, plus the picked keys that were not among them
    assert {"Quayside / plum jam", "Millbrook / oat loaf"} <= set(data["pictures"])
    assert 3 <= len(data["pictures"]) <= 5


def test_draw_spans_from_parquet(sources, tmp_path):
    target = tmp_path / "spans.svg"
    cli.main(
        [
            "draw",
            str(sources["parquet"]),
            "--key",
            "shop",
            "--key",
            "product",
            "--time",
            "week",
            "--value",
            "units",
            "--period",
            "52",
            "--pick",
            "Quayside / plum jam",
            "--spans",
            str(target),
            "--season-spans",
            "7,0",
            "--trend-spans",
            "45,89,179",
        ]
    )
    root = ET.parse(target).getroot()
    assert root.tag.endswith("svg")


@pytest.mark.parametrize(
    ("arguments", "message"),
    [
        (["--table", "t", "--fleet", "x.png"], "a Parquet source has none"),
        (["--unusual", "--fleet", "x.png"], "--unusual rings points in --parts"),
        (["--spans", "x.png"], "exactly one --pick"),
        (["--season-spans", "7", "--fleet", "x.png"], "give --spans too"),
        ([], "nothing to draw"),
        (["--pictured", "3", "--fleet", "x.png"], "give --report too"),
        (["--label", "3", "--parts", "x.png"], "give one of them too"),
        (["--report", "r.html", "--pictured", "9", "--listed", "8"], "--listed is at least"),
        (["--pick", "Nowhere / nothing", "--fleet", "x.png"], "no key 'Nowhere / nothing'"),
    ],
)
def test_draw_refuses_arguments_it_would_not_use(sources, arguments, message):
    base = [
        "draw",
        str(sources["parquet"]),
        "--key",
        "shop",
        "--key",
        "product",
        "--time",
        "week",
        "--value",
        "units",
        "--period",
        "52",
    ]
    with pytest.raises(SystemExit, match=re.escape(message)):
        cli.main(base + arguments)


def test_draw_needs_a_table_for_a_database(sources):
    with pytest.raises(SystemExit, match="give --table"):
        cli.main(
            [
                "draw",
                str(sources["database"]),
                "--key",
                "shop",
                "--time",
                "week",
                "--value",
                "units",
                "--fleet",
                "x.png",
            ]
        )


def test_pictures_module_imports_matplotlib_only_when_drawing():
    code = (
        "import sys; from tidesplit import pictures; before = 'matplotlib' in sys.modules; "
        "import pandas as pd; pictures.draw_fleet(pd.DataFrame({'k': [1], "
        "'strength_of_season': [0.5], 'strength_of_trend': [0.5]}), 'k'); "
        "print(before, 'matplotlib' in sys.modules, 'matplotlib.pyplot' in sys.modules)"
    )
    shown = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, check=True
    ).stdout.split()
    assert shown == ["False", "True", "False"]  # never pyplot: no global figure state
