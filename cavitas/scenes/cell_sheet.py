"""A synthetic membrane-stained cell sheet in 2D: Voronoi-like cells with gently curved
walls (invented data, for the demo and benchmarks only)."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from scipy import ndimage as ndi

from .. import _checks
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
from ._voronoi import voronoi_walls

__all__ = ["cell_sheet"]

#: Minimum seed distance as a fraction of the mean seed distance.
_MIN_DISTANCE = 0.7
#: Largest slope of the smooth warp that bends the walls (wall thickness varies by ± this).
_WARP_SLOPE = 0.2


def cell_sheet(shape: Sequence[int] = (512, 512), *, cells: int = 150,
               wall_thickness: float = 2.5, noise: float = 0.1, ramp: float = 1.0,
               walls: str = "bright", blur: float = 1.0,
               spacing: Sequence[float] = (0.2, 0.2), seed: int = 0) -> Scene:
    """Make a 2D membrane-stained cell sheet filling the image (invented data).

    Cells are the Voronoi cells of random seeds (minimum distance 0.7 of the mean), seen
    through a smooth random warp of the plane so their walls are gently curved; seeds also
    lie in a margin around the image, so the cells at the border are cut by it (listed in
    ``border_labels``). A pixel is membrane when its warped distance to the bisector between
    its cell's seed and a neighbour's is below half the wall thickness; the warp's slope is
    at most 0.2, so the membrane is ``wall_thickness`` ± 20 % pixels thick.

    For the demo and for benchmarks only: the geometry is invented.

    Parameters
    ----------
    shape : sequence of int
        ``(y, x)``.
    cells : int
        Number of seeds, in the image and a thin margin around it (half the minimum seed
        distance); ``truth`` holds the cells that reach into the image (nearly always all).
    wall_thickness : float
        Membrane thickness in pixels of the coarsest axis.
    noise : float
        Standard deviation of the added Gaussian noise, as a fraction of the wall-to-interior
        contrast (1); 0.3 is a hard case.
    ramp : float
        Illumination gain rising linearly from 1 at the top-left corner to ``ramp`` at the
        bottom-right one.
    walls : {"bright", "dark"}
        Bright membranes on dark cytoplasm (default) or the inverse.
    blur : float
        Gaussian blur, standard deviation in pixels.
    spacing : sequence of float
        Pixel size in µm, ``(y, x)``.
    seed : int
        Seed of the random generator; the same seed gives the same scene.

    Returns
    -------
    Scene

    Notes
    -----
    The image is made in this order: partial-volume membranes (1) on 0 → blur → polarity →
    illumination → Gaussian noise.

    Examples
    --------
    >>> scene = cell_sheet((64, 64), cells=6, seed=4)
    >>> scene.image.shape, scene.n_labels, len(scene.border_labels)
    ((64, 64), 6, 6)
    """
    params = dict(generator="cell_sheet", shape=shape, cells=cells,
                  wall_thickness=wall_thickness, noise=noise, ramp=ramp, walls=walls,
                  blur=blur, spacing=spacing, seed=seed)
    shape = check_shape(shape, 2)
    spacing = _checks.spacing(spacing, 2)
    cells = check_count("cells", cells, 2)
    check_range("wall_thickness", wall_thickness, 0.5, 20.0)
    check_imaging(noise=noise, ramp=ramp, blur=blur, walls=walls)
    rng = np.random.default_rng(seed)

    step = max(spacing)
    extent = np.array(shape) * np.array(spacing)
    seeds, mean_distance = seed_cells(rng, cells, extent, _MIN_DISTANCE)

    warp = _warp(rng, shape, spacing, mean_distance)
    points = physical_grid(shape, spacing)
    warped = points + warp.reshape(-1, 2)
    seed_index = np.clip(seeds / np.array(spacing), 0, np.array(shape) - 1).T
    seeds = seeds + np.stack([ndi.map_coordinates(w, seed_index, order=1, mode="nearest")
                              for w in np.moveaxis(warp, -1, 0)], axis=1)
    vw = voronoi_walls(warped, seeds, wall_thickness * step / 2.0, step)

    truth = split_components(np.where(vw.wall, 0, vw.nearest + 1).reshape(shape))
    image = render(vw.clean.reshape(shape), rng, blur=blur, walls=walls, ramp=ramp,
                   noise=noise)
    cut = border_labels(truth)
    description = (
        f"Synthetic membrane-stained cell sheet (invented data, for the demo and benchmarks "
        f"only): {truth.max()} cells in a {shape[0]}x{shape[1]} image at spacing {spacing} "
        f"µm, {len(cut)} of them cut by the image border; warped Voronoi cells with curved "
        f"membranes {wall_thickness} pixels thick, {walls} walls, blur σ={blur} pixels, "
        f"illumination ×1→×{ramp}, Gaussian noise σ={noise} of the membrane contrast."
    )
    return Scene(image=image, truth=truth, spacing=spacing, border_labels=cut,
                 description=description, params=params)


def _warp(rng: np.random.Generator, shape: tuple[int, ...], spacing: tuple[float, ...],
          scale: float) -> np.ndarray:
    """A smooth random displacement field (physical units), ``shape + (2,)``, varying over
    about half a cell (``scale``) with slope at most ``_WARP_SLOPE``."""
    sigma = [0.5 * scale / s for s in spacing]
    field = np.stack([ndi.gaussian_filter(rng.standard_normal(shape), sigma, mode="wrap")
                      for _ in range(2)], axis=-1)
    slope = max(np.abs(np.gradient(field[..., c], spacing[a], axis=a)).max()
                for c in range(2) for a in range(2))
    return field * (_WARP_SLOPE / slope)
