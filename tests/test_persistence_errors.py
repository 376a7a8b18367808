"""Bad input to the persistence engine gets a clear ParameterError (common practice)."""

from __future__ import annotations

import numpy as np
import pytest

from cavitas import InputFileError, ParameterError
from cavitas.cubical import cavity_sweep, persistence
from cavitas.cubical._neighbors import neighbor_offsets
from cavitas.cubical._sort import sort_voxels


@pytest.mark.parametrize("bad", [np.nan, np.inf, -np.inf])
@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_non_finite_values_are_rejected_unless_masked(bad, dtype):
    image = np.zeros((4, 5), dtype)
    image[2, 3] = bad
    # a NaN is a fault of the data, not of a parameter: exit code 3 on the command line
    with pytest.raises(InputFileError, match="NaN or infinite"):
        persistence(image)
    with pytest.raises(InputFileError, match="NaN or infinite"):
        cavity_sweep(image)
    mask = np.ones(image.shape, bool)
    mask[2, 3] = False
    assert persistence(image, mask=mask).pairs(0)["birth"].tolist() == [0.0]


@pytest.mark.parametrize("shape", [(5,), (2, 2, 2, 2), ()])
def test_wrong_number_of_dimensions(shape):
    with pytest.raises(ParameterError, match="2D or 3D"):
        persistence(np.zeros(shape))


@pytest.mark.parametrize("shape", [(0, 4), (3, 0, 2)])
def test_empty_image(shape):
    with pytest.raises(ParameterError, match="at least one voxel"):
        persistence(np.zeros(shape))


def test_unsupported_dtype():
    with pytest.raises(ParameterError, match="dtype"):
        persistence(np.zeros((3, 3), complex))
    with pytest.raises(ParameterError, match="dtype"):
        persistence(np.array([["a", "b"], ["c", "d"]]))


def test_bad_mask():
    image = np.zeros((4, 5))
    with pytest.raises(ParameterError, match="shape"):
        persistence(image, mask=np.ones((5, 4), bool))
    with pytest.raises(ParameterError, match="boolean"):
        persistence(image, mask=np.ones((4, 5), np.uint8))
    with pytest.raises(ParameterError, match="no voxel"):
        persistence(image, mask=np.zeros((4, 5), bool))


@pytest.mark.parametrize("walls", ["Bright", "light", None, 1])
def test_bad_walls(walls):
    with pytest.raises(ParameterError, match="walls"):
        persistence(np.zeros((3, 3)), walls=walls)


def test_bad_connectivity_names_the_cubical_reason():
    with pytest.raises(ParameterError, match=r"only 1 \(faces\) or 3 \(full\) correspond"):
        persistence(np.zeros((3, 3, 3)), connectivity=2)
    for bad in (0, 3, 1.0, "1", True):
        with pytest.raises(ParameterError, match="connectivity"):
            persistence(np.zeros((3, 3)), connectivity=bad)


def test_bad_dims():
    with pytest.raises(ParameterError, match=r"dims must hold .* \[0, 2\]"):
        persistence(np.zeros((3, 3, 3)), dims=(3,))
    with pytest.raises(ParameterError, match="dims"):
        persistence(np.zeros((3, 3)), dims=(2,))
    with pytest.raises(ParameterError, match="dims"):
        persistence(np.zeros((3, 3)), dims=())
    with pytest.raises(ParameterError, match="dims"):
        persistence(np.zeros((3, 3)), dims=("a",))


def test_dims_select_what_is_computed():
    dgm = persistence(np.zeros((3, 3, 3)), dims=(2,))
    assert dgm.dims == (2,)
    with pytest.raises(ParameterError, match="not computed"):
        dgm.pairs(0)
    assert persistence(np.zeros((3, 3, 3))).dims == (0, 2)
    # H1 of a volume only when asked for, alone or with the others
    assert persistence(np.zeros((3, 3, 3)), dims=(1,)).dims == (1,)
    assert persistence(np.zeros((3, 3, 3)), dims=(0, 1, 2)).dims == (0, 1, 2)


def test_helpers_document_their_layout():
    # The neighbour table is shared with the segmentation pass; the sort is its input.
    off, zyx = neighbor_offsets((3, 4, 5), 1)
    assert sorted(off.tolist()) == [-20, -5, -1, 1, 5, 20]
    assert np.all(np.abs(zyx).sum(axis=1) == 1)
    order, bad = sort_voxels(np.array([2.0, np.nan, 1.0]))
    assert bad == 1 and len(order) == 3
