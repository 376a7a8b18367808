"""The 2D sweeps (local pairing, then a union-find over the critical pixels) are exact.

References: the general union-find kernels of :mod:`cavitas.cubical._kernels` (every
voxel in sweep order; themselves checked against the oracle in
``test_persistence_oracle.py``), and the textbook boundary-matrix reduction on the full
cubical complex (Edelsbrunner, Letscher & Zomorodian 2002, doi:10.1007/s00454-002-2885-2;
Zomorodian & Carlsson 2005, doi:10.1007/s00454-004-1146-y; ``tests/oracle_reduction.py``).
The 2D sweeps must give the very same rows, voxel for voxel, and the same tree nodes.
Random arrays are test inputs only, drawn from a few integer values so that ties abound.
"""

from __future__ import annotations

from collections import Counter

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from cavitas.cubical._persistence import _cavity_rows, _Prepared
from cavitas.cubical._plane import plane_critical, plane_links
from cavitas.cubical._ring import ring_tables
from tests.oracle_reduction import oracle_pairs

WALLS = ("bright", "dark")


def _assert_same_as_general(image, walls, conn, mask=None):
    plane = _Prepared(image, walls, conn, mask)
    general = _Prepared(image, walls, conn, mask, plane=False)
    assert plane.plane and not general.plane
    np.testing.assert_array_equal(plane.h0(), general.h0())
    ours, ref = plane.tree(), general.tree()
    for field in ("core", "breach", "parent", "core_level", "breach_level"):
        np.testing.assert_array_equal(getattr(ours, field), getattr(ref, field), err_msg=field)


def _random_image(rng, shape, dtype, levels):
    image = rng.integers(0, levels, size=shape).astype(dtype)
    if np.dtype(dtype).kind == "f":  # -0.0 and +0.0 tie (IEEE 754 equality)
        zero = image == 0
        image[zero] = np.where(rng.random(zero.sum()) < 0.5, -0.0, 0.0)
    return image


@pytest.mark.parametrize("walls", WALLS)
@pytest.mark.parametrize("conn", [1, 2])
@pytest.mark.parametrize("dtype", [np.uint8, np.int16, np.float32, np.float64])
def test_same_rows_and_tree_as_the_general_kernels(rng, walls, conn, dtype):
    # Reference: the general kernels, on random images with many ties (a few levels), of
    # every size from a single row up, with and without a mask.
    for i in range(40):
        shape = (int(rng.integers(1, 40)), int(rng.integers(1, 40)))
        image = _random_image(rng, shape, dtype, levels=2 + i % 6)
        mask = None
        if i % 3 == 0:
            mask = rng.random(shape) < 0.85
            mask.flat[0] = True
        _assert_same_as_general(image, walls, conn, mask)


@pytest.mark.parametrize("walls", WALLS)
@pytest.mark.parametrize("conn", [1, 2])
def test_same_as_the_general_kernels_on_smooth_images(rng, walls, conn):
    # Reference: the general kernels, on a smoothed image (long pointer chains, large
    # basins) with a plateau and a mask with holes.
    from scipy import ndimage as ndi

    image = ndi.gaussian_filter(rng.standard_normal((150, 170)), 3.0)
    image = np.round(image * 200).astype(np.int16)
    image[40:60, 50:90] = 7  # a plateau
    mask = np.ones(image.shape, bool)
    mask[100:120, 20:40] = False
    mask[5, :] = False
    _assert_same_as_general(image, walls, conn)
    _assert_same_as_general(image, walls, conn, mask)


def test_boolean_images():
    # Reference: the general kernels; a bool image holds two levels only.
    image = np.zeros((9, 11), bool)
    image[2:7, 2:9] = True
    image[4, 5] = False
    for walls in WALLS:
        for conn in (1, 2):
            _assert_same_as_general(image, walls, conn)


@given(
    arrays(np.uint8, st.tuples(st.integers(1, 12), st.integers(1, 12)),
           elements=st.integers(0, 3)),
    st.sampled_from(WALLS),
    st.sampled_from([1, 2]),
)
def test_property_same_as_general_kernels(image, walls, conn):
    # Reference: the general kernels, on arbitrary small images (hypothesis).
    _assert_same_as_general(image, walls, conn)


