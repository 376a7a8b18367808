"""The fast two-class split equals scikit-image's Otsu threshold and NumPy's class medians.

Reference: ``skimage.filters.threshold_otsu`` (nbins=1024) and ``np.median`` of each class
(general-purpose libraries; Otsu 1979, doi:10.1109/TSMC.1979.4310076), on random samples
full of ties, in both float types the segmentation smooths in, contiguous and strided.
"""

from __future__ import annotations

import numpy as np
import pytest
from skimage.filters import threshold_otsu

from cavitas.segment._evidence import class_split
from cavitas.segment._two_class import otsu_split


def _skimage_and_numpy(sample: np.ndarray) -> tuple[float, float, float]:
    t = float(threshold_otsu(sample.astype(np.float64), nbins=1024))
    return t, float(np.median(sample[sample <= t])), float(np.median(sample[sample > t]))


def _samples(rng: np.random.Generator, dtype):
    for n in (2, 3, 7, 64, 999, 4096):
        yield rng.normal(size=n)
        yield rng.integers(0, 4, n).astype(float)            # a few values, many ties
        yield np.r_[rng.normal(0, 1, n), rng.normal(6, 0.5, n // 3 + 1)]
        yield 1.0 + 1e-6 * rng.integers(0, 3, n)             # a range of a few steps
        yield np.round(rng.random(n) * 50) / 7               # values on bin edges
        yield rng.exponential(size=n) ** 4                   # a long tail


@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_equals_skimage_otsu_and_numpy_medians(dtype):
    rng = np.random.default_rng(7)
    checked = 0
    for values in _samples(rng, dtype):
        sample = values.astype(dtype)
        if sample.min() == sample.max():
            continue
        for view in (sample, sample[::3] if np.ptp(sample[::3]) > 0 else sample):
            assert otsu_split(view) == _skimage_and_numpy(view)
            checked += 1
    assert checked > 60


def test_class_split_blocks_match_the_general_computation():
    # a smoothed image with an uneven background: every block's own threshold is taken
    from scipy import ndimage as ndi

    rng = np.random.default_rng(3)
    image = ndi.gaussian_filter(rng.random((100, 100)), 1.5).astype(np.float32)
    image += np.linspace(0, 0.05, 100, dtype=np.float32)[:, None]
    split = class_split(image)
    assert split.whole == _skimage_and_numpy(image.ravel())[0]
    block = split.block
    own = _skimage_and_numpy(image[:block[0], :block[1]].ravel())
    assert own[2] - own[1] >= 0.25 * (split.high - split.low)  # the block has its own
    assert split.grid[0, 0] == own[0]


def test_threshold_from_a_histogram_equals_skimage():
    # counts up to ~2**18 (class weights whose product float32 rounds), empty ends (trimmed),
    # flat stretches (ties between variances: the first wins)
    from cavitas.segment._two_class import _otsu_threshold

    rng = np.random.default_rng(5)
    for trial in range(200):
        n = int(rng.integers(2, 1025))
        counts = rng.integers(0, (4, 300, 2**18)[trial % 3], n).astype(np.int64)
        if trial % 4 == 0:
            counts[: n // 3] = 0
            counts[-2:] = 0
        if trial % 5 == 0:
            counts[:] = 7
        if np.count_nonzero(counts) < 2:
            counts[0] = counts[-1] = 1
        centers = np.sort(rng.normal(size=n)) if trial % 2 else np.linspace(-1, 3, n)
        assert _otsu_threshold(counts, centers) == threshold_otsu(hist=(counts, centers))
    # mirror-image histograms: two thresholds of equal variance but for rounding, where
    # only the float32 product of the class weights picks scikit-image's (found by search:
    # several of these differ in float64)
    rng = np.random.default_rng(0)
    for trial in range(17000):
        n = int(rng.integers(3, 40))
        half = rng.integers(1, (300, 2**18, 2**20)[trial % 3], (n + 1) // 2)
        counts = np.r_[half, half[::-1][n % 2:]] if trial % 2 else rng.integers(1, 2**18, n)
        centers = np.linspace(-1, 1, n) if trial % 3 else np.arange(n, dtype=float)
        assert _otsu_threshold(counts, centers) == threshold_otsu(hist=(counts, centers))


@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_histogram_of_values_at_and_beside_the_bin_edges(dtype):
    # On values at, just below and just above every edge, and on data whose range is small
    # against their magnitude, the histogram pass counts what NumPy counts (np.histogram,
    # 1024 equal bins, of the float64 values: what scikit-image's threshold_otsu bins).
    from cavitas.segment._two_class import NBINS, _bin_pass

    rng = np.random.default_rng(9)
    for first, last in ((0.0, 1.0), (-3.7, 12.1), (1e6, 1e6 + 5.0), (1e4, 1e4 + 1e-6),
                        (1e9, 1e9 + 1e-2), (-2.5e-7, 1e-9)):
        edges64 = np.linspace(first, last, NBINS + 1)
        near = np.concatenate([edges64, np.nextafter(edges64, -np.inf),
                               np.nextafter(edges64, np.inf), rng.uniform(first, last, 5000)])
        sample = np.clip(near, first, last).astype(dtype)
        lo, hi = float(sample.min()), float(sample.max())
        if lo == hi:
            continue
        edges = np.linspace(lo, hi, NBINS + 1)
        bins = np.empty(sample.size, np.int16)
        counts, _ = _bin_pass(sample, edges, lo, hi - lo, bins)
        np.testing.assert_array_equal(counts, np.histogram(sample.astype(np.float64), NBINS)[0])
        np.testing.assert_array_equal(np.bincount(bins, minlength=NBINS), counts)
