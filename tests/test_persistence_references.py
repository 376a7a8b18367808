"""The engine against general-purpose reference libraries (scipy.ndimage, scikit-image).

Random and smoothed-noise arrays here are test inputs only (invented data); every expected
value comes from the named reference library.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import ndimage as ndi
from skimage.measure import euler_number
from skimage.morphology import h_maxima, local_maxima

from cavitas.cubical import persistence
from tests.oracle_reduction import oracle_pairs


def _alive(rows, level, bright=True):
    """Number of classes present at ``level`` (born at or above, dying below it)."""
    if bright:
        return int(np.sum((rows["birth"] >= level) & (rows["death"] < level)))
    return int(np.sum((rows["birth"] <= level) & (rows["death"] > level)))


def _noisy(rng, shape, levels):
    """Smoothed noise quantised to a few levels, so that ties and plateaus abound."""
    field = ndi.gaussian_filter(rng.standard_normal(shape), 1.2)
    edges = np.quantile(field, np.linspace(0, 1, levels + 1)[1:-1])
    return np.digitize(field, edges).astype(np.int16)


def _bounded_components(outside_set, dual, keep_out):
    """Components of ``outside_set`` touching neither the array border nor ``keep_out``."""
    structure = ndi.generate_binary_structure(outside_set.ndim, dual)
    labels, n = ndi.label(outside_set, structure=structure)
    border = np.zeros(outside_set.shape, bool)
    for axis in range(outside_set.ndim):
        idx = [slice(None)] * outside_set.ndim
        idx[axis] = [0, -1]
        border[tuple(idx)] = True
    touching = np.unique(labels[(border | keep_out) & outside_set])
    return n - np.count_nonzero(touching)


@pytest.mark.parametrize("shape", [(40, 50), (14, 16, 18)])
@pytest.mark.parametrize("conn_full", [False, True])
@pytest.mark.parametrize("walls", ["bright", "dark"])
@pytest.mark.parametrize("masked", [False, True])
def test_betti_numbers_match_scipy_label(rng, shape, conn_full, walls, masked):
    # Reference: scipy.ndimage.label. b0 = components of the wall set {f >= t} (bright) with
    # the wall structure; cavities = components of the rest, with the dual structure, that
    # reach neither the border nor a voxel outside the ROI (Alexander duality).
    ndim = len(shape)
    conn = ndim if conn_full else 1
    dual = 1 if conn_full else ndim
    image = _noisy(rng, shape, 7)
    mask = ndi.binary_dilation(rng.random(shape) < 0.7, iterations=1) if masked else None
    inside = np.ones(shape, bool) if mask is None else mask
    dgm = persistence(image, walls=walls, connectivity=conn, mask=mask)
    bright = walls == "bright"
    wall_structure = ndi.generate_binary_structure(ndim, conn)
    for level in np.unique(image):
        walls_t = ((image >= level) if bright else (image <= level)) & inside
        b0 = ndi.label(walls_t, structure=wall_structure)[1]
        top = _bounded_components(~walls_t, dual, ~inside)
        assert _alive(dgm.pairs(0), level, bright) == b0, level
        assert _alive(dgm.pairs(ndim - 1), level, bright) == top, level
    # H0's essential classes are the components of the ROI itself.
    assert dgm.essential(0).sum() == ndi.label(inside, structure=wall_structure)[1]


@pytest.mark.parametrize("conn", [1, 2])
@pytest.mark.parametrize("walls", ["bright", "dark"])
def test_euler_poincare_2d_matches_skimage(rng, conn, walls):
    # Reference: skimage.measure.euler_number (Ohser, Nagel & Schladitz 2002): in 2D it is
    # objects - holes with the object connectivity given and the dual one for the
    # background, so it must equal b0 - b1 at every threshold (Euler-Poincare).
    image = _noisy(rng, (48, 40), 9)
    dgm = persistence(image, walls=walls, connectivity=conn)
    bright = walls == "bright"
    for level in np.unique(image):
        walls_t = image >= level if bright else image <= level
        chi = _alive(dgm.pairs(0), level, bright) - _alive(dgm.pairs(1), level, bright)
        assert chi == euler_number(walls_t, connectivity=conn), level


@pytest.mark.parametrize("conn", [1, 3])
def test_euler_poincare_3d_with_skimage_and_oracle_h1(rng, conn):
    # References: skimage.measure.euler_number (Ohser et al. 2002; 6/26 neighbourhoods for
    # connectivity 1/3, background dual) equals the alternating cell count of the oracle's
    # complex, and chi - b0 - b2 (ours) must equal -b1 of the textbook reduction.
    for _ in range(3):
        image = rng.integers(0, 4, size=(4, 4, 5))
        dgm = persistence(image, connectivity=conn)
        finite, essential, cx = oracle_pairs(image, conn)
        for level in (1, 2, 3):
            chi = euler_number(image >= level, connectivity=conn)
            assert chi == cx.euler_characteristic(level)
            b1 = sum(c for (b, d), c in finite[1].items() if b >= level > d)
            b1 += sum(b >= level for b in essential[1])
            assert _alive(dgm.pairs(0), level) - b1 + _alive(dgm.pairs(2), level) == chi


def _tie_free(rng, shape):
    """A random permutation of 0..n-1: integer values without ties."""
    return rng.permutation(int(np.prod(shape))).reshape(shape).astype(np.int32)


@pytest.mark.parametrize("shape", [(30, 31), (9, 10, 11)])
@pytest.mark.parametrize("conn_full", [False, True])
def test_regional_maxima_count_matches_skimage(rng, shape, conn_full):
    # Reference: skimage.morphology.local_maxima. On tie-free data every H0 class is born
    # at a regional maximum (wall connectivity) and every regional maximum starts one.
    conn = len(shape) if conn_full else 1
    image = ndi.gaussian_filter(rng.standard_normal(shape), 1.0)
    image = np.argsort(np.argsort(image, axis=None)).reshape(shape)  # ranks: tie-free
    dgm = persistence(image, connectivity=conn)
    maxima = local_maxima(image, connectivity=conn, allow_borders=True)
    assert len(dgm.pairs(0)) == np.count_nonzero(maxima)
    dark = persistence(image, connectivity=conn, walls="dark")
    minima = local_maxima(-image, connectivity=conn, allow_borders=True)
    assert len(dark.pairs(0)) == np.count_nonzero(minima)


@pytest.mark.parametrize("shape", [(30, 31), (9, 10, 11)])
@pytest.mark.parametrize("conn_full", [False, True])
def test_dynamics_match_h_maxima(rng, shape, conn_full):
    # Reference: dynamics (Grimaud 1992) via skimage.morphology.h_maxima: for an integer
    # image and 1 <= h <= range, its h-maxima components are the maxima of dynamic >= h,
    # i.e. the H0 classes of persistence >= h (the essential class included).
    conn = len(shape) if conn_full else 1
    structure = ndi.generate_binary_structure(len(shape), conn)
    image = _tie_free(rng, shape)
    pers = persistence(image, connectivity=conn).persistence(0)
    assert len(pers) > 3
    for h in (1, 2, 5, 17, 60, 200, int(np.ptp(image))):
        domes = ndi.label(h_maxima(image, h, footprint=structure), structure=structure)[1]
        assert np.count_nonzero(pers >= h) == domes, h
