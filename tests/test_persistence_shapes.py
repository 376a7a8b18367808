"""Known shapes, symmetries and input handling of :func:`persistence` / :func:`cavity_sweep`.

The shapes (shells, annulus) are built here; their expected diagrams are the known Betti
numbers of a sphere shell (b0 = 1, b2 = 1) and of an annulus (b0 = 1, b1 = 1), with the
values set by construction (common practice: phantoms with known topology).
"""

from __future__ import annotations

from collections import Counter

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays
from scipy import ndimage as ndi

from cavitas.cubical import OUTSIDE, cavity_sweep, persistence
from cavitas.io._volume import Volume
from tests.oracle_reduction import oracle_pairs


def _radius(shape):
    grids = np.indices(shape, dtype=float)
    centre = [(s - 1) / 2 for s in shape]
    return np.sqrt(sum((g - c) ** 2 for g, c in zip(grids, centre, strict=True)))


def _pair_counts(births, deaths):
    return Counter(zip(np.asarray(births).tolist(), np.asarray(deaths).tolist(), strict=True))


def _multiset(dgm, dim):
    rows = dgm.pairs(dim)
    return _pair_counts(rows["birth"], rows["death"])


@pytest.mark.parametrize("conn", [1, 3])
def test_spherical_shell_has_one_cavity(conn):
    # Known topology: a sphere shell has b0 = 1, b2 = 1 (common practice phantom).
    r = _radius((24, 24, 24))
    image = np.full(r.shape, 10, np.uint8)
    image[r < 10] = 200
    image[r < 7] = 50
    dgm = persistence(image, connectivity=conn)
    assert dgm.pairs(2)[["birth", "death"]].tolist() == [(200.0, 50.0)]
    assert dgm.pairs(0)[["birth", "death"]].tolist() == [(200.0, -np.inf)]
    cavity = dgm.pairs(2)[0]
    assert r.flat[cavity["death_voxel"]] < 7 <= r.flat[cavity["birth_voxel"]] < 10


@pytest.mark.parametrize("conn", [1, 3])
def test_nested_shells_give_a_nested_tree(conn):
    # Known topology: two nested shells enclose two cavities. The gap between them is
    # darker than the inner core, so by the elder rule the gap carries the outer identity
    # and the inner core's node is its child (common practice phantom).
    r = _radius((30, 30, 30))
    image = np.full(r.shape, 10, np.uint8)
    image[r < 13] = 200  # outer shell
    image[r < 11] = 30  # gap
    image[r < 8] = 150  # inner shell
    image[r < 5] = 60  # inner core
    dgm = persistence(image, connectivity=conn)
    assert _multiset(dgm, 2) == Counter({(200.0, 30.0): 1, (150.0, 60.0): 1})
    _, tree = cavity_sweep(image, connectivity=conn)
    keep = np.flatnonzero(tree.persistence > 0)
    outer = keep[tree.core_level[keep] == 30][0]
    inner = keep[tree.core_level[keep] == 60][0]
    assert tree.parent[inner] == outer
    assert tree.parent[outer] == OUTSIDE
    assert tree.breach_level[inner] == 150 and tree.breach_level[outer] == 200


@pytest.mark.parametrize("conn", [1, 2])
def test_annulus_and_its_dark_mirror(conn):
    # Known topology: an annulus has b0 = 1, b1 = 1. Inverting the image and the polarity
    # mirrors every value (v -> 255 - v).
    r = _radius((21, 23))
    image = np.full(r.shape, 0, np.uint8)
    image[r < 8] = 100
    image[r < 5] = 20
    dgm = persistence(image, connectivity=conn)
    assert dgm.pairs(1)[["birth", "death"]].tolist() == [(100.0, 20.0)]
    dark = persistence(255 - image, connectivity=conn, walls="dark")
    assert dark.pairs(1)[["birth", "death"]].tolist() == [(155.0, 235.0)]
    assert dark.pairs(0)[["birth", "death"]].tolist() == [(155.0, np.inf)]


def _smoothed(rng, shape, dtype=np.int16):
    """Invented test input: smoothed noise rounded to integers (ties on purpose)."""
    field = ndi.gaussian_filter(rng.standard_normal(shape), 1.0)
    return np.round(field / field.std() * 6).astype(dtype)


