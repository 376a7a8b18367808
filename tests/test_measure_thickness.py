"""Local thickness and wall thickness (Hildebrand & Rüegsegger 1997)."""

import numpy as np
import pytest
from scipy.ndimage import distance_transform_edt

from cavitas import ParameterError
from cavitas.measure import local_thickness, measure_regions
from cavitas.measure._edt import squared_edt


@pytest.mark.parametrize("shape,spacing", [((7, 9, 11), (1.0, 1.0, 1.0)),
                                           ((5, 13, 8), (2.0, 0.7, 1.3)),
                                           ((1, 20, 30), (1.0, 1.5, 1.0))])
@pytest.mark.parametrize("fill", [0.05, 0.5, 0.95])
def test_distance_transform_matches_scipy(shape, spacing, fill, rng):
    # Reference library: scipy.ndimage.distance_transform_edt with sampling=spacing.
    mask = rng.random(shape) < fill
    mask.flat[0] = False
    ours = np.sqrt(squared_edt(mask, spacing))
    np.testing.assert_allclose(ours, distance_transform_edt(mask, sampling=spacing),
                               rtol=1e-12, atol=1e-12)


def brute_force_thickness(mask, spacing):
    """The definition written plainly: 2·max DT(c) over centres c with |p - c| < DT(c).

    Ties (|p - c| = DT(c) exactly, common on a grid) are outside; the margin 1e-9 · s_min²
    on squared distances is the tie rule stated in cavitas/measure/_thickness.py.
    """
    dt = distance_transform_edt(mask, sampling=spacing)
    pts = np.argwhere(mask) * np.asarray(spacing)
    radii = dt[mask]
    radii2 = radii**2 - 1e-9 * min(spacing) ** 2
    out = np.zeros(mask.shape)
    for p, idx in zip(pts, np.argwhere(mask), strict=True):
        inside = np.sum((pts - p) ** 2, axis=1) < radii2
        out[tuple(idx)] = 2 * radii[inside].max()
    return out


@pytest.mark.parametrize("ndim", [2, 3])
@pytest.mark.parametrize("spacing_kind", ["iso", "aniso"])
def test_matches_definition_on_small_random_masks(ndim, spacing_kind, rng):
    # Brute-force reference (the definition of Hildebrand & Rüegsegger 1997 on the grid):
    # checks the ridge pruning and the outer-layer shortcut used with `where`.
    shape = (9, 10, 11)[:ndim] if ndim == 3 else (17, 19)
    spacing = (1.0,) * ndim if spacing_kind == "iso" else (1.7, 1.0, 0.6)[:ndim]
    mask = rng.random(shape) < 0.75
    expected = brute_force_thickness(mask, spacing)
    np.testing.assert_allclose(local_thickness(mask, spacing=spacing), expected, rtol=1e-12)
    where = rng.random(shape) < 0.3
    sub = local_thickness(mask, spacing=spacing, where=where)
    np.testing.assert_allclose(sub[where & mask], expected[where & mask], rtol=1e-12)
    assert not np.any(sub[~(where & mask)])


@pytest.mark.parametrize("axis", [0, 1, 2])
@pytest.mark.parametrize("layers", [4, 6, 8])
@pytest.mark.parametrize("spacing", [(1.0, 1.0, 1.0), (2.0, 1.0, 0.5)])
def test_plate_between_two_regions(layers, axis, spacing):
    # Source: a flat plate of thickness t has local thickness t everywhere (Hildebrand &
    # Rüegsegger 1997); for an even number of voxel layers the grid value is exact.
    shape = [12, 12, 12]
    shape[axis] = layers + 8
    lab = np.ones(shape, np.int32)
    index = [slice(None)] * 3
    index[axis] = slice(4, 4 + layers)
    lab[tuple(index)] = 0
    index[axis] = slice(4 + layers, None)
    lab[tuple(index)] = 2
    table = measure_regions(lab, spacing=spacing, surface=False)
    t = layers * spacing[axis]
    np.testing.assert_allclose(table["wall_thickness_mean"], [t, t], rtol=1e-12)
    np.testing.assert_allclose(table["wall_thickness_max"], [t, t], rtol=1e-12)


@pytest.mark.parametrize("t", [4, 6, 8])
@pytest.mark.parametrize("spacing", [(1.0, 1.0, 1.0), (2.0, 1.0, 1.0)])
def test_spherical_shell(t, spacing):
    # Source: a spherical shell of thickness t (inner radius 10 voxels) has local thickness
    # t (Hildebrand & Rüegsegger 1997); required within one voxel size (the largest
    # spacing), the digitisation limit stated in cavitas/measure/_thickness.py.
    sp = np.asarray(spacing)
    inner = 10.0
    half = np.ceil((inner + t + 4) / sp).astype(int)
    grids = np.ogrid[tuple(slice(-h, h + 1) for h in half)]
    radius = np.sqrt(sum((g * s) ** 2 for g, s in zip(grids, sp, strict=True)))
    lab = np.where(radius < inner, 1, np.where(radius < inner + t, 0, 2)).astype(np.int32)
    table = measure_regions(lab, spacing=spacing, surface=False)
    assert abs(table["wall_thickness_mean"][0] - t) <= sp.max()
    assert abs(table["wall_thickness_mean"][1] - t) <= sp.max()


def test_local_thickness_rejects_bad_input():
    with pytest.raises(ParameterError, match="outside"):
        local_thickness(np.ones((4, 4), bool))
    with pytest.raises(ParameterError, match="where"):
        local_thickness(np.zeros((4, 4), bool), where=np.ones((3, 3), bool))
    with pytest.raises(ParameterError, match="spacing"):
        local_thickness(np.zeros((4, 4), bool), spacing=(1.0, np.inf))


@pytest.mark.parametrize("dtype", [np.uint8, np.int64])
def test_strip_between_two_regions_in_2d(dtype, capsys):
    # Source: a band of constant width w has local thickness w (Hildebrand & Rüegsegger
    # 1997, 2D case); 6 pixel rows at 0.25 µm -> 1.5 µm. Also: progress goes to stderr.
    lab = np.ones((20, 9), dtype)
    lab[7:13] = 0
    lab[13:] = 3
    table = measure_regions(lab, spacing=(0.25, 1.0), progress=True)
    np.testing.assert_allclose(table["wall_thickness_mean"], [1.5, 1.5], rtol=1e-12)
    assert table["shell_voxel_count"].tolist() == [9, 9]
    assert "measuring regions" in capsys.readouterr().err
