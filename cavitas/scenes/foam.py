"""A synthetic closed-cell foam: Voronoi cells with walls (invented data, for the demo and
benchmarks only)."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from .. import _checks
from .._errors import ParameterError
from ._common import (
    Scene,
    border_labels,
    check_count,
    check_imaging,
    check_range,
    check_shape,
    physical_grid,
    render,
    seed_cells,
    split_components,
)
from ._voronoi import pair_half_thickness, voronoi_walls

__all__ = ["foam"]

#: Minimum seed distance as a fraction of the mean seed distance (keeps cells from being tiny).
_MIN_DISTANCE = 0.7


def foam(shape: Sequence[int] = (96, 96, 96), *, cells: int = 60, wall_thickness: float = 2.5,
         thickness_spread: float = 0.0, noise: float = 0.1, ramp: float = 1.0,
         walls: str = "bright", broken_walls: int = 0, blur: float = 1.0,
         spacing: Sequence[float] | None = None, seed: int = 0) -> Scene:
    """Make a synthetic closed-cell foam filling the whole scan (invented data).

    Seeds are scattered at random with a minimum distance (0.7 of the mean seed distance),
    in the scan and in a thin margin around it, so the foam continues past the scan border and
    the cells there are cut the way a scan cuts them. Each voxel belongs to its nearest seed
    (in physical units); a voxel is wall when its distance to the bisector between its seed
    and one of the next-nearest seeds is below half the wall thickness. ``broken_walls``
    walls between two cells away from the border get a round hole (radius twice the wall
    thickness), so those two cells are one chamber in ``truth``.

    For the demo and for benchmarks only: the geometry is invented, not a model of any
    real material.

    Parameters
    ----------
    shape : sequence of int
        ``(z, y, x)``; 2D shapes ``(y, x)`` give a 2D foam (a cut through one).
    cells : int
        Number of seeds, in the scan and a thin margin around it (half the minimum seed
        distance); ``truth`` holds the cells that reach into the scan (nearly always all),
        less one per broken wall.
    wall_thickness : float
        Wall thickness in voxels of the coarsest axis (physical thickness
        ``wall_thickness * max(spacing)``), so every wall is at least this many voxels thick
        along every axis. Walls thinner than ``sqrt(ndim)`` voxels may let two chambers
        touch diagonally; 2–3 keeps them apart with any connectivity.
    thickness_spread : float
        Each wall's thickness is ``wall_thickness`` times a factor drawn uniformly in
        ``[1 - thickness_spread, 1 + thickness_spread]``, in [0, 0.9].
    noise : float
        Standard deviation of the added Gaussian noise, as a fraction of the wall-to-interior
        contrast (1); 0.3 is a hard case.
    ramp : float
        Illumination gain rising linearly from 1 at the first corner to ``ramp`` at the
        opposite one.
    walls : {"bright", "dark"}
        Bright walls on a dark background (default) or the inverse.
    broken_walls : int
        Number of walls with a hole; each merges two cells into one chamber.
    blur : float
        Gaussian blur, standard deviation in voxels.
    spacing : sequence of float, optional
        Voxel size in µm, same order as ``shape``; 1.0 per axis by default.
    seed : int
        Seed of the random generator; the same seed gives the same scene.

    Returns
    -------
    Scene
        Image (float32), truth (int32), spacing, border-cut labels, description, params.

    Notes
    -----
    The image is made in this order: partial-volume walls (1) on 0 → blur → polarity →
    illumination → Gaussian noise. Cost: one k-nearest query per voxel (``cKDTree``).

    Examples
    --------
    >>> scene = foam((32, 32, 32), cells=8, seed=1)
    >>> scene.image.dtype, scene.truth.dtype, scene.truth.shape
    (dtype('float32'), dtype('int32'), (32, 32, 32))
    >>> fewer = foam((32, 32, 32), cells=8, seed=1, broken_walls=1)
    >>> scene.n_labels - fewer.n_labels
    1
    """
    params = dict(generator="foam", shape=shape, cells=cells, wall_thickness=wall_thickness,
                  thickness_spread=thickness_spread, noise=noise, ramp=ramp, walls=walls,
                  broken_walls=broken_walls, blur=blur, spacing=spacing, seed=seed)
    shape = check_shape(shape, len(tuple(np.ravel(shape))))
    if len(shape) not in (2, 3):
        raise ParameterError(f"shape must be 2D or 3D; got {shape}.")
    ndim = len(shape)
    spacing = _checks.spacing((1.0,) * ndim if spacing is None else spacing, ndim)
    cells = check_count("cells", cells, 2)
    check_range("wall_thickness", wall_thickness, 0.5, 20.0)
    check_range("thickness_spread", thickness_spread, 0.0, 0.9)
    check_imaging(noise=noise, ramp=ramp, blur=blur, walls=walls)
    broken_walls = check_count("broken_walls", broken_walls)
    rng = np.random.default_rng(seed)

    step = max(spacing)
    extent = np.array(shape) * np.array(spacing)
    seeds, _ = seed_cells(rng, cells, extent, _MIN_DISTANCE)
    half = pair_half_thickness(rng, len(seeds), wall_thickness * step, thickness_spread)

    points = physical_grid(shape, spacing)
    vw = voronoi_walls(points, seeds, half, step)
    seed_label = np.arange(len(seeds))
    if broken_walls:
        seed_label = _break_walls(rng, vw, points, shape, spacing, len(seeds), broken_walls,
                                  thickness=wall_thickness * step)
    truth = np.where(vw.wall, 0, seed_label[vw.nearest] + 1).reshape(shape)
    truth = split_components(truth)
    image = render(vw.clean.reshape(shape), rng, blur=blur, walls=walls, ramp=ramp,
                   noise=noise)
    cut = border_labels(truth)
    description = (
        f"Synthetic closed-cell foam (invented data, for the demo and benchmarks only): "
        f"{truth.max()} chambers in a {'x'.join(map(str, shape))} scan at spacing "
        f"{spacing} µm, {len(cut)} of them cut by the scan border; Voronoi cells of "
        f"{len(seeds)} seeds with walls {wall_thickness} voxels thick"
        f"{f' (±{thickness_spread:.0%})' if thickness_spread else ''}, {broken_walls} "
        f"broken wall(s) merging two cells each; {walls} walls, blur σ={blur} voxels, "
        f"illumination ×1→×{ramp}, Gaussian noise σ={noise} of the wall contrast."
    )
    return Scene(image=image, truth=truth, spacing=spacing, border_labels=cut,
                 description=description, params=params)


def _break_walls(rng: np.random.Generator, vw, points: np.ndarray, shape: tuple[int, ...],
                 spacing: tuple[float, ...], n_seeds: int, count: int, *,
                 thickness: float) -> np.ndarray:
    """Punch a round hole (radius twice the wall thickness) in ``count`` walls between cells
    that do not touch the border (border cells only when there are too few others), each
    cell in at most one broken wall, each wall at least twice as wide as the hole.

    Edits ``vw.clean`` and ``vw.wall`` in place; returns the seed → label map that merges
    the two cells of each broken wall.
    """
    grid_nearest = vw.nearest.reshape(shape)
    on_border = np.zeros(n_seeds, bool)
    for axis in range(len(shape)):
        for end in (0, -1):
            on_border[np.take(grid_nearest, end, axis=axis).ravel()] = True
    a = np.minimum(vw.nearest, vw.other)[vw.wall]
    b = np.maximum(vw.nearest, vw.other)[vw.wall]
    keys, sizes = np.unique(a * n_seeds + b, return_counts=True)
    radius = 2.0 * thickness
    face = sizes * np.prod(spacing) / thickness  # area (3D) or length (2D) of each wall
    keys = keys[face >= (2.0 * np.pi * radius**2 if len(shape) == 3 else 3.0 * radius)]
    inner = ~on_border[keys // n_seeds] & ~on_border[keys % n_seeds]
    order = np.concatenate([rng.permutation(keys[inner]), rng.permutation(keys[~inner])])
    used = np.zeros(n_seeds, bool)
    chosen = []
    for key in order:
        i, j = divmod(int(key), n_seeds)
        if not used[i] and not used[j]:
            used[[i, j]] = True
            chosen.append((i, j))
            if len(chosen) == count:
                break
    if len(chosen) < count:
        raise ParameterError(
            f"broken_walls={count} is too many: only {len(chosen)} wall(s) of this foam can be "
            f"broken (each cell in at most one broken wall, walls wide enough for the hole); "
            f"lower broken_walls or add cells."
        )
    seed_label = np.arange(n_seeds)
    pair_a = np.minimum(vw.nearest, vw.other)
    pair_b = np.maximum(vw.nearest, vw.other)
    for i, j in chosen:
        in_pair = np.flatnonzero((pair_a == i) & (pair_b == j))
        wall = in_pair[vw.wall[in_pair]]
        centroid = points[wall].mean(axis=0)
        centre = points[wall[np.argmin(np.sum((points[wall] - centroid) ** 2, axis=1))]]
        hole = in_pair[np.sum((points[in_pair] - centre) ** 2, axis=1) < radius**2]
        vw.clean[hole] = 0.0
        vw.wall[hole] = False
        seed_label[j] = i
    return seed_label