@pytest.mark.parametrize("shape", [(24, 25), (10, 11, 12)])
@pytest.mark.parametrize("conn_full", [False, True])
def test_dark_walls_equal_negated_image(rng, shape, conn_full):
    # Symmetry of the definitions: the sublevel filtration of f is the superlevel one of -f;
    # the tie order (value, index) is the same, so even the voxels agree.
    conn = len(shape) if conn_full else 1
    image = _smoothed(rng, shape)
    dark = persistence(image, walls="dark", connectivity=conn)
    neg = persistence(-image, connectivity=conn)
    for dim in dark.dims:
        a, b = dark.pairs(dim), neg.pairs(dim)
        np.testing.assert_array_equal(a["birth"], -b["birth"])
        np.testing.assert_array_equal(a["death"], -b["death"])
        np.testing.assert_array_equal(a["birth_voxel"], b["birth_voxel"])
        np.testing.assert_array_equal(a["death_voxel"], b["death_voxel"])


@pytest.mark.parametrize("shape", [(24, 25), (10, 11, 12)])
@pytest.mark.parametrize("walls", ["bright", "dark"])
def test_flips_and_transposes_keep_the_diagram(rng, shape, walls):
    # Symmetry: the cubical complex is invariant under axis permutations and flips.
    image = _smoothed(rng, shape)
    mask = np.ones(shape, bool)
    mask[(0,) * len(shape)] = False
    ndim = len(shape)
    for conn in (1, ndim):
        ref = persistence(image, walls=walls, connectivity=conn, mask=mask)
        for view in (lambda a: a.T, lambda a: np.flip(a, 0), lambda a: np.flip(a, -1),
                     lambda a: np.moveaxis(a, 0, -1)):
            other = persistence(view(image), walls=walls, connectivity=conn, mask=view(mask))
            for dim in (0, ndim - 1):
                assert _multiset(other, dim) == _multiset(ref, dim)


@pytest.mark.parametrize("ndim", [2, 3])
@pytest.mark.parametrize(
    "dtype", [np.uint8, np.uint16, np.int16, np.int32, np.float32, np.float64]
)
def test_dtypes_give_identical_diagrams(rng, ndim, dtype):
    # Dtype policy: the same values in any supported dtype give the same rows.
    shape = (20, 21) if ndim == 2 else (9, 10, 11)
    image = rng.integers(0, 30, size=shape)
    ref = persistence(image.astype(np.int64))
    dgm = persistence(image.astype(dtype))
    for dim in ref.dims:
        np.testing.assert_array_equal(dgm.pairs(dim), ref.pairs(dim))


def test_byte_order_and_float16_are_converted(rng):
    # Dtype policy: big-endian and float16 data are read through a native copy.
    image = rng.integers(0, 30, size=(9, 10)).astype(np.uint16)
    ref = persistence(image)
    for other in (image.astype(">u2"), image.astype(np.float16)):
        dgm = persistence(other)
        for dim in ref.dims:
            np.testing.assert_array_equal(dgm.pairs(dim), ref.pairs(dim))


def test_memmap_and_volume_inputs(tmp_path, rng):
    # A memory map is read in place and a Volume is unwrapped; results equal the array's.
    image = _smoothed(rng, (8, 9, 10), np.uint16)
    mm = np.lib.format.open_memmap(tmp_path / "v.npy", mode="w+", dtype=image.dtype,
                                   shape=image.shape)
    mm[:] = image
    mm.flush()
    ref = persistence(image)
    for data in (np.load(tmp_path / "v.npy", mmap_mode="r"), Volume(image)):
        dgm = persistence(data)
        for dim in ref.dims:
            np.testing.assert_array_equal(dgm.pairs(dim), ref.pairs(dim))
    del mm


@pytest.mark.parametrize("ndim", [2, 3])
def test_constant_image_has_only_the_essential_class(ndim):
    # Topology of a box: one component, no cavity.
    dgm = persistence(np.full((5,) * ndim, 7.0))
    assert dgm.pairs(0)[["birth", "death"]].tolist() == [(7.0, -np.inf)]
    assert len(dgm.pairs(ndim - 1)) == 0


