"""Shared test setup: a non-interactive plotting backend and a fixed seed policy."""

import os

os.environ.setdefault("MPLBACKEND", "Agg")

import numpy as np  # noqa: E402
import pytest  # noqa: E402


@pytest.fixture
def rng():
    """A seeded generator; every statistical test states this seed (20261202)."""
    return np.random.default_rng(20261202)
