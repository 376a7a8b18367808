"""The polarity check's detection on the negated smoothed image equals smoothing again.

Reference: NumPy's IEEE negation and ``scipy.ndimage.gaussian_filter`` (general-purpose
libraries): a Gaussian filter commutes exactly with negation in floating point (rounding is
symmetric), so taking the detection image negated must give the very same detection as
smoothing the flipped image afresh. Checked on random images full of ties, 2D and 3D,
both connectivities, with and without a region of interest.
"""

from __future__ import annotations

import numpy as np
import pytest

from cavitas.segment._detect import ScanImage, detect
from cavitas.segment._params import SegmentParams


def _detect(image, sign, smooth, connectivity, roi, smoothed_at=None):
    scan = ScanImage(image, sign, np.dtype(np.float32))
    return detect(scan, SegmentParams(smooth=smooth), noise=0.5, robust_range=4.0,
                  spacing=np.ones(image.ndim), connectivity=connectivity, roi=roi,
                  tell=lambda text: None, smoothed_at=smoothed_at)[0]


@pytest.mark.parametrize("shape", [(40, 37), (14, 13, 12)])
@pytest.mark.parametrize("smooth", [0.0, 1.0])
def test_negated_detection_image_gives_the_same_detection(shape, smooth):
    rng = np.random.default_rng(len(shape) + int(smooth))
    image = rng.integers(0, 5, shape).astype(np.uint16)  # few levels: many ties
    for connectivity in (1, len(shape)):
        for roi in (None, rng.random(shape) < 0.9):
            base = _detect(image, 1.0, smooth, connectivity, roi)
            fresh = _detect(image, -1.0, smooth, connectivity, roi)
            reused = _detect(image, -1.0, smooth, connectivity, roi,
                             smoothed_at=(base.sigma, np.negative(base.smoothed)))
            assert np.array_equal(reused.smoothed, fresh.smoothed)
            assert np.array_equal(reused.order, fresh.order)
            assert np.array_equal(reused.tree.parent, fresh.tree.parent)
            assert np.array_equal(reused.passing, fresh.passing)
            assert reused.threshold == fresh.threshold
