"""The tabulated noise null (cavitas/segment/null_table.npz) and its interpolation.

Checks: regenerating grid points with the shipped generator gives the shipped numbers;
the cavity count per pixel of smoothed 2D noise matches the density of local minima of
an isotropic Gaussian field (Longuet-Higgins 1957: ``m4 / (6 π √3 m2)`` per unit area,
i.e. ``1 / (4 π √3 σ²)`` for white noise smoothed by a Gaussian of σ; formula from
memory, confirmed against scipy.ndimage minimum-filter counts on 1024² noise); the
interpolation between grid points agrees with a direct simulation there.
"""

import math

import numpy as np
import pytest

from cavitas.segment._noise import null_distribution
from cavitas.segment._null_table import (
    GRID,
    NULL_SEEDS,
    REFERENCE_SHAPE,
    build_table,
    load_table,
    simulate,
    tabulated_null,
)


@pytest.mark.parametrize(("ndim", "sigma"), [(2, (1.0, 1.0)), (2, (0.25, 3.0)),
                                             (3, (2.0, 2.0, 4.0))])
def test_regenerating_grid_points_gives_the_shipped_table(ndim, sigma):
    fresh = build_table(points={ndim: [sigma]})
    for c in (1, ndim):
        shipped = load_table(ndim, c)
        row = shipped.point(tuple(GRID.index(s) for s in sigma))
        assert fresh[f"d{ndim}_c{c}_count"][0] == shipped.count[row]
        np.testing.assert_allclose(fresh[f"d{ndim}_c{c}_levels"][0], shipped.levels[row],
                                   rtol=1e-5)


@pytest.mark.parametrize("sigma", [3.0, 6.0, 12.0])  # on the grid, then beyond it
def test_cavity_density_follows_the_minima_of_a_gaussian_field(sigma):
    # Longuet-Higgins (1957), see the module notes. Each cavity is born at a local
    # minimum (8 neighbours: walls of connectivity 1); one per image never dies (not
    # counted), and the reference images (256², edge-padded smoothing) lose some minima
    # near their border: 5-10 % fewer.
    pooled = tabulated_null((sigma, sigma), 1)
    per_pixel = (pooled.values.size + len(NULL_SEEDS)) / pooled.voxels
    theory = 1.0 / (4.0 * math.pi * math.sqrt(3.0) * sigma ** 2)
    assert 0.85 < per_pixel / theory < 1.02


@pytest.mark.parametrize(("sigma", "connectivity"), [((0.6, 0.6), 1), ((0.3, 1.7), 2)])
def test_interpolation_agrees_with_a_direct_simulation(sigma, connectivity):
    # Reference: the simulation the table is made of, run at this off-grid σ. Different
    # σ draw different noise cavities, so agreement is statistical (a few per cent).
    direct = simulate(2, sigma, connectivity)
    table = tabulated_null(sigma, connectivity).values
    assert table.size == pytest.approx(direct.size, rel=0.05)
    for q in (0.5, 0.9, 0.99):
        assert np.quantile(table, q) == pytest.approx(np.quantile(direct, q), rel=0.05)
    assert table[-10:].mean() == pytest.approx(direct[-10:].mean(), rel=0.05)


def test_one_slice_volume_gets_the_plane_null():
    # a (1, y, x) volume with full connectivity is a plane with full connectivity
    plane = null_distribution((64, 64), (1.0, 1.0), 2)
    slab = null_distribution((1, 64, 64), (0.0, 1.0, 1.0), 3)
    assert np.array_equal(plane.values, slab.values) and plane.largest == slab.largest


def test_largest_grows_with_the_image():
    # the maximum of more noise cavities is larger (the growth law beyond one
    # reference image, the pooled ranks below it)
    reference = math.prod(REFERENCE_SHAPE[2])
    sides = (32, 64, 128, 256, 512, 2048)
    largest = [null_distribution((n, n), (1.0, 1.0), 1).largest for n in sides]
    assert all(a < b for a, b in zip(largest, largest[1:], strict=False))
    at_reference = null_distribution((256, 256), (1.0, 1.0), 1)
    assert 256 * 256 == reference and at_reference.largest == at_reference.values[-1]
