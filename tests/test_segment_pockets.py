"""Texture pockets: small shallow chambers go back to the walls where the noise is not white
(cavitas.segment._pockets); and the detection scale where the noise is not white
(cavitas.segment._detect.chosen_scale).

The figures that set the rule come from the public EM slices (``bench/real_scans.py``, module
notes); here, regression on a constructed scene (invented data): a grid of 16 cells with
bright walls, one of them holding a small walled pocket. A pocket whose middle is wall-grey
with one dark speck (its darkest point passes the class test, its inside does not lie below
its wall) goes back to the cell under correlated noise, and stays a region under white noise
(where the rule does not apply); a small chamber with a dark inside stays a region under both.
"""

import numpy as np
import pytest
from scipy import ndimage as ndi

import cavitas


def _grid_with_pocket(middle: float, white: bool) -> np.ndarray:
    image = np.zeros((170, 170))
    for k in range(5):  # walls 3 pixels thick every 35: 16 cells of 32 x 32
        image[10 + 35 * k:13 + 35 * k, 10:153] = 1.0
        image[10:153, 10 + 35 * k:13 + 35 * k] = 1.0
    yy, xx = np.mgrid[:170, :170]
    r = np.hypot(yy - 62, xx - 62)
    image[(r >= 4.5) & (r < 7)] = 1.0  # the pocket's wall
    image[r < 4.5] = middle
    image[61:63, 61:63] = 0.0  # one dark speck in the middle
    noise = np.random.default_rng(0).normal(0.0, 1.0, image.shape)
    if not white:  # Gaussian-filtered noise, rescaled to unit variance (1 / 0.28)
        noise = ndi.gaussian_filter(noise, 1.0) / 0.28
    return image + 0.04 * noise


@pytest.mark.parametrize(("middle", "white", "chambers"), [
    (0.7, False, 16),  # a shallow pocket under texture-like noise: part of its cell
    (0.7, True, 17),   # the same under white noise: the rule does not apply
    (0.0, False, 17),  # a small chamber with a dark inside: a region
])
def test_shallow_pocket_goes_back_to_its_cell(middle, white, chambers):
    seg = cavitas.segment(_grid_with_pocket(middle, white))
    assert (seg.params["noise_correlation"] == 0.0) == white
    assert int((seg.regions["kind"] == "chamber").sum()) == chambers
    host = seg.labels[55, 55]  # inside the cell that holds the pocket, outside the pocket
    assert host > 0
    if chambers == 16:  # the pocket and its wall are the host cell's now
        assert seg.labels[62, 62] == host and seg.labels[62, 67] == host
    else:
        assert seg.labels[62, 62] not in (0, host)


@pytest.mark.parametrize(("counts", "white", "index"), [
    ([8, 19, 20, 12], True, 2),    # white noise: the most cavities
    ([8, 19, 20, 12], False, 1),   # texture: 19 >= 0.9 * 20, the finer one
    ([8, 17, 20, 12], False, 2),   # 17 < 18: the largest count after all
    ([20, 20, 5], True, 0),        # ties go to the finer scale
    ([0, 0, 0], False, 0),         # nothing anywhere: the finest
])
def test_detection_scale_choice(counts, white, index):
    # The rule's definition (cavitas.segment._detect.chosen_scale), on constructed counts.
    from cavitas.segment._detect import TEXTURED_SCALE_SHARE, chosen_scale

    assert TEXTURED_SCALE_SHARE == 0.9  # the cases above are built for this share
    assert chosen_scale(counts, [0.0, 0.5, 1.0, 1.5][:len(counts)], white=white) == index


@pytest.mark.parametrize(("grain", "index"), [
    (0.0, 2),   # scales up to 1 voxel: [3, 5, 9] -> 9 is the largest, 5 < 8.1
    (0.7, 2),   # a grain below one voxel: the same
    (1.6, 3),   # up to 1.6 voxels: [3, 5, 9, 11] -> 11 (9 < 9.9)
    (3.0, 4),   # every scale: 14 is the largest, 11 < 12.6
])
def test_textured_scale_choice_stays_within_the_grain(grain, index):
    # The rule's definition (cavitas.segment._detect.chosen_scale), on constructed counts
    # that grow with the smoothing as organelles turn into blobs (EM crops, measured).
    from cavitas.segment._detect import chosen_scale

    counts, sigmas = [3, 5, 9, 11, 14], [0.0, 0.5, 1.0, 1.5, 3.0]
    assert chosen_scale(counts, sigmas, white=False, grain=grain) == index
    assert chosen_scale(counts, sigmas, white=True, grain=grain) == 4


@pytest.mark.parametrize("white", [False, True])
def test_the_run_reports_the_scale_its_rule_chose(white):
    # Read back from run.json's scales_tried: the chosen smoothing is the one the rule
    # picks from the counts the run reports.
    from cavitas.segment._detect import chosen_scale

    seg = cavitas.segment(_grid_with_pocket(0.0, white))
    tried = seg.params["scales_tried"]
    index = chosen_scale([t["count"] for t in tried], [t["sigma"] for t in tried],
                         white=white, grain=seg.params["noise_correlation"])
    assert seg.params["smooth_sigma"] == pytest.approx(tried[index]["sigma"])
