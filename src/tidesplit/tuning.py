"""Constants that tune the method or guard the work, in one place, each with its reason.

The published method's own constants (the loess weight cut-offs of the reference
routines, the default spans' rules) stay beside the code that follows the paper
(``kernel/loess.py``, ``params.py``); these are our choices.
"""

from __future__ import annotations

# The season span when none is given: common practice (the paper asks only for an odd
# number of at least 7).
DEFAULT_SEASON_SPAN = 13

# Finite values beyond this magnitude are refused: sums of squares in the fits and in the
# answers (variances, forecast errors) could overflow, which would give NaN with status ok.
LARGEST_MAGNITUDE = 1e150

# A series may have at most this many grid points per observed point once gaps are filled
# (common practice guard against a stray time far from the rest).
MAX_GROWTH = 10

# A series may have at most this many points on its regular grid: a split holds about 20
# numbers per point (input, grid, the kernel's scratch, three parts, the answer's columns),
# so this is some 3 GiB for one series, checked before the grid is built (38 years of
# minutes fit in it).
MAX_SERIES_POINTS = 20_000_000

# An implied period is the first autocorrelation peak above this (and above the rough 95%
# band 2 / sqrt(n)): common practice.
PERIOD_PEAK_FLOOR = 0.3

# Work per launch of a compiled kernel, in point-passes (points x inner loops x (outer loops +
# 1), times rounds and periods with several): about half a second on one core (measured:
# some 8 million point-passes a second). Python takes a KeyboardInterrupt only between
# launches, so this bounds how long Ctrl-C waits in the Python front.
LAUNCH_WORK = 4_000_000

# Series per launch at least (but the last): enough for every thread to run the kernel's
# side-by-side groups (kernel/lanes.py: eight series of one shape at a time), where a few
# long series would make LAUNCH_WORK alone. Two threads here; with more, a launch takes a
# group per thread (batch_split._launches).
LAUNCH_SERIES = 16

# DuckDB runs UDF calls (up to 2,048 series each) on its own threads, so a call normally
# uses one thread. A call this large (a few very long series) is likely the only one in
# flight, so it spreads its series over numba's threads instead.
PARALLEL_POINTS = 1_000_000

# tide_outliers (see unusual.unusual_points).
# The stepwise test's significance, per point: the share of the points of pure Gaussian noise
# flagged. One in 2,000 keeps the rate under one in 1,000 with room for what the noise
# model misses (measured: benchmarks/accuracy.py prints it).
DEFAULT_SIGNIFICANCE = 0.0005
# Candidates tested per series: one point in ten at most (the test needs an upper bound on
# the number of outliers; ours, common practice: unusual points are by nature few).
CANDIDATE_SHARE = 0.1
# Points the robustness pass sets aside before the plain refit: weight below 0.05, that is
# beyond about 0.88 of the bisquare's cut-off of 6 MAD (near 3.6 standard deviations
# under Gaussian noise, so about one point in 3,000 of pure noise). Setting aside costs a
# noise point nothing (its departure is brought to a kept point's spread), while a spike
# left in the refit bends the fit towards itself and hides.
SET_ASIDE_WEIGHT = 0.05
# Refits at most: points are set aside again by the weights of each refit's remainder
# until the set stops changing.
SET_ASIDE_ROUNDS = 4
# Noise series a set-aside point's spread is measured on (a Monte Carlo estimate: with 16
# its standard deviation is off by about 4% where the fit's share of it is a third), and
# the seed that makes them the same in every run.
PROBES = 16
PROBE_SEED = 20_261_202
# Neighbours each side whose median a remainder is judged against: three (a median of six)
# found 91% of the injected spikes where two found 90%, at the same error rates.
NEIGHBOUR_REACH = 3
DEFAULT_MAD_THRESHOLD = 3.5  # robust z-score; Iglewicz & Hoaglin (1993) suggest 3.5 (from memory)

# tide_forecast (see forecast_ahead.forecast).
# Earlier ends each series is forecast from, a cycle apart, to choose a method and
# to check its intervals on the series' own past.
ROLLING_ORIGINS = 24

# The Easter effect's window: the days before Easter Sunday whose share falls in each period
# (common practice in seasonal adjustment: about a week).
EASTER_WINDOW_DAYS = 8
