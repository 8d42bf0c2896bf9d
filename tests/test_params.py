"""The published default rules and the checks on every argument."""

from __future__ import annotations

import pytest

from tidesplit import ParamError, SplitParams
from tidesplit.params import default_jump, default_lowpass_span, default_trend_span


def test_paper_defaults_for_monthly_data():
    # Cleveland et al. (1990), section 3: with n_p = 12 and n_s = 13 the rules give
    # n_t = smallest odd >= 1.5 * 12 / (1 - 1.5 / 13) = 20.35..., so 21, and n_l = 13.
    resolved = SplitParams(period=12).resolve()
    assert resolved.season_span == 13  # common practice; the paper asks for odd >= 7
    assert resolved.trend_span == 21
    assert resolved.lowpass_span == 13


@pytest.mark.parametrize(
    ("period", "season_span", "trend"),
    [(12, 7, 23), (4, 7, 9), (7, 13, 13), (52, 13, 89), (24, 0, 37)],
)
def test_trend_span_rule(period, season_span, trend):
    # smallest odd integer >= 1.5 p / (1 - 1.5 / n_s) (Cleveland et al. 1990, section 3);
    # the figures for n_s = 7 agree with statsmodels' STL, which applies the same rule.
    assert default_trend_span(period, season_span) == trend


@pytest.mark.parametrize(("period", "lowpass"), [(12, 13), (4, 5), (7, 7), (52, 53)])
def test_lowpass_span_rule(period, lowpass):
    # smallest odd integer >= n_p (Cleveland et al. 1990, section 3)
    assert default_lowpass_span(period) == lowpass


def test_jumps_are_about_a_tenth_of_the_span():
    # about 10% of each span (paper, section 3, from memory), never below 1
    assert [default_jump(s) for s in (3, 9, 11, 13, 21, 101)] == [1, 1, 2, 2, 3, 11]


def test_loop_defaults_depend_on_robustness():
    plain = SplitParams(period=12).resolve()
    robust = SplitParams(period=12, robust=True).resolve()
    assert (plain.inner_loops, plain.outer_loops) == (2, 0)
    assert (robust.inner_loops, robust.outer_loops) == (1, 10)
    # outer loops only mean something with robustness
    assert SplitParams(period=12, outer_loops=5).resolve().outer_loops == 0


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"period": 1}, "period must be at least 2"),
        ({"period": 12.5}, "period must be a whole number"),
        ({"period": 12, "season_span": 8}, "season_span must be an odd integer"),
        ({"period": 12, "season_span": 1}, "season_span must be an odd integer"),
        ({"period": 12, "trend_span": 20}, "trend_span must be an odd integer"),
        ({"period": 12, "lowpass_span": -3}, "lowpass_span must be an odd integer"),
        ({"period": 12, "trend_degree": 2}, "trend_degree must be 0 or 1"),
        ({"period": 12, "season_jump": 0}, "season_jump must be at least 1"),
        ({"period": 12, "inner_loops": 0}, "inner_loops must be at least 1"),
        ({"period": 12, "transform": "sqrt"}, "transform must be one of none, log, boxcox"),
        ({"period": 12, "transform": "boxcox", "boxcox_lambda": float("inf")}, "finite"),
        ({"period": 12, "robust": "yes"}, "robust must be true or false"),
        ({}, "period is required"),
    ],
)
def test_bad_arguments_are_named(kwargs, message):
    with pytest.raises(ParamError, match=message):
        SplitParams(**kwargs).resolve()


def test_unknown_argument_is_named():
    with pytest.raises(ParamError, match=r"unknown argument.*seasonal_window"):
        SplitParams.from_kwargs(period=12, seasonal_window=7)


def test_log_is_boxcox_at_zero():
    assert SplitParams(period=4, transform="log").resolve().boxcox_lambda == 0.0
    assert SplitParams(period=4, transform="boxcox").resolve().boxcox_lambda is None
