"""H1 of 3D volumes (tunnels, handles) against outside references.

Sources: the textbook boundary-matrix reduction (Edelsbrunner, Letscher & Zomorodian 2002;
``tests/oracle_reduction.py``); gudhi's cubical persistence (the general-purpose
computational-topology library, an optional extra: skipped without it); Euler-Poincare
(chi = b0 - b1 + b2) against ``skimage.measure.euler_number`` (Ohser, Nagel & Schladitz
2002); the Betti numbers of textbook shapes. Random and smoothed-noise arrays are test
inputs only (invented data).
"""

from __future__ import annotations

from collections import Counter

import numpy as np
import pytest
from scipy import ndimage as ndi
from skimage.measure import euler_number

from cavitas.cubical import persistence
from cavitas.cubical._sort import sort_voxels
from cavitas.cubical._tunnels import tunnel_pairs
from tests.oracle_reduction import oracle_pairs


def _finite_and_essential(rows):
    ess = ~np.isfinite(rows["death"])
    finite = Counter(zip(rows["birth"][~ess].tolist(), rows["death"][~ess].tolist(),
                         strict=True))
    return finite, int(ess.sum())


def _betti(dgm, level, bright=True):
    """(b0, b1, b2) of the wall set at ``level``: pairs born at or past it, not yet dead."""
    counts = []
    for dim in range(3):
        rows = dgm.pairs(dim)
        if bright:
            alive = (rows["birth"] >= level) & (rows["death"] < level)
        else:
            alive = (rows["birth"] <= level) & (rows["death"] > level)
        counts.append(int(alive.sum()))
    return tuple(counts)


@pytest.mark.parametrize("conn", [1, 3])
@pytest.mark.parametrize("walls", ["bright", "dark"])
def test_h1_matches_the_textbook_reduction_with_any_mask(rng, conn, walls):
    # Oracle: Z/2 column reduction of the full complex (ELZ 2002), H1 levels and essential
    # classes. The masks are random and keep their holes and handles: H1 of the masked
    # complex is defined whatever the mask (handles of the mask are essential loops).
    n_finite = n_essential = 0
    for i in range(6):
        shape = (3, 4, 5) if i % 2 else (4, 4, 4)
        image = rng.integers(0, 4, size=shape).astype(np.uint8)
        mask = None if i < 2 else rng.random(shape) < 0.75
        if mask is not None and not mask.any():
            mask[0, 0, 0] = True
        finite, essential, _ = oracle_pairs(image, conn, walls=walls, mask=mask)
        dgm = persistence(image, walls=walls, connectivity=conn, mask=mask, dims=(1,))
        ours, ours_essential = _finite_and_essential(dgm.pairs(1))
        assert ours == finite[1], (image, mask)
        assert ours_essential == len(essential[1]), (image, mask)
        n_finite += sum(finite[1].values())
        n_essential += ours_essential
    assert n_finite > 0 and n_essential > 0  # both kinds of class were exercised


def _gudhi_diagram(image, conn, walls):
    """Per dimension, the Counter of (birth, death) of gudhi's cubical persistence (in our
    levels: a bright-wall superlevel filtration is gudhi's sublevel one of ``-image``)."""
    gudhi = pytest.importorskip("gudhi")
    sign = -1.0 if walls == "bright" else 1.0
    field = sign * image.astype(np.float64)
    cells = (gudhi.CubicalComplex(vertices=field) if conn == 1
             else gudhi.CubicalComplex(top_dimensional_cells=field))
    cells.compute_persistence(homology_coeff_field=2, min_persistence=0)
    out = {}
    for dim in range(3):
        pairs = np.asarray(cells.persistence_intervals_in_dimension(dim)).reshape(-1, 2)
        pairs = pairs[pairs[:, 0] != pairs[:, 1]] * sign
        finite = np.isfinite(pairs[:, 1])
        out[dim] = (Counter(map(tuple, pairs[finite].tolist())), int((~finite).sum()))
    return out


