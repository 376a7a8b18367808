"""Voronoi cells with walls of a set thickness: the geometry shared by the foam and the
cell sheet (invented data for the demo and benchmarks)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.spatial import cKDTree

from ._common import soft_wall

__all__ = ["VoronoiWalls", "pair_half_thickness", "voronoi_walls"]


@dataclass
class VoronoiWalls:
    """Per-voxel result of :func:`voronoi_walls` (flat arrays, C order)."""

    nearest: np.ndarray  #: index of the nearest seed
    other: np.ndarray    #: index of the seed across the closest wall
    clean: np.ndarray    #: partial-volume wall value in [0, 1]
    wall: np.ndarray     #: True inside a wall (the 0.5 level of ``clean``)


def voronoi_walls(points: np.ndarray, seeds: np.ndarray, half_thickness: np.ndarray | float,
                  step: float) -> VoronoiWalls:
    """Walls of the Voronoi diagram of ``seeds`` sampled at ``points``.

    A point lies in the wall between its nearest seed ``i`` and another seed ``j`` when its
    distance to their bisector, ``h = (d_j² - d_i²) / (2 |s_i - s_j|)``, is below the
    pair's half thickness. ``j`` runs over the ``ndim + 1`` next-nearest seeds, which covers
    the junctions where up to ``ndim + 1`` cells meet.

    Parameters
    ----------
    points : (n, ndim) array
        Sample positions (physical units).
    seeds : (m, ndim) array
        Cell seeds, m >= 2.
    half_thickness : float or (m, m) array
        Half wall thickness, one value or one per pair of seeds (symmetric).

    Notes
    -----
    Cost: a k-nearest query per point, and two ``(m, m)`` float32 tables of the seed pairs.
    step : float
        Width of the partial-volume ramp (one voxel, physical units).
    """
    ndim = points.shape[1]
    n = len(seeds)
    k = min(ndim + 2, n)
    dist, idx = cKDTree(seeds).query(points, k=k)
    # per pair of seeds (n x n, float32): 1 / (2 |s_i - s_j|) and the half thickness
    sep = np.sqrt(np.sum((seeds[:, None, :] - seeds[None, :, :]) ** 2, axis=-1))
    np.fill_diagonal(sep, np.inf)
    inv_2sep = (0.5 / sep).astype(np.float32).ravel()
    half_pair = np.broadcast_to(np.float32(half_thickness), (n, n)).astype(np.float32).ravel()
    nearest = idx[:, 0]
    base = nearest * n
    d0_sq = dist[:, 0] ** 2
    best = np.full(len(points), np.inf, np.float32)  # smallest (h - half thickness) so far
    other = idx[:, 1].copy()
    clean = np.zeros(len(points), np.float32)
    for j in range(1, k):
        pair = base + idx[:, j]
        h = ((dist[:, j] ** 2 - d0_sq) * inv_2sep[pair]).astype(np.float32)
        half = half_pair[pair]
        excess = h - half
        closer = excess < best
        best[closer] = excess[closer]
        other[closer] = idx[closer, j]
        np.maximum(clean, soft_wall(h, half, np.float32(step)), out=clean)
    return VoronoiWalls(nearest=nearest, other=other, clean=clean, wall=best < 0)


def pair_half_thickness(rng: np.random.Generator, n: int, thickness: float,
                        spread: float) -> np.ndarray | float:
    """Half wall thickness per pair of seeds: ``thickness / 2`` times a factor drawn
    uniformly in ``[1 - spread, 1 + spread]`` for each pair (one value when spread is 0)."""
    if spread == 0:
        return thickness / 2.0
    factor = rng.uniform(1.0 - spread, 1.0 + spread, size=(n, n))
    factor = np.triu(factor) + np.triu(factor, 1).T
    return thickness / 2.0 * factor
