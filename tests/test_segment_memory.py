"""The memory-lean parts of the segmentation, checked against numpy / scipy / scikit-image.

Invented data (random labels, random noise, a cavitas.scenes foam) only; the references
are general-purpose libraries, named beside each check.
"""

import tracemalloc

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import ndimage as ndi

from cavitas.cubical._neighbors import grid_shape3
from cavitas.segment import segment
from cavitas.segment._label_kernels import same_value_pieces
from cavitas.segment._noise import smooth
from cavitas.segment._regions import (
    _backward_offsets,
    _label_quantile,
    label_counts,
    largest_pieces,
)


@settings(max_examples=40, deadline=None)
@given(ndim=st.sampled_from([2, 3]), seed=st.integers(0, 2**16), values=st.integers(1, 4))
def test_same_value_pieces_match_skimage_label(ndim, seed, values):
    # Reference: skimage.measure.label(background=0) numbers pieces of equal value the same
    # way (raster order of their first voxel) for every connectivity.
    from skimage.measure import label

    rng = np.random.default_rng(seed)
    shape = tuple(int(n) for n in rng.integers(2, 9, ndim))
    lab = rng.integers(0, values + 1, shape).astype(np.int32)
    for conn in range(1, ndim + 1):
        got, count = same_value_pieces(lab.reshape(grid_shape3(shape)),
                                       _backward_offsets(ndim, conn))
        ref = label(lab, background=0, connectivity=conn)
        np.testing.assert_array_equal(got.reshape(shape), ref)
        assert count == ref.max(initial=0)


@pytest.mark.parametrize("ndim", [2, 3])
def test_largest_pieces_keep_the_biggest_component(ndim):
    # Reference: scipy.ndimage.label of each value's mask, sizes by np.bincount.
    rng = np.random.default_rng(ndim)
    lab = rng.integers(0, 4, (12,) * ndim).astype(np.int32)
    kept = largest_pieces(lab, 3, connectivity=1)  # pieces use the complement rule: full
    full = ndi.generate_binary_structure(ndim, ndim)
    for value in range(1, 4):
        pieces, _ = ndi.label(lab == value, full)
        sizes = np.bincount(pieces.ravel())[1:]
        assert (kept == value).sum() == sizes.max()
        assert np.all(lab[kept == value] == value)


@pytest.mark.parametrize("q", [0.0, 0.5, 1.0])
def test_label_quantile_float32_matches_numpy_sort(q):
    # Reference: np.sort of each label's values, the element at floor(q * (n - 1)).
    rng = np.random.default_rng(7)
    lab = rng.integers(0, 6, (30, 40)).astype(np.int32)
    img = rng.normal(0, 50, lab.shape).astype(np.float32)
    img[0, :2] = [-0.0, 0.0]
    got = _label_quantile(img, lab, 6, q)  # labels 1..5 present, 6 absent
    for value in range(1, 6):
        vals = np.sort(img[lab == value])
        assert got[value - 1] == vals[int(np.floor(q * (len(vals) - 1)))]
    assert np.isnan(got[5])


def test_label_counts_match_bincount():
    # Reference: np.bincount.
    lab = np.random.default_rng(3).integers(0, 9, (50, 60)).astype(np.int32)
    np.testing.assert_array_equal(label_counts(lab, 12), np.bincount(lab.ravel(), minlength=12))


@pytest.mark.parametrize("dtype", [np.uint8, np.uint16, np.float32])
def test_smooth_float32_within_rounding_of_scipy_float64(dtype):
    # Reference: scipy.ndimage.gaussian_filter in float64; float32 storage rounds once per
    # axis pass (relative 2**-24 each), and the sign is exact.
    rng = np.random.default_rng(0)
    img = rng.integers(0, 200, (20, 24, 22)).astype(dtype)
    ref = ndi.gaussian_filter(img.astype(np.float64), (1.0, 1.5, 0.5), mode="nearest")
    got = smooth(img, (1.0, 1.5, 0.5), dtype=np.float32)
    assert got.dtype == np.float32
    np.testing.assert_allclose(got, ref, rtol=4e-7, atol=1e-5)
    np.testing.assert_array_equal(smooth(img, (1.0, 1.5, 0.5), dtype=np.float32, sign=-1.0),
                                  -got)
    np.testing.assert_array_equal(smooth(img, (0.0, 0.0, 0.0), dtype=np.float32),
                                  img.astype(np.float32))


@pytest.mark.slow
def test_segment_numpy_peak_per_voxel_stays_low():
    # Regression (invented foam scene): numpy buffers allocated by segment() on a uint16
    # volume peak well below the 100+ bytes per voxel of float64 copies (tracemalloc sees
    # numpy's buffers, not the compiled kernels' own; bench/segment_scale.py measures RSS).
    from cavitas.scenes import foam

    scene = foam((96, 96, 96), cells=40, seed=3, noise=0.05)
    img = (scene.image * 1000 + 500).clip(0, 65535).astype(np.uint16)
    segment(img[:24, :24, :24])  # compile caches and numpy set-up outside the measurement
    tracemalloc.start()
    try:
        seg = segment(img)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert seg.labels.max() > 0
    assert peak / img.size < 48


def _sorted_by_order(values: np.ndarray) -> np.ndarray:
    """``values`` sorted by value, ``-0.0`` before ``+0.0`` (numpy's lexsort)."""
    return values[np.lexsort((~np.signbit(values), values))]


def _before(values: np.ndarray, level: np.float32) -> np.ndarray:
    """Which ``values`` come before ``level`` in that order."""
    tie = (values == level) & np.signbit(values) & ~np.signbit(level)
    return (values < level) | tie


@pytest.mark.parametrize("dtype", [np.int32, np.int64])
def test_label_quantile_selects_what_a_sort_of_each_label_gives(dtype):
    # Reference: numpy's lexsort of each label's values (the order of the old one-sort
    # implementation, -0.0 before +0.0), the element at floor(q * (n - 1)); bit for bit,
    # with ties, signed zeros, labels beyond n_labels and an empty label, also for the
    # quantile of the values under a level per label.
    rng = np.random.default_rng(11)
    lab = rng.integers(0, 9, (41, 37)).astype(dtype)  # 8 beyond n_labels = 7
    img = rng.integers(-3, 4, lab.shape).astype(np.float32) * np.float32(0.5)
    img[rng.random(lab.shape) < 0.1] = -0.0
    img[lab == 3] = 1.25  # one label of equal values
    lab[lab == 5] = 0  # label 5 empty
    levels = np.array([0.0, -0.0, 1.0, 1.25, 2.0, -1.5, 0.5], np.float32)
    for q in (0.0, 0.1, 0.5, 0.9, 1.0):
        got, got_under = _label_quantile(img, lab, 7, q, below=levels)
        assert got.dtype == got_under.dtype == np.float64  # what the callers compute in
        for value in range(1, 8):
            vals = _sorted_by_order(img[lab == value])
            under = _sorted_by_order(vals[_before(vals, levels[value - 1])])
            for result, ref in ((got, vals), (got_under, under)):
                if not len(ref):
                    assert np.isnan(result[value - 1])
                    continue
                want = ref[int(np.floor(q * (len(ref) - 1)))]
                assert np.float32(result[value - 1]).tobytes() == want.tobytes()
