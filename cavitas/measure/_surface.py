"""Surface area (perimeter in 2D) of labelled regions by the Crofton formula.

The boundary measure of a set equals the mean number of times straight lines cross it
(Cauchy–Crofton). On a voxel grid, lines run along the 13 lattice directions in 3D
(3 axes, 6 face diagonals, 4 space diagonals) or 4 in 2D; along a direction ``d`` each
pair of voxels ``(p, p + d)`` with different membership is one crossing, and the lines
are ``voxel volume / |d|`` apart. Each direction is weighted by the share of the unit
sphere (circle) that lies closer to it than to any other direction, computed in physical
space so that anisotropic spacing is handled (Legland, Kiêu & Devaux 2007). Then

    S = 2 · Σ_d w_d · c_d · voxel_volume / |d|        (3D; mean |cos| on the sphere = 1/2)
    P = π/2 · Σ_d w_d · c_d · pixel_area / |d|        (2D; mean |cos| on the circle = 2/π)

Measured bias (digitised balls with random centre offsets; see tests/test_measure_surface.py):
within ±0.5 % for radii ≥ 10 voxels (also at spacing 2:1:1), about −1 % at radius 5, up to
−8 % at radius 2–3; ellipsoids with semi-axes 5–14 voxels within ±1 %, but −3 % to +1 % at
spacing 2:1:1, where the direction weights are uneven and an elongated shape does not
average the orientation error out. Flat faces parallel to the axes are underestimated: the
quadrature error for a face normal to an axis is −7.3 % in 3D (−5.2 % in 2D), so an
axis-aligned cube reads 0.874 (side 10 voxels) to 0.900 (side 20) of 6a², and its
sphericity 0.92–0.90 instead of 0.806. Regions too small for any boundary estimate (a few
voxels) get at least the boundary measure of the ball of the same volume (isoperimetric
inequality), so sphericity never exceeds 1.

Why not a marching-cubes mesh: on a binary volume the mesh follows the voxel staircase and
reads digitised balls 8–9 % too high (12 % at spacing 2:1:1), and a mesh per region costs
a crop and a mesh per region; the Crofton counts come from one sweep for all regions.
:func:`surface_area` keeps the mesh as ``method="mesh"`` for comparison.

References
----------
Legland D., Kiêu K., Devaux M.-F. (2007). Computation of Minkowski measures on 2D and 3D
binary images. Image Analysis & Stereology 26, 83–92. doi:10.5566/ias.v26.p83-92
"""

from __future__ import annotations

import functools
import math
from collections.abc import Sequence
from typing import Any

import numba
import numpy as np

from .._errors import ParameterError
from ._checks import as_3d, check_spacing, half_offsets

__all__ = ["ball_boundary", "core_crossings", "crofton_weights", "region_surface",
           "surface_area", "surface_from_crossings"]

#: Sample points on the unit sphere (circle) used to share it out among directions.
_SPHERE_SAMPLES = 400_000


#: How many of the sample points lie nearest each direction when the spacing is the same
#: along every axis (the weights are these over the sample count). Every isotropic
#: spacing gives these counts: the directions' unit vectors are then those of spacing 1
#: up to a few units of rounding (about 1e-15), and no sample point is nearer than
#: 3e-7 (3D; 3e-6 in 2D) to a tie between two directions. Computed once by
#: :func:`_nearest_counts`, which ``tests/test_measure_surface.py`` checks them against;
#: a lookup instead of a pass over 400 000 points in every process.
_ISOTROPIC_COUNTS = {
    2: (100000, 100000, 100000, 100000),
    3: (36624, 29586, 36627, 29588, 28160, 29575, 28154, 29587, 36613, 29593, 28145,
        29589, 28159),
}


def _sample_points(ndim: int) -> np.ndarray:
    """The points that share the unit sphere (half-circle in 2D) out: ``(n, ndim)``."""
    i = np.arange(_SPHERE_SAMPLES) + 0.5
    if ndim == 2:
        theta = i / _SPHERE_SAMPLES * np.pi
        return np.stack([np.sin(theta), np.cos(theta)], axis=1)
    polar = np.arccos(1.0 - 2.0 * i / _SPHERE_SAMPLES)
    azimuth = np.pi * (1.0 + math.sqrt(5.0)) * i
    return np.stack([np.cos(polar), np.sin(polar) * np.sin(azimuth),
                     np.sin(polar) * np.cos(azimuth)], axis=1)


def _direction_units(ndim: int, spacing: tuple[float, ...]) -> np.ndarray:
    """The unit vectors of :func:`half_offsets` in physical space: ``(directions, ndim)``."""
    offs = half_offsets(ndim)[:, 3 - ndim:].astype(np.float64) * np.asarray(spacing)
    return offs / np.linalg.norm(offs, axis=1)[:, None]


