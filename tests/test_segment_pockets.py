"""Texture pockets: small shallow chambers go back to the walls where the noise is not white
(cavitas.segment._pockets).

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
