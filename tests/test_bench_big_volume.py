"""The invented volume of bench/chunked_big.py, made slab by slab, against scipy's filter of
the whole noise, and its scaling against the standard deviation of filtered white noise."""

from __future__ import annotations

import numpy as np
from scipy import ndimage as ndi

from bench.chunked_big import noise_std, smoothed_noise_slab


def test_slabs_equal_the_whole_volume_filter():
    # reference: scipy.ndimage.gaussian_filter of the whole noise volume, scaled as the
    # bench scales it; slabs thinner than the kernel's radius (8 voxels) included
    side = 20
    noise = np.stack([np.random.default_rng([1, z]).standard_normal((side, side),
                                                                     dtype=np.float32)
                      for z in range(side)])
    field = ndi.gaussian_filter(noise, 2.0, output=np.float32)
    field *= 5000.0 / noise_std(2.0)
    field += 32768.0
    whole = np.clip(np.rint(field), 0, 65535).astype(np.uint16)
    for thickness in (3, 7, 20):
        slabs = [smoothed_noise_slab(side, z, min(side, z + thickness))
                 for z in range(0, side, thickness)]
        assert np.array_equal(np.concatenate(slabs), whole)


def test_noise_std_matches_the_continuous_gaussian():
    # white noise of unit variance filtered by a d-dimensional Gaussian of width sigma has
    # variance 1 / (2 sqrt(pi) sigma)^d (the filter's squared L2 norm; standard result for
    # linear filters of white noise); the sampled kernel agrees closely at sigma >= 1
    for sigma in (1.0, 2.0, 3.0):
        assert abs(noise_std(sigma) / (2 * np.sqrt(np.pi) * sigma) ** -1.5 - 1) < 2e-3
