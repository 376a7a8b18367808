"""Whole-scan figures: counts, volume fraction (closed porosity), number density."""

import numpy as np
import pytest

from cavitas import ParameterError
from cavitas.measure import global_figures, measure_regions


def sphere_packing(rng, shape, radii, spacing):
    """Non-overlapping digitised balls of the given physical radii, placed at random
    inside the box (random sequential addition; the layout is invented, the check value
    is analytic)."""
    spacing = np.asarray(spacing)
    extent = np.asarray(shape) * spacing
    grids = np.ogrid[tuple(slice(0, s) for s in shape)]
    lab = np.zeros(shape, np.int32)
    centres = []
    for r in radii:
        for _ in range(1000):
            c = rng.uniform(r + 1, extent - r - 1)
            if all(np.linalg.norm(c - d) > r + q + 1 for d, q in centres):
                break
        else:
            raise AssertionError("packing failed")
        centres.append((c, r))
        d2 = sum((g * s - x) ** 2 for g, s, x in zip(grids, spacing, c, strict=True))
        lab[d2 <= r * r] = len(centres)
    return lab


@pytest.mark.parametrize("spacing", [(1.0, 1.0, 1.0), (2.0, 1.0, 1.0)])
def test_porosity_of_a_sphere_packing(spacing, rng):
    # Source: volume fraction of non-overlapping balls = 4/3·π·Σr³ / box volume (handbook
    # formula). Tolerance 1.5 % relative: digitisation of balls of radius 8-12 (at 2:1
    # spacing down to 4 voxels along z) stays within about 1 % per ball (measured, cf.
    # test_measure_surface) and errors of different balls partly cancel.
    radii = rng.uniform(8, 12, 12)
    shape = (48, 96, 96) if spacing[0] == 2.0 else (96, 96, 96)
    lab = sphere_packing(rng, shape, radii, spacing)
    table = measure_regions(lab, spacing=spacing, surface=False, thickness=False)
    figs = global_figures(table, labels=lab, spacing=spacing, unit="mm")
    box = float(np.prod(np.asarray(shape) * np.asarray(spacing)))
    expected = 4 / 3 * np.pi * np.sum(radii**3) / box
    assert figs["volume_fraction"] == pytest.approx(expected, rel=0.015)
    assert figs["region_count"] == 12 and figs["border_region_count"] == 0
    assert figs["roi_volume"] == pytest.approx(box)
    assert figs["regions_per_volume"] == pytest.approx(12 / box)
    assert figs["total_volume"] == pytest.approx(figs["volume_fraction"] * box)
    assert figs["units"]["regions_per_volume"] == "1/mm³"


@pytest.mark.parametrize("ndim", [2, 3])
def test_roi_restricts_fraction_and_density(ndim):
    # Hand-calculated (common practice): two one-voxel-wide squares/cubes, one outside
    # the ROI; fraction and density count only the ROI.
    lab = np.zeros((10,) * ndim, np.int32)
    lab[(slice(1, 3),) * ndim] = 1
    lab[(slice(6, 8),) * ndim] = 2
    roi = np.zeros(lab.shape, bool)
    roi[(slice(0, 5),) * ndim] = True
    table = measure_regions(lab, roi=roi, thickness=False)
    figs = global_figures(table, labels=lab, roi=roi)
    assert figs["volume_fraction"] == pytest.approx(2**ndim / 5**ndim)
    assert figs["regions_per_volume"] == pytest.approx(1 / 5**ndim)
    assert figs["region_count"] == 2


def test_empty_table_and_bad_roi():
    lab = np.zeros((5, 5), np.int32)
    figs = global_figures(measure_regions(lab), labels=lab)
    assert figs["region_count"] == 0 and figs["volume_fraction"] == 0.0
    assert np.isnan(figs["mean_volume"])
    with pytest.raises(ParameterError, match="roi"):
        global_figures(measure_regions(lab), labels=lab, roi=np.ones((4, 4), bool))


def test_spacing_and_unit_default_to_the_table_meta():
    # Common practice (consistency): figures use the geometry the table was measured with.
    lab = np.zeros((4, 6), np.int32)
    lab[1:3, 1:3] = 1
    table = measure_regions(lab, spacing=(0.5, 2.0), unit="nm", thickness=False)
    figs = global_figures(table, labels=lab)
    assert figs["roi_volume"] == pytest.approx(24.0)
    assert figs["units"]["total_volume"] == "nm²"
