"""The parallel nearest-feature transform equals scipy's, index for index (ties included).

Reference: ``scipy.ndimage.distance_transform_edt(..., return_indices=True)`` (a
general-purpose library; Maurer, Qi and Raghavan 2003, doi:10.1109/TPAMI.2003.1177156),
on random 2D and 3D masks from sparse to dense features, where equidistant features abound.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import ndimage as ndi

from cavitas.segment import _nearest
from cavitas.segment._nearest import nearest_feature


def _scipy(mask: np.ndarray) -> np.ndarray:
    return ndi.distance_transform_edt(mask, return_distances=False, return_indices=True)


@pytest.mark.parametrize("ndim", [2, 3])
@pytest.mark.parametrize("workers", [1, 3])
def test_equals_scipy_feature_transform(ndim, workers, monkeypatch):
    monkeypatch.setattr(_nearest, "usable_cores", lambda: workers)
    rng = np.random.default_rng(11 + ndim)
    for trial in range(60):
        shape = tuple(int(v) for v in rng.integers(1, 30 if ndim == 2 else 12, ndim))
        mask = rng.random(shape) < (0.5, 0.9, 0.98, 0.999)[trial % 4]
        if trial % 10 == 0:
            mask[...] = True  # no feature at all: scipy's placeholders
        assert np.array_equal(nearest_feature(mask), _scipy(mask)), (shape, trial)


def test_a_plane_of_equidistant_features():
    # two features on a line: the voxels half-way have two nearest ones
    mask = np.ones((9, 9, 9), bool)
    mask[4, 4, 0] = mask[4, 4, 8] = mask[0, 0, 4] = False
    got = nearest_feature(mask)
    assert got.dtype == np.int32 and got.shape == (3, 9, 9, 9)
    assert np.array_equal(got, _scipy(mask))
