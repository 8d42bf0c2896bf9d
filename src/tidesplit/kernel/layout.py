"""The kernels' settings matrix: one row of integers per series, these columns."""

# Columns of the settings matrix, one row per series.
COL_PERIOD = 0
COL_SEASON_SPAN = 1  # 0 means an infinite span: a fixed seasonal pattern
COL_TREND_SPAN = 2
COL_LOWPASS_SPAN = 3
COL_SEASON_DEGREE = 4
COL_TREND_DEGREE = 5
COL_LOWPASS_DEGREE = 6
COL_SEASON_JUMP = 7
COL_TREND_JUMP = 8
COL_LOWPASS_JUMP = 9
COL_INNER = 10
COL_OUTER = 11
COL_ACTIVE = 12  # 0: leave this series alone (outputs stay NaN)
N_SETTINGS = 13
