"""Euler characteristic curves and connectivity density against outside references.

References: ``skimage.measure.euler_number`` (Ohser, Nagel & Schladitz 2002: a lookup table
over 2x2(x2) configurations, an independent route to χ) at every threshold; textbook
topology of known shapes (a ball χ = 1, a spherical shell χ = 2, a solid torus χ = 0, a
wire frame of the cube's 12 edges: one component with 12 - 8 + 1 = 5 independent loops,
χ = -4); the cycle rank E - V + 1 of a connected graph for a lattice of struts (Euler's
formula for graphs, handbook value). Connectivity: cavitas' ``connectivity`` is the wall
set's, and skimage's ``connectivity`` is the foreground's, so the walls are passed to
skimage as the foreground with the same number.
"""

import numpy as np
import pytest
from skimage.measure import euler_number

from cavitas import ParameterError
from cavitas.cubical import connectivity_density, euler_curve, persistence


def _walls_at(image, level, walls, mask):
    wall_set = image >= level if walls == "bright" else image <= level
    return wall_set if mask is None else wall_set & mask


@pytest.mark.parametrize("ndim", [2, 3])
@pytest.mark.parametrize("dtype", [np.uint8, np.int16, np.float32, np.float64])
@pytest.mark.parametrize("walls", ["bright", "dark"])
@pytest.mark.parametrize("full", [False, True])
@pytest.mark.parametrize("use_mask", [False, True])
def test_chi_at_every_level_matches_skimage(rng, ndim, dtype, walls, full, use_mask):
    # reference: skimage.measure.euler_number (Ohser, Nagel & Schladitz 2002), thresholded
    # at every level; few distinct values so that every level has ties
    shape = (9, 10, 11) if ndim == 3 else (23, 29)
    image = rng.integers(-3, 4, size=shape).astype(dtype)
    mask = rng.random(shape) < 0.85 if use_mask else None
    connectivity = ndim if full else 1
    curve = euler_curve(image, walls=walls, connectivity=connectivity, mask=mask)
    inside = image if mask is None else image[mask]
    expected_levels = np.unique(inside)[::-1] if walls == "bright" else np.unique(inside)
    np.testing.assert_array_equal(curve.levels, expected_levels)
    expected = [euler_number(_walls_at(image, t, walls, mask), connectivity=connectivity)
                for t in curve.levels]
    assert curve.chi.tolist() == expected
    between = float(curve.levels[0]) + (0.5 if walls == "dark" else -0.5)
    for t in (between, float(image.max()) + 1, float(image.min()) - 1):
        assert curve.at(t) == euler_number(_walls_at(image, t, walls, mask),
                                           connectivity=connectivity)


@pytest.mark.parametrize("walls", ["bright", "dark"])
@pytest.mark.parametrize("connectivity", [1, 2])
def test_chi_is_components_minus_holes_of_the_2d_diagram(rng, walls, connectivity):
    # internal consistency (two independent routes in cavitas): in 2D, chi = beta0 - beta1
    # (Euler-Poincare), beta0 and beta1 counted as the diagram's H0 and H1 pairs alive at
    # each level (born at or before it, not yet dead)
    image = rng.integers(0, 6, size=(20, 23)).astype(float)
    dgm = persistence(image, walls=walls, connectivity=connectivity)
    curve = euler_curve(image, walls=walls, connectivity=connectivity)
    sign = 1 if walls == "bright" else -1  # bright: levels fall as the walls grow

    def alive(dim, level):
        rows = dgm.pairs(dim)
        return int(np.sum((sign * rows["birth"] >= sign * level)
                          & (sign * rows["death"] < sign * level)))

    assert [alive(0, t) - alive(1, t) for t in curve.levels] == curve.chi.tolist()


def test_float_data_with_many_levels_matches_skimage(rng):
    # reference: skimage.measure.euler_number at a sample of the 900 distinct levels
    image = rng.normal(size=(30, 30)).astype(np.float64)
    curve = euler_curve(image, walls="dark", connectivity=2)
    assert len(curve.levels) == image.size
    for i in range(0, image.size, 37):
        assert curve.chi[i] == euler_number(image <= curve.levels[i], connectivity=2)
    reduced = curve.changes()
    assert all(reduced.at(t) == curve.at(t) for t in curve.levels[::11])


