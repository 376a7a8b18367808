"""Work the segmentation skips gives the same results as doing it.

* The polarity check's detection on the negated smoothed image equals smoothing again.
  Reference: NumPy's IEEE negation and ``scipy.ndimage.gaussian_filter`` (general-purpose
libraries): a Gaussian filter commutes exactly with negation in floating point (rounding is
symmetric), so taking the detection image negated must give the very same detection as
smoothing the flipped image afresh. Checked on random images full of ties, 2D and 3D,
both connectivities, with and without a region of interest.
* The chambers of a scale delineated without the enclosures' label map (the other scales
  asked for regions) equal those delineated with it: the same label map, levels, nesting
  and border-cut pieces (a frame around a plateau holding two pockets: an enclosure, by
  construction; random integer noise for ties; both connectivities).
* The polarity check run beside the regions (small images, two cores) gives the same hint,
  labels and table as run before them.
"""

from __future__ import annotations

import numpy as np
import pytest

from cavitas.segment._delineate import Geometry, regions_at
from cavitas.segment._detect import ScanImage, detect
from cavitas.segment._noise import NoiseLevel
from cavitas.segment._params import SegmentParams


def _detect(image, sign, smooth, connectivity, roi, smoothed_at=None):
    scan = ScanImage(image, sign, np.dtype(np.float32))
    return detect(scan, SegmentParams(smooth=smooth), noise=NoiseLevel(0.5, 0.5, image.ndim),
                  robust_range=4.0,
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


def _framed_pair(rng: np.random.Generator, size: int = 48) -> np.ndarray:
    # a frame (40) around a plateau (15) holding two dark pockets (0), all with noise of
    # three levels (ties): the plateau is an enclosure around two chambers, as the brain
    # inside the skull of the Shepp-Logan phantom
    image = rng.integers(0, 3, (size, size)).astype(np.uint16)
    image[5:size - 5, 5:size - 5] += 15
    image[4:size - 4, (4, size - 5)] = image[(4, size - 5), 4:size - 4] = 40
    third = size // 3
    image[third - 4:third + 4, third - 4:third + 4] -= 15
    image[third - 4:third + 4, 2 * third - 4:2 * third + 4] -= 15
    return image


@pytest.mark.parametrize("connectivity", [1, 2])
def test_chambers_without_the_enclosure_map_are_the_same(connectivity):
    rng = np.random.default_rng(connectivity)
    for _ in range(3):
        image = _framed_pair(rng)
        params = SegmentParams(smooth=0.0, min_persistence=10.0)
        det = _detect(image, 1.0, 0.0, connectivity, None)
        scan = ScanImage(image, 1.0, np.dtype(np.float32))
        geometry = Geometry(scan, None, connectivity, 1.0, np.ones(2))
        full = regions_at(det, params, geometry, lambda text: None)
        lean = regions_at(det, params, geometry, lambda text: None, enclosures=False)
        assert full.hier.n_enclosures >= 1 and full.regions.enclosures is not None
        assert lean.regions.enclosures is None
        assert full.hier.n_chambers == lean.hier.n_chambers >= 2
        for name in ("labels", "open_to_border", "level", "outside_basin"):
            assert np.array_equal(getattr(full.regions, name), getattr(lean.regions, name))
        assert full.regions.nested == lean.regions.nested
        assert full.regions.n_cut == lean.regions.n_cut


@pytest.mark.parametrize("walls", ["bright", "dark"])
def test_polarity_check_beside_the_regions_changes_nothing(walls, monkeypatch):
    # an invented sheet of bright membranes (cavitas.scenes): with dark walls the hint says
    # so; both ways the same labels, table and hint as when the check runs first
    from cavitas.scenes import cell_sheet
    from cavitas.segment import _segment, segment

    image = cell_sheet((160, 160), cells=40, seed=3).image.astype(np.float32)
    monkeypatch.setattr(_segment, "usable_cores", lambda: 2)
    beside = segment(image, walls=walls)
    monkeypatch.setattr(_segment, "OVERLAP_VOXELS", 0)
    before = segment(image, walls=walls)
    assert (beside.params["polarity_hint"] is None) == (walls == "bright")
    assert beside.params["polarity_hint"] == before.params["polarity_hint"]
    assert np.array_equal(beside.labels, before.labels)
    for name in before.regions.names:
        assert np.array_equal(beside.regions[name], before.regions[name], equal_nan=
                              before.regions[name].dtype.kind == "f")
