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


@pytest.fixture
def square_ring():
    """A 24 x 24 uint8 image of one bright square ring (wall 200) around a dark inside (10),
    on a dark surround: one enclosed region of 10 x 10 pixels (hand-made geometry)."""
    img = np.zeros((24, 24), np.uint8)
    img[4:20, 4:20] = 200
    img[7:17, 7:17] = 10
    return img


@pytest.fixture(scope="module")
def client():
    """A Dask client of a loopback LocalCluster (2 workers in this process), per module."""
    distributed = pytest.importorskip(
        "distributed", reason="Dask distributed (extra 'cluster') is not installed")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False,
                                  host="127.0.0.1", protocol="tcp",
                                  dashboard_address="127.0.0.1:0") as cluster, \
            distributed.Client(cluster) as dask_client:
        yield dask_client