def _ball_grid(n):
    return np.stack(np.meshgrid(*(np.arange(n) - (n - 1) / 2,) * 3, indexing="ij"))


def _torus(n=40, major=11.0, minor=4.5):
    z, y, x = _ball_grid(n)
    return (np.hypot(x, y) - major) ** 2 + z**2 <= minor**2


def _shell(n=31, outer=13.0, inner=9.0):
    z, y, x = _ball_grid(n)
    r = np.sqrt(x**2 + y**2 + z**2)
    return (r <= outer) & (r > inner)


def _cube_edges(size=20, bar=3):
    """The 12 edges of a cube as square bars (a wire frame)."""
    frame = np.zeros((size,) * 3, bool)
    ends = (slice(0, bar), slice(size - bar, size))
    for axis in range(3):
        for first in ends:
            for second in ends:
                index = [first, second]
                index.insert(axis, slice(None))
                frame[tuple(index)] = True
    return frame


@pytest.mark.parametrize("connectivity", [1, 3])
@pytest.mark.parametrize("shape, chi, betti", [
    (_torus, 0, (1, 1, 0)),       # solid torus: a circle up to deformation
    (_shell, 2, (1, 0, 1)),       # spherical shell: a sphere up to deformation
    (_cube_edges, -4, (1, 5, 0)),  # graph of the cube: 8 vertices, 12 edges
])
def test_known_shapes(shape, chi, betti, connectivity):
    # reference: textbook topology of each shape (see the module docstring)
    walls = shape()
    image = walls.astype(np.uint8) * 200 + 10  # bright walls on a dark background
    curve = euler_curve(image, connectivity=connectivity)
    assert curve.at(200) == chi
    assert curve.at(10) == 1  # the whole box
    density = connectivity_density(walls, connectivity=connectivity)
    assert (density.betti0, density.betti1, density.betti2) == betti
    assert density.chi == chi


def _strut_lattice(nodes, pitch, thickness):
    """Square bars along z, y and x through a nodes**3 grid of junctions."""
    size = (nodes - 1) * pitch + thickness
    on = np.zeros(size, bool)
    for k in range(nodes):
        on[k * pitch:k * pitch + thickness] = True
    z, y, x = np.meshgrid(on, on, on, indexing="ij")
    return (z & y) | (y & x) | (z & x)


@pytest.mark.parametrize("nodes", [2, 4])
def test_connectivity_density_of_a_strut_lattice_is_its_cycle_rank(nodes):
    # reference: cycle rank E - V + 1 of the connected lattice graph (Euler's formula for
    # graphs): V = n^3 junctions, E = 3 n^2 (n - 1) struts
    pitch, thickness, spacing = 6, 2, (0.5, 0.5, 0.5)
    walls = _strut_lattice(nodes, pitch, thickness)
    loops = 3 * nodes**2 * (nodes - 1) - nodes**3 + 1
    density = connectivity_density(walls, spacing=spacing)
    assert density.betti1 == loops
    assert density.volume == pytest.approx(walls.size * 0.125)
    assert density.density == pytest.approx(loops / (walls.size * 0.125))
    # the same walls as a level of an image, with a region of interest that cuts one corner
    # junction away: a vertex of degree 3 leaves the graph, the cycle rank drops by 3 - 1
    image = np.where(walls, 100.0, 0.0)
    roi = np.ones(walls.shape, bool)
    roi[:pitch - 1, :pitch - 1, :pitch - 1] = False
    cut = connectivity_density(image, level=50.0, spacing=spacing, mask=roi)
    assert cut.betti1 == loops - 2
    assert cut.volume == pytest.approx(roi.sum() * 0.125)


def test_two_dimensional_density_counts_holes():
    # reference: a 3 x 3 grid of square holes cut into a plate has 9 loops (by construction)
    plate = np.ones((13, 13), bool)
    for i in range(3):
        for j in range(3):
            plate[1 + 4 * i:4 + 4 * i, 1 + 4 * j:4 + 4 * j] = False
    density = connectivity_density(plate, spacing=(2.0, 2.0))
    assert (density.betti0, density.betti1, density.chi) == (1, 9, -8)
    assert density.density == pytest.approx(9 / (13 * 13 * 4.0))


