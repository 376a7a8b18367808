"""Streamed statistics and the memory estimate.

Reference: numpy.percentile (default 'linear' method) and numpy min/max on the finite
values (general-purpose reference library)."""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from cavitas.io import estimate_memory_bytes, summarize


def _reference(data):
    finite = data[np.isfinite(data)] if data.dtype.kind == "f" else data.ravel()
    return finite.min(), finite.max(), np.percentile(finite, [1, 50, 99])


@pytest.mark.parametrize("dtype", ["uint8", "uint16", "int16", "int32"])
@pytest.mark.parametrize("ndim", [2, 3])
@pytest.mark.parametrize("chunk", [7, 1 << 24])
def test_integer_statistics_are_exact(rng, dtype, ndim, chunk):
    # source: numpy.percentile; the chunked path counts values, so it must agree exactly
    info = np.iinfo(dtype)
    low, high = max(info.min, -50000), min(info.max, 50000)
    data = rng.integers(low, high, size=(6, 9, 11)[-ndim:], dtype=dtype)
    stats = summarize(data, chunk_voxels=chunk)
    minimum, maximum, percentiles = _reference(data)
    assert (stats["min"], stats["max"]) == (minimum, maximum)
    np.testing.assert_allclose(list(stats["percentiles"].values()), percentiles, rtol=1e-12)
    assert stats["exact"] and stats["nonfinite"] == 0


@given(arrays(np.uint16, st.tuples(st.integers(1, 6), st.integers(1, 6), st.integers(1, 6))),
       st.integers(1, 40))
def test_chunked_percentiles_match_numpy(data, chunk):
    # source: numpy.percentile (property over random shapes and chunk sizes)
    stats = summarize(data, chunk_voxels=chunk)
    np.testing.assert_allclose(list(stats["percentiles"].values()),
                               np.percentile(data, [1, 50, 99]), rtol=1e-12)


def test_float_statistics_with_nonfinite_values(rng):
    data = rng.normal(size=(10, 20, 30)).astype(np.float32)
    data[0, 0, :5] = np.nan
    data[1, 1, 1] = np.inf
    whole = summarize(data)
    minimum, maximum, percentiles = _reference(data)
    assert whole["nonfinite"] == 6 and whole["exact"]
    assert (whole["min"], whole["max"]) == (minimum, maximum)
    np.testing.assert_allclose(list(whole["percentiles"].values()), percentiles, rtol=1e-6)
    chunked = summarize(data, chunk_voxels=600)  # histogram: error below range / 65536
    assert chunked["nonfinite"] == 6 and not chunked["exact"]
    tolerance = float(maximum - minimum) / 65536
    np.testing.assert_allclose(list(chunked["percentiles"].values()), percentiles,
                               atol=tolerance)


def test_all_nan():
    stats = summarize(np.full((2, 3), np.nan))
    assert stats["min"] is None and stats["nonfinite"] == 6
    assert set(stats["percentiles"].values()) == {None}


def test_memory_estimate_formula():
    # the formula of cavitas/_shared/memory.py (input + measured work per voxel), common practice
    base, small = 340 * 2**20, 6000 * 40  # the program, and the small-volume term
    assert estimate_memory_bytes((10, 20, 30), np.float32) == base + 6000 * (4 + 66) + small
    assert estimate_memory_bytes((10, 20, 30), np.int32) == base + 6000 * (4 + 96) + small
    assert estimate_memory_bytes((2048, 2048, 2048), "uint8") == (  # no overflow
        base + 2048**3 * 67 + 2**21 * 40)
