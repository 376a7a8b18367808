"""Chunked persistence (cubical/_chunked.py) equals the whole-volume computation exactly.

Checks and their sources:

* The textbook Z/2 boundary-matrix reduction on the full complex (Edelsbrunner, Letscher &
  Zomorodian 2002; Zomorodian & Carlsson 2005; ``tests/oracle_reduction.py``) on tiny
  volumes cut into chunks of one voxel and of random sizes: same pairs (levels).
* The number of essential H0 classes is the number of connected components of the masked
  voxels (every voxel joins the wall set at the lowest level), counted by
  ``scipy.ndimage.label`` with the same connectivity.
* Identity with the in-memory engine, row for row (levels and voxels, in the same order), on
  many random volumes and chunkings; that a distributed path must equal its one-process path
  exactly is common practice (DEVELOPERS.md: a parallel path equals its serial one). The
  in-memory engine is itself checked against the oracle in ``test_persistence_oracle.py``.
* The same on a loopback Dask LocalCluster, with chunks of one voxel's thickness and chunks
  cutting through every cavity, from a Dask array, a Zarr array and an HDF5 dataset read
  lazily (zarr's and h5py's own readers).
"""

from __future__ import annotations

from collections import Counter

import numpy as np
import pytest
from scipy import ndimage as ndi

from cavitas import InputFileError, ParameterError
from cavitas.cubical import persistence
from cavitas.cubical._chunked import persistence_in_chunks
from tests.chunked_volumes import cell_lattice, lattice_case, random_cases, random_chunks
from tests.oracle_reduction import oracle_pairs


def _assert_same(ref, got):
    assert got.dims == ref.dims and got.shape == ref.shape and got.masked == ref.masked
    for dim in ref.dims:
        np.testing.assert_array_equal(got.pairs(dim), ref.pairs(dim))


def test_matches_boundary_matrix_reduction_in_one_voxel_chunks():
    # Oracle: textbook Z/2 column reduction (ELZ 2002; ZC 2005) on the full complex.
    rng = np.random.default_rng(18)
    for shape in ((5, 6), (3, 4, 4)):
        ndim = len(shape)
        for conn in (1, ndim):
            for walls in ("bright", "dark"):
                image = rng.integers(0, 4, size=shape).astype(np.uint8)
                finite, essential, _ = oracle_pairs(image, conn, walls=walls)
                for chunks in (tuple((1,) * s for s in shape),
                               tuple(random_chunks(rng, s, 3) for s in shape)):
                    dgm = persistence_in_chunks(image, chunks, walls=walls, connectivity=conn)
                    for dim in (0, ndim - 1):
                        rows = dgm.pairs(dim)
                        ess = ~np.isfinite(rows["death"])
                        assert Counter(zip(rows["birth"][~ess].tolist(),
                                           rows["death"][~ess].tolist(),
                                           strict=True)) == finite[dim]
                        assert int(ess.sum()) == len(essential[dim])


@pytest.mark.parametrize("ndim", [2, 3])
def test_equals_in_memory_on_random_volumes_and_chunks(ndim):
    # Identity with the whole-volume engine (common practice), ties and masks included.
    for case in random_cases(np.random.default_rng(ndim), ndim, 40):
        image, conn, walls, mask = case.image, case.connectivity, case.walls, case.mask
        ref = persistence(image, walls=walls, connectivity=conn, mask=mask)
        got = persistence_in_chunks(image, case.chunks, walls=walls, connectivity=conn,
                                    mask=mask)
        _assert_same(ref, got)
        if mask is not None:  # essential H0 = components of the ROI (scipy.ndimage.label)
            count = ndi.label(mask, ndi.generate_binary_structure(ndim, conn))[1]
            assert int(got.essential(0).sum()) == count


def test_only_one_dimension():
    rng = np.random.default_rng(5)
    image = cell_lattice(rng, (9, 9, 9))
    chunks = ((2, 7), (5, 4), (3, 3, 3))
    for dims in ([0], [2]):
        _assert_same(persistence(image, dims=dims), persistence_in_chunks(image, chunks,
                                                                          dims=dims))


# -- on a Dask cluster (tests/conftest.py: client) -------------------------------------------

#: Both connectivities and polarities (every combination runs in the tests without Dask).
CLUSTER_CASES = [(1, "bright"), (3, "dark")]


@pytest.mark.cluster
@pytest.mark.parametrize("conn,walls", CLUSTER_CASES)
def test_dask_cluster_equals_in_memory(client, conn, walls):
    import dask.array as da

    case = lattice_case(conn, walls)  # slices 1 voxel thick through cells, a ragged ROI
    image, mask = case.image, case.mask
    lazy = da.from_array(image, chunks=case.chunks)
    ref = persistence(image, walls=walls, connectivity=conn, mask=mask)
    got = persistence(lazy, walls=walls, connectivity=conn, mask=da.from_array(mask, chunks=5))
    _assert_same(ref, got)
    assert len(ref.pairs(2)) >= 8  # the cells' cavities were exercised


@pytest.mark.cluster
def test_zarr_and_hdf5_are_read_chunk_by_chunk(client, tmp_path):
    zarr = pytest.importorskip("zarr", reason="zarr (extra 'zarr') is not installed")
    h5py = pytest.importorskip("h5py", reason="h5py (extra 'hdf5') is not installed")
    rng = np.random.default_rng(7)
    image = cell_lattice(rng, (9, 7, 9))
    ref = persistence(image, connectivity=3)
    stored = zarr.open_array(str(tmp_path / "v.zarr"), mode="w", shape=image.shape,
                             chunks=(4, 3, 9), dtype=image.dtype)
    stored[...] = image
    _assert_same(ref, persistence(zarr.open_array(str(tmp_path / "v.zarr"), mode="r"),
                                  connectivity=3))
    with h5py.File(tmp_path / "v.h5", "w") as handle:
        handle.create_dataset("scan", data=image, chunks=(5, 7, 4))
    with h5py.File(tmp_path / "v.h5", "r") as handle:
        _assert_same(ref, persistence(handle["scan"], connectivity=3))


@pytest.mark.cluster
def test_dask_cluster_2d_image(client):  # with an empty chunk, as slicing leaves them
    import dask.array as da

    rng = np.random.default_rng(9)
    image = cell_lattice(rng, (11, 13))
    for conn, walls in ((1, "dark"), (2, "bright")):
        _assert_same(persistence(image, connectivity=conn, walls=walls),
                     persistence(da.from_array(image, chunks=((3, 0, 8), (1, 5, 7))),
                                 connectivity=conn, walls=walls))


@pytest.mark.cluster
def test_errors_name_the_problem_as_in_memory(client):
    import dask.array as da

    image = np.ones((4, 5, 6), np.float32)
    image[2, 2, 2] = image[0, 4, 5] = np.nan  # in two chunks: the total is reported
    lazy = da.from_array(image, chunks=2)
    with pytest.raises(InputFileError) as in_memory:
        persistence(image)
    with pytest.raises(InputFileError) as chunked:
        persistence(lazy)
    assert str(chunked.value) == str(in_memory.value)
    with pytest.raises(ParameterError, match="mask must have the image's shape"):
        persistence(lazy, mask=np.ones((4, 5, 5), bool))
    with pytest.raises(ParameterError, match="mask selects no voxel"):
        persistence(lazy, mask=np.zeros(image.shape, bool))
    with pytest.raises(ParameterError, match="not available yet"):
        persistence(lazy, dims=[1])