@pytest.mark.parametrize("conn", [1, 3])
@pytest.mark.parametrize("walls", ["bright", "dark"])
def test_whole_diagram_matches_gudhi(rng, conn, walls):
    # Reference: gudhi.CubicalComplex (vertices = our connectivity 1, top-dimensional cells
    # = our connectivity 3), every dimension; quantised smoothed noise for many ties.
    field = ndi.gaussian_filter(rng.standard_normal((14, 15, 16)), 1.0)
    image = np.digitize(field, np.quantile(field, np.linspace(0, 1, 12)[1:-1]))
    expected = _gudhi_diagram(image, conn, walls)
    dgm = persistence(image.astype(np.int16), walls=walls, connectivity=conn, dims=(0, 1, 2))
    for dim in range(3):
        assert _finite_and_essential(dgm.pairs(dim)) == expected[dim], dim
    assert sum(expected[1][0].values()) > 20  # H1 was exercised


@pytest.mark.parametrize("conn", [1, 3])
@pytest.mark.parametrize("walls", ["bright", "dark"])
@pytest.mark.parametrize("masked", [False, True])
def test_euler_poincare_at_every_level(rng, conn, walls, masked):
    # Reference: skimage.measure.euler_number (Ohser, Nagel & Schladitz 2002; its
    # connectivity is the foreground's, our walls'): b0 - b1 + b2 = chi at every threshold.
    # The ROI's holes are filled (binary_fill_holes with the complement's structure):
    # cavities treat voxels outside the ROI as outside, the Euler number as holes.
    shape = (9, 10, 11)
    image = rng.integers(0, 6, size=shape).astype(np.uint8)
    mask = None
    if masked:
        mask = ndi.binary_fill_holes(rng.random(shape) < 0.8, structure=np.ones((3, 3, 3)) if
                                     conn == 1 else None)
    dgm = persistence(image, walls=walls, connectivity=conn, mask=mask, dims=(0, 1, 2))
    bright = walls == "bright"
    inside = np.ones(shape, bool) if mask is None else mask
    for level in range(6):
        wall_set = (image >= level if bright else image <= level) & inside
        b0, b1, b2 = _betti(dgm, level, bright)
        assert b0 - b1 + b2 == euler_number(wall_set, connectivity=conn), level
    assert len(dgm.pairs(1)) > 10


def _tube_distance(shape, centre, radius, normal_axis):
    """Distance of each voxel to the circle of ``radius`` around ``centre`` in the plane
    normal to ``normal_axis``."""
    grid = np.indices(shape).astype(float) - np.reshape(centre, (3, 1, 1, 1))
    across = np.hypot(*[grid[a] for a in range(3) if a != normal_axis])
    return np.hypot(across - radius, grid[normal_axis])


def _shapes():
    tube = _tube_distance((24, 32, 32), (12, 16, 16), 9.0, 0)
    solid = tube <= 3.5
    surface = (tube <= 4.5) & (tube >= 2.5)
    frame = np.zeros((20, 20, 20), bool)
    for axis in range(3):  # the 12 edges of a cube, as struts 2 voxels thick
        for a in (3, 15):
            for b in (3, 15):
                idx = [slice(a, a + 2), slice(b, b + 2)]
                idx.insert(axis, slice(3, 17))
                frame[tuple(idx)] = True
    linked = np.zeros((24, 40, 32), bool)
    # Hopf link: each circle passes through the other's centre
    linked |= _tube_distance(linked.shape, (12, 14, 16), 7.0, 0) <= 1.8
    linked |= _tube_distance(linked.shape, (12, 21, 16), 7.0, 2) <= 1.8
    return {"solid torus": (solid, (1, 1, 0)), "torus surface": (surface, (1, 2, 1)),
            "cube wire frame": (frame, (1, 5, 0)), "two linked tori": (linked, (2, 2, 0))}


@pytest.mark.parametrize("conn", [1, 3])
@pytest.mark.parametrize("name", ["solid torus", "torus surface", "cube wire frame",
                                  "two linked tori"])
