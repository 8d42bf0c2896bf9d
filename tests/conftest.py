"""Shared fixtures and data for the tests."""

from __future__ import annotations

import sys
from pathlib import Path

import duckdb
import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).parent))  # for tests/naive.py and tests/datasets.py

import tidesplit


@pytest.fixture
def con() -> duckdb.DuckDBPyConnection:
    """A fresh in-memory database with the tide_* functions registered."""
    connection = tidesplit.connect()
    yield connection
    connection.close()


@pytest.fixture
def rng() -> np.random.Generator:
    return np.random.default_rng(20261201)


def seasonal_series(rng: np.random.Generator, n: int, period: int, noise: float = 0.3):
    """A level, a gentle trend, a two-harmonic cycle and Gaussian noise."""
    t = np.arange(n)
    cycle = np.sin(2 * np.pi * t / period) + 0.4 * np.cos(4 * np.pi * t / period)
    return 10 + 0.03 * t + 2 * cycle + rng.normal(0, noise, n)