@pytest.mark.parametrize("walls", WALLS)
@pytest.mark.parametrize("conn", [1, 2])
def test_matches_boundary_matrix_reduction(rng, walls, conn):
    # Oracle: textbook Z/2 column reduction (ELZ 2002; ZC 2005) on the full complex,
    # on rectangles with ties; pairs (birth, death) as multisets, essential classes counted.
    for _ in range(6):
        image = rng.integers(0, 4, size=(int(rng.integers(3, 8)), int(rng.integers(3, 8))))
        image = image.astype(np.uint8)
        finite, essential, _ = oracle_pairs(image, conn, walls=walls)
        prep = _Prepared(image, walls, conn, None)
        assert prep.plane
        h0 = prep.h0()
        ess = ~np.isfinite(h0["death"])
        assert Counter(zip(h0["birth"][~ess].tolist(), h0["death"][~ess].tolist(),
                           strict=True)) == finite[0]
        assert int(ess.sum()) == len(essential[0])
        tree = prep.tree()
        keep = (tree.breach >= 0) & (tree.breach_level != tree.core_level)
        assert Counter(zip(tree.breach_level[keep].tolist(), tree.core_level[keep].tolist(),
                           strict=True)) == finite[1]


def test_int64_index_path_agrees(rng):
    # Images of 2**31 pixels or more use int64 indices; run that compiled path on a small
    # image and compare (common practice: exercise both index widths).
    image = rng.integers(0, 5, size=(23, 31)).astype(np.uint16)
    count, reps = ring_tables(2)
    mask = np.zeros(1, np.uint8)
    results = []
    for dtype in (np.int32, np.int64):
        parent = np.empty(image.size + 1, dtype)
        args = (image.ravel(), mask, False, True, False, *image.shape)
        critical, codes, max_links, _ = plane_critical(*args, count, reps, parent, False)
        start = np.empty(len(critical) + 1, dtype)
        links = np.empty(max_links, dtype)
        nl = plane_links(*args, True, count, reps, parent, critical, codes, start, links)
        results.append((critical, start, links[:nl]))
    for a, b in zip(*results, strict=True):
        np.testing.assert_array_equal(a, b)
    assert results[1][0].dtype == np.int64


def test_ring_tables_count_pieces_by_hand():
    # Hand-checked ring states (the 8 pixels around a centre, clockwise from N).
    count, _ = ring_tables(1)
    assert count[0b0101_0101] == 4  # N, E, S, W alone: four face neighbours apart
    assert count[0b1111_1111] == 1
    assert count[0b1010_1010] == 0  # corners only: no face neighbour
    count, _ = ring_tables(2)
    assert count[0b1010_1010] == 4  # four corners, none touching
    assert count[0b0101_0101] == 1  # N, E, S, W touch diagonally


@pytest.mark.parametrize("walls", WALLS)
@pytest.mark.parametrize("conn", [1, 2])
def test_same_diagram_as_gudhi(rng, walls, conn):
    # Reference: gudhi's CubicalComplex (a general-purpose computational-topology library,
    # optional: the "bench" extra), voxels as vertices for connectivity 1 and as top cells
    # for 2, sublevel filtration (bright walls: of the negated image, values negated back).
    gudhi = pytest.importorskip("gudhi")
    from scipy import ndimage as ndi

    image = np.round(ndi.gaussian_filter(rng.standard_normal((60, 70)), 2.0) * 40)
    sign = 1.0 if walls == "dark" else -1.0
    cells = {"vertices" if conn == 1 else "top_dimensional_cells": sign * image}
    complex_ = gudhi.CubicalComplex(**cells)
    complex_.compute_persistence(min_persistence=0.0)
    dgm = _Prepared(image, walls, conn, None)
    for dim, rows in ((0, dgm.h0()), (1, _cavity_rows(dgm.tree()))):
        ours = _by_rows(np.stack([rows["birth"], rows["death"]], 1))
        theirs = _by_rows(sign * complex_.persistence_intervals_in_dimension(dim))
        assert len(ours) > 20
        np.testing.assert_array_equal(ours, theirs)


def _by_rows(pairs):
    """(birth, death) rows in lexicographic order (a multiset compared as an array)."""
    return pairs[np.lexsort((pairs[:, 1], pairs[:, 0]))]