@pytest.mark.parametrize("walls", ["bright", "dark"])
@pytest.mark.parametrize("masked", [False, True])
def test_cavity_sweep_order_and_tree_invariants(rng, walls, masked):
    # Contract of cavity_sweep: order sorted by (value, index) (value decreasing for dark
    # walls), ROI voxels only; parent[i] < i; the diagram is the nodes of nonzero persistence.
    image = _smoothed(rng, (12, 13, 14))
    mask = rng.random(image.shape) < 0.9 if masked else None
    order, tree = cavity_sweep(image, walls=walls, mask=mask)
    inside = np.flatnonzero(mask) if masked else np.arange(image.size)
    key = image.ravel()[inside] if walls == "bright" else -image.ravel()[inside]
    np.testing.assert_array_equal(order, inside[np.argsort(key, kind="stable")])
    assert order.dtype == np.int32
    assert tree.parent[0] == -1 and tree.core[0] == -1 and tree.breach[0] == -1
    assert np.all(tree.parent[1:] < np.arange(1, tree.n_nodes))
    assert np.all(tree.parent[1:] >= 0)
    levels = tree.core_level[1:]
    assert np.all(np.diff(levels) >= 0) if walls == "bright" else np.all(np.diff(levels) <= 0)
    dgm = persistence(image, walls=walls, mask=mask)
    nodes = tree.persistence > 0
    nodes[OUTSIDE] = False
    assert _pair_counts(tree.breach_level[nodes], tree.core_level[nodes]) == _multiset(dgm, 2)


def test_rows_are_sorted_by_persistence_then_birth_voxel(rng):
    # Contract: rows by decreasing persistence, ties by birth voxel.
    dgm = persistence(_smoothed(rng, (30, 31)))
    for dim in dgm.dims:
        rows = dgm.pairs(dim)
        pers = dgm.persistence(dim)
        assert np.all(pers > 0)
        keys = list(zip(-pers, rows["birth_voxel"], strict=True))
        assert keys == sorted(keys)


@given(
    arrays(np.uint8, st.tuples(st.integers(1, 5), st.integers(1, 5)),
           elements=st.integers(0, 3)),
    st.sampled_from([1, 2]),
    st.sampled_from(["bright", "dark"]),
)
def test_property_matches_oracle_on_tiny_images(image, conn, walls):
    # Oracle: textbook reduction (Edelsbrunner et al. 2002) on arbitrary tiny images,
    # degenerate shapes (one row, one voxel) included.
    finite, essential, _ = oracle_pairs(image, conn, walls=walls)
    dgm = persistence(image, connectivity=conn, walls=walls)
    for dim in (0, 1):
        rows = dgm.pairs(dim)
        ess = ~np.isfinite(rows["death"])
        assert int(ess.sum()) == len(essential[dim])
        assert _pair_counts(rows["birth"][~ess], rows["death"][~ess]) == finite[dim]


def test_int64_index_path_agrees(rng):
    # Images of 2**31 voxels or more use int64 indices; run that compiled path on a small
    # image and compare (common practice: exercise both index widths).
    from cavitas.cubical._kernels import cavity_sweep_kernel, h0_sweep, neighbor_chain
    from cavitas.cubical._persistence import _Prepared

    image = _smoothed(rng, (9, 10, 11))
    prep = _Prepared(image, "bright", 1, None)
    order64 = prep.order.astype(np.int64)
    parent64 = np.empty(image.size + 1, np.int64)
    grid = (9, 10, 11, 1, False)  # the grid, no prefetching
    ours = h0_sweep(prep.flat, order64, parent64, *neighbor_chain(image.shape, 1), *grid)
    ref = h0_sweep(prep.flat, prep.order, prep.new_parent(), *neighbor_chain(image.shape, 1),
                   *grid)
    for a, b in zip(ours, ref, strict=True):
        np.testing.assert_array_equal(a, b)
    args = (np.zeros(1, np.uint8), False, *neighbor_chain(image.shape, 3), *grid)
    ours = cavity_sweep_kernel(order64, parent64, *args)
    ref = cavity_sweep_kernel(prep.order, prep.new_parent(), *args)
    for a, b in zip(ours, ref, strict=True):
        np.testing.assert_array_equal(a, b)


def test_parallel_default_and_serial_sweeps_agree(rng):
    # Above 65,536 voxels the sweeps run in two threads by default; the rows must be the
    # same as one after the other (common practice: a parallel path equals the serial one).
    image = _smoothed(rng, (40, 42, 44))
    serial = persistence(image, parallel=False)
    for dgm in (persistence(image), persistence(image, parallel=True)):
        for dim in (0, 2):
            np.testing.assert_array_equal(dgm.pairs(dim), serial.pairs(dim))
    assert len(serial.pairs(0)) > 10 and len(serial.pairs(2)) > 10