def _nearest_counts(ndim: int, spacing: tuple[float, ...]) -> np.ndarray:
    """How many sample points lie nearest each direction (the weights times the count).

    Examples
    --------
    >>> _nearest_counts(2, (1.0, 1.0)).tolist()
    [100000, 100000, 100000, 100000]
    """
    unit = _direction_units(ndim, spacing)
    nearest = np.argmax(np.abs(_sample_points(ndim) @ unit.T), axis=1)
    return np.bincount(nearest, minlength=len(unit))


@functools.lru_cache(maxsize=32)
def crofton_weights(ndim: int, spacing: tuple[float, ...]) -> np.ndarray:
    """Weight of each line direction of :func:`half_offsets` (sums to 1).

    The weight of direction ``d`` is the fraction of the unit sphere (half-circle in 2D)
    closer to ``±d · spacing`` than to any other direction; computed on a Fibonacci
    lattice of 400 000 points (3D) or a fine regular grid of angles (2D), which sets each
    weight to about 10⁻⁴. An isotropic spacing takes the counts computed once
    (``_ISOTROPIC_COUNTS``, the same weights bit for bit).

    Examples
    --------
    >>> w = crofton_weights(2, (1.0, 1.0))
    >>> np.round(w, 3).tolist()
    [0.25, 0.25, 0.25, 0.25]
    """
    if len(set(spacing)) == 1:
        counts = np.array(_ISOTROPIC_COUNTS[ndim], np.intp)
    else:
        counts = _nearest_counts(ndim, spacing)
    return counts / _SPHERE_SAMPLES


@numba.njit(cache=True, nogil=True)
def _crossings_kernel(dense, n, offsets):  # pragma: no cover - compiled
    # one offset per direction; a pair (p, p + d) with labels a != b is a crossing for
    # both; voxels outside the array count as 0 (so a line entering or leaving the array
    # inside a region crosses its boundary there)
    nz, ny, nx = dense.shape
    flat = dense.ravel()
    nd = offsets.shape[0]
    steps = np.empty(nd, np.int64)
    reach_z = 0
    for k in range(nd):
        steps[k] = (offsets[k, 0] * ny + offsets[k, 1]) * nx + offsets[k, 2]
        reach_z = max(reach_z, abs(offsets[k, 0]))
    counts = np.zeros((n + 1, nd), np.int64)
    for z in range(nz):
        inner_z = reach_z <= z < nz - reach_z
        for y in range(ny):
            inner_zy = inner_z and 1 <= y < ny - 1
            base = (z * ny + y) * nx
            for x in range(nx):
                i = base + x
                a = flat[i]
                if inner_zy and 1 <= x < nx - 1:
                    for k in range(nd):
                        b = flat[i + steps[k]]
                        if a != b:
                            counts[a, k] += 1
                            counts[b, k] += 1
                    continue
                for k in range(nd):
                    dz, dy, dx = offsets[k, 0], offsets[k, 1], offsets[k, 2]
                    qz, qy, qx = z + dz, y + dy, x + dx
                    b = 0
                    if 0 <= qz < nz and 0 <= qy < ny and 0 <= qx < nx:
                        b = dense[qz, qy, qx]
                    if a != b:
                        counts[a, k] += 1
                        counts[b, k] += 1
                    pz, py, px = z - dz, y - dy, x - dx
                    if a != 0 and not (0 <= pz < nz and 0 <= py < ny and 0 <= px < nx):
                        counts[a, k] += 1
    return counts


def ball_boundary(measure: np.ndarray, ndim: int) -> np.ndarray:
    """Boundary measure of the ball (disc) with the given volume (area)."""
    measure = np.asarray(measure, dtype=np.float64)
    if ndim == 3:
        return (36.0 * np.pi) ** (1.0 / 3.0) * measure ** (2.0 / 3.0)
    return 2.0 * np.sqrt(np.pi * measure)


def region_surface(dense: np.ndarray, n: int, spacing: tuple[float, ...],
                   volume: np.ndarray) -> np.ndarray:
    """Crofton boundary measure of regions 1..n of a renumbered label array.

    ``dense`` is the 3D view (see :func:`cavitas.measure._checks.as_3d`), ``spacing`` has
    the true number of axes, ``volume`` is each region's volume (for the isoperimetric
    floor). One sweep over the voxels and 4 or 13 directions: O(13 N).
    """
    counts = _crossings_kernel(dense, n, half_offsets(len(spacing)))[1:]
    return surface_from_crossings(counts, spacing, volume)


