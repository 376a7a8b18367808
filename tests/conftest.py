"""Shared test settings: fixed seeds, hypothesis profile, and the Agg backend for plots."""

import os

os.environ.setdefault("MPLBACKEND", "Agg")

import numpy as np  # noqa: E402
import pytest  # noqa: E402
from hypothesis import settings  # noqa: E402

settings.register_profile("ci", max_examples=60, deadline=None, derandomize=True)
settings.load_profile("ci")


@pytest.fixture
def rng():
    """A fixed-seed random generator (common practice: reproducible tests)."""
    return np.random.default_rng(20261202)
