"""Shared fixtures and data for the tests."""

from __future__ import annotations

import os
import sys
from pathlib import Path

import duckdb
import numpy as np
import pytest
from hypothesis import HealthCheck, Phase
from hypothesis import settings as hypothesis_settings

sys.path.insert(0, str(Path(__file__).parent))  # for tests/naive.py and tests/datasets.py

import tidesplit


@pytest.fixture
def con() -> duckdb.DuckDBPyConnection:
    """A fresh in-memory database with the tide_* functions registered."""
    connection = tidesplit.connect()
    yield connection
    connection.close()


@pytest.fixture(scope="session")
def spark():
    """A local Spark session for the tests of the Spark front (started once, when asked)."""
    from tidesplit import spark as tide_spark

    session = tide_spark.local_session(cores=2)
    yield session
    session.stop()


@pytest.fixture
def rng() -> np.random.Generator:
    return np.random.default_rng(20261201)


def seasonal_series(rng: np.random.Generator, n: int, period: int, noise: float = 0.3):
    """A level, a gentle trend, a two-harmonic cycle and Gaussian noise."""
    t = np.arange(n)
    cycle = np.sin(2 * np.pi * t / period) + 0.4 * np.cos(4 * np.pi * t / period)
    return 10 + 0.03 * t + 2 * cycle + rng.normal(0, noise, n)


# Property-based tests (tests/test_generated.py): a fixed profile, so that CI runs the same
# examples every time and the suite stays fast; HYPOTHESIS_PROFILE=explore searches afresh.

hypothesis_settings.register_profile(
    "ci",
    derandomize=True,
    database=None,
    deadline=None,
    print_blob=True,
    phases=[Phase.explicit, Phase.reuse, Phase.generate, Phase.shrink],
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
)
hypothesis_settings.register_profile(
    "explore", deadline=None, suppress_health_check=[HealthCheck.too_slow], max_examples=1000
)
hypothesis_settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "ci"))