@numba.njit(cache=True, nogil=True)
def _core_crossings_kernel(padded, n, offsets, halo):  # pragma: no cover - compiled
    # _crossings_kernel's counts of a region, voxel by voxel: a voxel of region a adds one
    # along d for each of its neighbours p + d, p - d not in a; only the voxels of the
    # core (``halo`` voxels in from each side) count, their neighbours read in the halo
    nz, ny, nx = padded.shape
    counts = np.zeros((n + 1, offsets.shape[0]), np.int64)
    for z in range(halo[0], nz - halo[0]):
        for y in range(halo[1], ny - halo[1]):
            for x in range(halo[2], nx - halo[2]):
                a = padded[z, y, x]
                if a == 0:
                    continue
                for k in range(offsets.shape[0]):
                    dz, dy, dx = offsets[k, 0], offsets[k, 1], offsets[k, 2]
                    if padded[z + dz, y + dy, x + dx] != a:
                        counts[a, k] += 1
                    if padded[z - dz, y - dy, x - dx] != a:
                        counts[a, k] += 1
    return counts


def core_crossings(padded: np.ndarray, n: int, ndim: int, halo: np.ndarray) -> np.ndarray:
    """Crossings of regions 1..n (rows) per line direction of :func:`half_offsets`, counted
    at the core voxels of a block framed by its neighbours' voxels (``halo``: 1 on each
    of the array's axes of a 3D view, 0 on the axis a 2D array gains), label 0 beyond the
    array's edge. Summed over blocks that tile an array they equal
    :func:`region_surface`'s counts of the whole array (each is a sum over voxels).

    Examples
    --------
    >>> block = np.pad(np.ones((1, 2, 2), np.int32), ((0, 0), (1, 1), (1, 1)))
    >>> core_crossings(block, 1, 2, np.array([0, 1, 1])).tolist()  # a 2 x 2 square
    [[4, 6, 4, 6]]
    """
    return _core_crossings_kernel(padded, n, half_offsets(ndim), halo)[1:]


def surface_from_crossings(counts: np.ndarray, spacing: tuple[float, ...],
                           volume: np.ndarray) -> np.ndarray:
    """The Crofton boundary measure from the crossings per region and direction, at least
    the ball's of the same volume."""
    ndim = len(spacing)
    offsets = half_offsets(ndim)
    counts = counts.astype(np.float64)
    step = np.linalg.norm(offsets[:, 3 - ndim:] * np.asarray(spacing), axis=1)
    factor = 2.0 if ndim == 3 else np.pi / 2.0
    per_crossing = factor * crofton_weights(ndim, spacing) * float(np.prod(spacing)) / step
    return np.maximum(counts @ per_crossing, ball_boundary(volume, ndim))


def surface_area(mask: Any, *, spacing: Sequence[float] | None = None,
                 method: str = "crofton") -> float:
    """Surface area (perimeter in 2D) of a binary mask, in physical units.

    Parameters
    ----------
    mask : (Z, Y, X) or (Y, X) array_like of bool
        The object; voxels outside the array count as outside.
    spacing : sequence of float, optional
        Voxel size per axis, same order as the array. Default 1.
    method : {"crofton", "mesh"}
        ``"crofton"`` (default): Crofton formula over 13 (3D) or 4 (2D) directions with
        spacing-aware weights (Legland et al. 2007); within ±0.5 % on digitised balls of
        radius ≥ 10 voxels, −7 % on axis-aligned flat faces. ``"mesh"``: area of the
        marching-cubes mesh (Lewiner et al. 2003) of the mask at level 1/2, via
        scikit-image, 3D only; it overestimates digitised balls by 8–9 % (12 % at spacing
        2:1:1) because it follows the voxel staircase, and is exact on axis-aligned faces.
        The Crofton value is never below that of the ball of the same volume.

    Returns
    -------
    float

    Examples
    --------
    >>> import numpy as np
    >>> zz, yy, xx = np.mgrid[-12:13, -12:13, -12:13]
    >>> ball = zz**2 + yy**2 + xx**2 <= 10**2
    >>> round(surface_area(ball) / (4 * np.pi * 10**2), 2)
    1.0
    """
    arr = np.asarray(mask).astype(bool)
    if arr.ndim not in (2, 3):
        raise ParameterError(f"mask must be 2D or 3D; got shape {arr.shape}.")
    sp = check_spacing(spacing, arr.ndim)
    if method == "mesh":
        if arr.ndim != 3:
            raise ParameterError("method='mesh' needs a 3D mask; use method='crofton' in 2D.")
        if not arr.any():
            return 0.0
        from skimage.measure import marching_cubes, mesh_surface_area

        verts, faces, _, _ = marching_cubes(np.pad(arr, 1).astype(np.float32), 0.5,
                                            spacing=sp)
        return float(mesh_surface_area(verts, faces))
    if method != "crofton":
        raise ParameterError(f"method must be 'crofton' or 'mesh'; got {method!r}.")
    count = int(np.count_nonzero(arr))
    if count == 0:
        return 0.0
    dense = as_3d(arr.astype(np.int32))
    volume = np.array([count * float(np.prod(sp))])
    return float(region_surface(dense, 1, sp, volume)[0])
