"""The engine against the textbook reduction on the full cubical complex (small arrays).

Source of every check here: the standard persistence algorithm (Edelsbrunner, Letscher &
Zomorodian 2002; Zomorodian & Carlsson 2005), implemented plainly in
``tests/oracle_reduction.py`` over all cells of the voxels-as-vertices and voxels-as-top-cells
complexes. Random arrays are test inputs only, drawn from a small integer range so that
ties abound.
"""

from __future__ import annotations

from collections import Counter

import numpy as np
import pytest
from scipy import ndimage as ndi

from cavitas.cubical import persistence
from tests.oracle_reduction import oracle_pairs

CASES = [
    (shape, conn, walls)
    for shape in ((5, 6), (4, 4, 5))
    for conn in (1, len(shape))
    for walls in ("bright", "dark")
]


def _ours(image, conn, walls, mask):
    dims = range(image.ndim)  # every dimension: in 3D, H1 by the reduction of ._tunnels
    dgm = persistence(image, connectivity=conn, walls=walls, mask=mask, dims=dims,
                      parallel=False)
    # The threaded run (one work array per sweep) must give the very same rows.
    threaded = persistence(image, connectivity=conn, walls=walls, mask=mask, dims=dims,
                           parallel=True)
    for dim in dgm.dims:
        np.testing.assert_array_equal(threaded.pairs(dim), dgm.pairs(dim))
    out = {}
    for dim in dgm.dims:
        rows = dgm.pairs(dim)
        ess = ~np.isfinite(rows["death"])
        finite = zip(rows["birth"][~ess].tolist(), rows["death"][~ess].tolist(), strict=True)
        out[dim] = (Counter(finite), int(ess.sum()))
    return out


def _filled_mask(rng, shape, conn, keep):
    """A random ROI whose complement reaches the border through the cavities' connectivity.

    Holes of the ROI are outside for the engine but would be bounded regions for the
    oracle's complex, so they are filled (scipy.ndimage.binary_fill_holes with the
    complement's structure: full for faces-only walls, faces for full walls).
    """
    ndim = len(shape)
    dual = ndim if conn == 1 else 1
    mask = rng.random(shape) < 0.8
    mask[keep] = True
    return ndi.binary_fill_holes(mask, structure=ndi.generate_binary_structure(ndim, dual))


@pytest.mark.parametrize("shape,conn,walls", CASES)
@pytest.mark.parametrize("masked", [False, True])
def test_matches_boundary_matrix_reduction(shape, conn, walls, masked):
    # Oracle: textbook Z/2 column reduction (ELZ 2002; ZC 2005) on the full complex.
    rng = np.random.default_rng([len(shape), conn, walls == "bright", masked])
    n_pairs = [0, 0]
    for i in range(8):
        image = rng.integers(0, 4, size=shape).astype(np.uint8)
        box = (slice(0, 0),) * len(shape)
        if i % 2:  # plant a wall around a dark voxel so that cavities are exercised too
            centre = tuple(int(rng.integers(1, s - 1)) for s in shape)
            box = tuple(slice(c - 1, c + 2) for c in centre)
            image[box] = rng.integers(2, 4, size=(3,) * len(shape))
            image[centre] = rng.integers(0, 2)
            if walls == "dark":
                image = 3 - image
        mask = _filled_mask(rng, shape, conn, box) if masked else None
        finite, essential, _ = oracle_pairs(image, conn, walls=walls, mask=mask)
        ours = _ours(image, conn, walls, mask)
        top = len(shape) - 1
        for dim in range(len(shape)):
            assert ours[dim][0] == finite[dim], (dim, image, mask)
            assert ours[dim][1] == len(essential[dim]), (dim, image, mask)
        assert essential[top] == []
        n_pairs[0] += sum(finite[0].values())
        n_pairs[1] += sum(finite[top].values())
    assert min(n_pairs) > 0  # both dimensions were exercised


@pytest.mark.parametrize("conn", [1, 3])
def test_oracle_h1_obeys_euler_poincare(conn):
    # Euler-Poincare (chi = b0 - b1 + b2 at every level) checks the oracle's own H1 in 3D,
    # the reference for the engine's H1; chi is the alternating cell count.
    rng = np.random.default_rng(7 + conn)
    n_h1 = 0
    for _ in range(4):
        image = rng.integers(0, 4, size=(3, 4, 4))
        finite, essential, cx = oracle_pairs(image, conn)
        n_h1 += sum(finite[1].values()) + len(essential[1])
        for level in (0.5, 1.5, 2.5, 3.5):
            chi = 0
            for dim in range(3):
                alive = sum(c for (b, d), c in finite[dim].items() if b >= level > d)
                alive += sum(b >= level for b in essential[dim])
                chi += (-1) ** dim * alive
            assert chi == cx.euler_characteristic(level)
    assert n_h1 > 0  # H1 was exercised, the check is not vacuous