def test_known_shapes(name, conn):
    # Textbook Betti numbers (b0, b1, b2): solid torus (1, 1, 0); torus surface, here a
    # shell of the solid torus (1, 2, 1); the 12 edges of a cube, a connected graph with
    # cycle rank E - V + 1 = 12 - 8 + 1 = 5 (Euler's formula for graphs); two linked solid
    # tori (2, 2, 0). Checked on the binary wall set: scipy.ndimage.label gives b0 first.
    shape_set, expected = _shapes()[name]
    structure = ndi.generate_binary_structure(3, conn)
    assert ndi.label(shape_set, structure=structure)[1] == expected[0]
    for walls, image in (("bright", shape_set.astype(np.uint8) * 200),
                         ("dark", (~shape_set).astype(np.uint8) * 200)):
        dgm = persistence(image, walls=walls, connectivity=conn, dims=(0, 1, 2))
        assert _betti(dgm, 100, walls == "bright") == expected
        assert euler_number(shape_set, connectivity=conn) == expected[0] - expected[1] + \
            expected[2]


@pytest.mark.parametrize("walls", ["bright", "dark"])
def test_birth_and_death_voxels_of_a_ring(rng, walls):
    # Hand-worked from the definition: a square ring of distinct bright values around one
    # voxel, in one plane of a dark volume. With faces only, the loop needs all 8 ring
    # voxels, so it closes when the darkest of them enters; fully connected, it needs (and
    # every loop around the centre holds) the 4 edge-middle ones, so it closes with the
    # darkest of those. It is filled when the centre voxel enters (the squares that span
    # the ring all touch it). Those are the birth and death voxels.
    image = np.zeros((3, 5, 5))
    ring = [(1, y, x) for y in range(1, 4) for x in range(1, 4) if (y, x) != (2, 2)]
    values = rng.permutation(np.arange(10, 18)).astype(float)
    for voxel, value in zip(ring, values, strict=True):
        image[voxel] = value
    image[1, 2, 2] = 5.0
    if walls == "dark":
        image = -image
    middles = [k for k, (_, y, x) in enumerate(ring) if (y == 2) != (x == 2)]
    for conn, needed in ((1, list(range(8))), (3, middles)):
        rows = persistence(image, walls=walls, connectivity=conn, dims=(1,)).pairs(1)
        assert len(rows) == 1
        last = ring[min(needed, key=lambda k: values[k])]
        assert rows["birth_voxel"][0] == np.ravel_multi_index(last, image.shape)
        assert rows["death_voxel"][0] == np.ravel_multi_index((1, 2, 2), image.shape)


def test_h0_and_cavities_unchanged_by_asking_for_h1(rng):
    # Common practice: adding a dimension must not change the others (same sweeps).
    image = ndi.gaussian_filter(rng.standard_normal((30, 31, 32)), 1.5)
    for conn in (1, 3):
        alone = persistence(image, connectivity=conn)
        whole = persistence(image, connectivity=conn, dims=(0, 1, 2))
        serial = persistence(image, connectivity=conn, dims=(0, 1, 2), parallel=False)
        for dim in (0, 2):
            np.testing.assert_array_equal(whole.pairs(dim), alone.pairs(dim))
        for dim in (0, 1, 2):
            np.testing.assert_array_equal(serial.pairs(dim), whole.pairs(dim))
        assert len(whole.pairs(1)) > 10


def test_int64_index_path_agrees(rng):
    # Volumes of 2**31 voxels or more sort into int64 indices; run that compiled path on a
    # small volume and compare (common practice: exercise both index widths).
    image = rng.integers(0, 5, size=(6, 7, 8)).astype(np.uint8)
    flat = image.reshape(-1)
    order = sort_voxels(flat, None, descending=False)[0]
    for conn in (1, 3):
        narrow = tunnel_pairs(flat, order, image.shape, conn)
        wide = tunnel_pairs(flat, order.astype(np.int64), image.shape, conn)
        for field in ("birth_voxel", "death_voxel", "essential"):
            np.testing.assert_array_equal(getattr(wide, field), getattr(narrow, field))
        assert len(narrow.birth_voxel) > 0
