"""The segmentation's chunked building blocks equal their whole-volume computations exactly.

Checks and their sources:

* Smoothing (``segment/_chunked_smooth.py``) against ``scipy.ndimage.gaussian_filter`` of the
  whole volume (scipy's own filter, through :func:`cavitas.segment._noise.smooth`, which is
  that filter in the work type and polarity): equal bit for bit, on random volumes and
  chunkings (chunks one voxel thick, kernels wider than a chunk and than the volume), both
  polarities, integer and float input, and the closed faces of ``keep_border``.
* Connected components (``segment/_chunked_components.py``) against
  ``scipy.ndimage.label`` of the whole volume: the same label for every voxel (scipy's
  numbering, in raster order of each component's first voxel) and the same count, for
  every connectivity from faces to full.
* Whole-image statistics (``segment/_chunked_statistics.py``) against ``numpy.percentile``
  (its ``"linear"`` rule; order statistics against ``numpy.sort``) and against the in-memory
  noise level (:func:`cavitas.segment._noise.noise_level`, a wavelet MAD on a central crop,
  Donoho & Johnstone 1994): equal, for integer and float types, ties and extreme values.
* Both on a loopback Dask LocalCluster with an invented foam (``cavitas.scenes.foam``;
  invented data, so only an identity check) cut by chunks through every cell.

That a chunked path must equal its one-process path exactly is common practice
(DEVELOPERS.md: a parallel path equals its serial one).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import ndimage as ndi

from cavitas.segment._chunked_components import label_in_chunks
from cavitas.segment._chunked_smooth import gaussian_radius, smooth_in_chunks
from cavitas.segment._chunked_statistics import (
    noise_level_in_chunks,
    order_statistics_in_chunks,
    percentiles_in_chunks,
)
from cavitas.segment._detect import close_faces
from cavitas.segment._noise import noise_level, smooth

da = pytest.importorskip("dask.array", reason="Dask (extra 'cluster') is not installed")


def _random_chunks(rng, size, largest):
    sizes = []
    while sum(sizes) < size:
        sizes.append(int(rng.integers(1, min(largest, size - sum(sizes)) + 1)))
    return tuple(sizes)


def _bits_equal(a: np.ndarray, b: np.ndarray) -> bool:
    return a.dtype == b.dtype and a.shape == b.shape and np.array_equal(
        a.view(np.uint8), b.view(np.uint8))


def test_gaussian_radius_is_scipys():
    # scipy.ndimage.gaussian_filter1d: radius int(truncate * sigma + 0.5), truncate 4
    for sigma in (0.3, 0.5, 1.0, 1.5, 2.0, 3.0):
        delta = np.zeros(41)
        delta[20] = 1.0
        support = np.flatnonzero(ndi.gaussian_filter1d(delta, sigma, mode="constant"))
        assert gaussian_radius(sigma) == 20 - support.min() == support.max() - 20


def test_smoothing_equals_whole_volume_bit_for_bit():
    # Reference: scipy.ndimage.gaussian_filter of the whole volume (via _noise.smooth).
    rng = np.random.default_rng(18)
    for case in range(16):
        ndim = 2 + case % 2
        shape = tuple(int(rng.integers(2, 14)) for _ in range(ndim))
        dtype = (np.uint16, np.float32, np.uint8, np.float64)[case % 4]
        image = rng.integers(0, 1000, size=shape).astype(dtype)
        sigma = tuple(float(rng.choice([0.0, 0.5, 1.0, 3.0])) for _ in range(ndim))
        work = np.float64 if dtype == np.float64 else np.float32
        chunks = tuple(_random_chunks(rng, s, 4) for s in shape)
        sign = (1.0, -1.0)[case // 2 % 2]
        closed = case % 3 == 0
        ref = smooth(image, sigma, dtype=work, sign=sign)
        if closed:
            close_faces(ref)
        got = smooth_in_chunks(da.from_array(image, chunks=chunks), sigma, dtype=work,
                               sign=sign, closed_border=closed)
        assert got.chunks == chunks
        assert _bits_equal(got.compute(), ref), (shape, sigma, chunks, sign, closed)


def test_components_equal_scipy_label():
    # Reference: scipy.ndimage.label with generate_binary_structure(ndim, connectivity).
    rng = np.random.default_rng(7)
    for case in range(18):
        ndim = 2 + case % 2
        shape = tuple(int(rng.integers(1, 12)) for _ in range(ndim))
        mask = rng.random(shape) < (0.3, 0.5, 0.7)[case % 3]
        conn = 1 + case // 2 % ndim
        chunks = tuple(_random_chunks(rng, s, 4) for s in shape)
        ref, count = ndi.label(mask, ndi.generate_binary_structure(ndim, conn))
        got = label_in_chunks(da.from_array(mask, chunks=chunks), conn)
        assert got.count == count
        labels = got.labels.compute()
        assert labels.dtype == ref.dtype and np.array_equal(labels, ref), (shape, conn, chunks)


def test_components_of_an_empty_and_a_full_mask():
    for fill in (False, True):
        mask = np.full((4, 5, 3), fill)
        got = label_in_chunks(da.from_array(mask, chunks=2), 1)
        assert got.count == int(fill)
        assert np.array_equal(got.labels.compute(), mask.astype(np.int32))


def test_percentiles_and_order_statistics_equal_numpy():
    # Reference: numpy.percentile ("linear", as segment() computes the robust range) and
    # numpy.sort; integers stay integers until the blend, floats are blended in float64.
    rng = np.random.default_rng(99)
    types = (np.uint8, np.int16, np.uint16, np.int32, np.int64, np.float32, np.float64)
    for case in range(14):
        dtype = np.dtype(types[case % len(types)])
        shape = tuple(int(rng.integers(1, 10)) for _ in range(1 + case % 3))
        if dtype.kind == "f":
            values = (rng.standard_normal(shape) * (1e-30, 1.0, 1e30)[case % 3]).astype(dtype)
            if case % 2:
                values = np.round(values)  # ties
        else:
            info = np.iinfo(dtype)  # the type's extremes included
            values = rng.integers(info.min, info.max, size=shape, endpoint=True, dtype=dtype)
        lazy = da.from_array(values, chunks=tuple(int(rng.integers(1, 4)) for _ in shape))
        ranks = rng.integers(0, values.size, size=3)
        assert np.array_equal(order_statistics_in_chunks(lazy, ranks),
                              np.sort(values.ravel())[ranks])
        whole = values if dtype.kind in "iu" else values.astype(np.float64)
        percents = [0, 0.5, 33.3, 50, 99.5, 100]
        expected = np.percentile(whole, percents)
        got = percentiles_in_chunks(lazy, percents)
        assert got.dtype == expected.dtype and np.array_equal(got, expected), (dtype, shape)


def test_noise_level_reads_the_same_voxels():
    # Reference: the in-memory noise_level (wavelet MAD, Donoho & Johnstone 1994) on a
    # volume above its 4 Mi-voxel crop and on a small image read whole.
    rng = np.random.default_rng(4)
    for shape, chunks in (((170, 170, 171), (64, 50, 171)), ((40, 33), (7, 5))):
        values = rng.integers(0, 4000, shape).astype(np.uint16)
        assert noise_level_in_chunks(da.from_array(values, chunks=chunks), 0.3) == \
            noise_level(values, 0.3)


# -- on a Dask cluster (tests/conftest.py: client) -------------------------------------------

@pytest.mark.cluster
@pytest.mark.parametrize("conn,walls", [(1, "bright"), (3, "dark")])
def test_foam_on_a_cluster(client, conn, walls):
    # Invented foam (cavitas.scenes.foam): identity with scipy's whole-volume filter and
    # labelling; chunks 1 voxel thick and chunks cutting through every cell.
    from cavitas.scenes.foam import foam

    scene = foam((32, 32, 32), cells=12, walls=walls, seed=3)
    low, high = scene.image.min(), scene.image.max()
    image = np.round((scene.image - low) / (high - low) * 1000).astype(np.uint16)
    chunks = ((1, 9, 1, 21), (7, 1, 11, 13), (32,))
    sign = 1.0 if walls == "bright" else -1.0
    ref = smooth(image, (1.0, 1.0, 1.0), dtype=np.float32, sign=sign)
    got = smooth_in_chunks(da.from_array(image, chunks=chunks), (1.0, 1.0, 1.0),
                           dtype=np.float32, sign=sign)
    assert _bits_equal(got.compute(), ref)
    # the cells: components of the voxels below the level midway between the typical
    # cell and the typical wall (the scene's truth tells which voxels are which)
    level = float(np.median(ref[scene.truth > 0]) + np.median(ref[scene.truth == 0])) / 2
    cells = ref < level
    expected, count = ndi.label(cells, ndi.generate_binary_structure(3, conn))
    found = label_in_chunks(got < level, conn)
    assert found.count == count and count >= 8  # the cells were exercised
    assert np.array_equal(found.labels.compute(), expected)
