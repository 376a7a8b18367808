"""64-bit integers: levels are float64, exact up to 2**53 (IEEE 754 double precision has a
53-bit significand, a handbook value); beyond it the engine refuses in one sentence instead
of merging neighbouring values and losing cavities."""

import numpy as np
import pytest

from cavitas._errors import InputFileError
from cavitas.cubical import persistence
from cavitas.io import Volume
from cavitas.segment import segment


def _ring(offset: int, dtype: str) -> np.ndarray:
    """A bright square ring (wall 200 above ``offset``) around a dark inside (10 above it)."""
    img = np.full((12, 12), offset, dtype)
    img[2:10, 2:10] = offset + 200
    img[4:8, 4:8] = offset + 10
    return img


@pytest.mark.parametrize("dtype", ["int64", "uint64"])
def test_levels_up_to_two_to_the_53_are_exact(dtype):
    """The cavity of a ring shifted by 2**53 - 300 keeps its persistence, 190, exactly."""
    offset = 2**53 - 300
    shifted = persistence(_ring(offset, dtype))
    plain = persistence(_ring(0, dtype))
    dim = plain.cavity_dim
    assert np.array_equal(shifted.persistence(dim), plain.persistence(dim))
    assert plain.persistence(dim).max() == 190  # wall 200 - inside 10


@pytest.mark.parametrize("offset", [2**53 + 1, 2**62, -(2**62)])
def test_levels_beyond_two_to_the_53_are_refused(offset):
    image = _ring(offset, "int64")
    with pytest.raises(InputFileError, match=r"'scan\.npy' holds integers up to \d+ in "
                                             r"magnitude, beyond 2\*\*53"):
        persistence(Volume(image, source="scan.npy"))
    with pytest.raises(InputFileError, match=r"'scan\.npy' holds integers .* beyond 2\*\*53"):
        segment(Volume(image, source="scan.npy"))