@pytest.mark.parametrize("kwargs, words", [
    ({"level": None}, "level= is needed"),
    ({"level": 1.0, "connectivity": 2}, "connectivity must be 1 (faces) or 3"),
    ({"level": 1.0, "walls": "grey"}, "walls must be"),
    ({"level": 1.0, "mask": np.zeros((4, 4, 4), bool)}, "mask selects no voxel"),
])
def test_connectivity_density_refuses_bad_parameters(kwargs, words):
    # common practice: one clear sentence naming the parameter
    with pytest.raises(ParameterError, match=words.replace("(", r"\(").replace(")", r"\)")):
        connectivity_density(np.zeros((4, 4, 4)), **kwargs)
    with pytest.raises(ParameterError, match="level= is for an image"):
        connectivity_density(np.zeros((4, 4), bool), level=1.0)


def test_euler_curve_refuses_nan_inside_the_mask():
    # common practice: non-finite intensities are an error unless masked out
    image = np.zeros((5, 5))
    image[2, 2] = np.nan
    with pytest.raises(ValueError, match="NaN"):
        euler_curve(image)
    mask = ~np.isnan(image)
    assert euler_curve(image, mask=mask).at(0.0) == 0  # a square ring around the hole


@pytest.mark.parametrize("shape, chunks, dtype, runs", [
    ((11, 13), (1, 4), np.uint8, (("bright", 1, False), ("dark", 2, True))),
    ((7, 8, 9), (2, 3, 4), np.float32, (("dark", 1, True), ("bright", 3, False)))])
def test_chunked_curve_matches_skimage_at_every_change(rng, shape, chunks, dtype, runs):
    # euler_curve_in_chunks (cubical/_chunked_euler.py: each chunk counts the cells it owns,
    # one-voxel chunks and chunks cutting every ring) against the whole-array curve's
    # changes, and χ at each level it lists against skimage.measure.euler_number (reference
    # library, as above), both connectivities and polarities, with and without a mask
    import dask
    import dask.array as da

    from cavitas.cubical._chunked_euler import euler_curve_in_chunks

    image = rng.integers(0, 5, size=shape).astype(dtype)
    mask = rng.random(shape) < 0.85
    with dask.config.set(scheduler="synchronous"):
        for walls, connectivity, masked in runs:
            given = mask if masked else None
            got = euler_curve_in_chunks(
                da.from_array(image, chunks=chunks), walls=walls, connectivity=connectivity,
                mask=None if given is None else da.from_array(given, chunks=5),
                block_voxels=0)  # each chunk alone
            want = euler_curve(image, walls=walls, connectivity=connectivity,
                               mask=given).changes()
            assert got.levels.dtype == want.levels.dtype
            np.testing.assert_array_equal(got.levels, want.levels)
            np.testing.assert_array_equal(got.chi, want.chi)
            for level, chi in zip(got.levels, got.chi, strict=True):
                assert chi == euler_number(_walls_at(image, level, walls, given),
                                           connectivity=connectivity)


def test_chunked_wall_topology_equals_connectivity_density(rng):
    # walls_in_chunks (segment/_chunked_topology.py: χ, β0 and β2 from chunked passes)
    # against connectivity_density of the whole array (itself checked above against
    # textbook shapes and the cycle rank of strut lattices), both connectivities, a mask
    import dask
    import dask.array as da

    from cavitas.io import Volume
    from cavitas.segment._chunked_topology import walls_in_chunks

    shape = (8, 9, 7)
    labels = (rng.random(shape) < 0.45) * rng.integers(1, 4, shape)
    mask = rng.random(shape) < 0.9
    with dask.config.set(scheduler="synchronous"):
        for connectivity, given in ((1, mask), (3, None)):
            got = walls_in_chunks(da.from_array(labels, chunks=(3, 2, 7)),
                                  connectivity=connectivity, spacing=(0.5, 0.5, 1.0),
                                  unit="mm", block_voxels=0,
                                  mask=None if given is None else da.from_array(given, 4))
            assert got == connectivity_density(
                Volume(labels == 0, spacing=(0.5, 0.5, 1.0), unit="mm"),
                connectivity=connectivity, mask=given)
            assert got.betti0 > 0 and got.betti1 > 0
