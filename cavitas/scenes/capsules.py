"""Synthetic hollow capsules: spherical shells in a dark medium, some nested, some touching
(invented data, for the demo and benchmarks only)."""

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
    fmt_extent,
    relabel,
    render,
    soft_wall,
)

__all__ = ["capsules"]

#: Outer radii are drawn uniformly in this range, as fractions of the smallest extent.
_RADIUS_RANGE = (0.12, 0.26)
#: Free space kept between capsules that do not touch, in voxels of the coarsest axis.
_GAP = 2.0
#: Placement attempts per capsule before giving up.
_TRIES = 500


def capsules(shape: Sequence[int] = (64, 128, 128), *, count: int = 12, nested: int = 3,
             shell_thickness: float = 2.5, noise: float = 0.1, ramp: float = 1.0,
             walls: str = "bright", touching: int = 2, blur: float = 1.0,
             spacing: Sequence[float] = (1.0, 1.0, 1.0), seed: int = 0) -> Scene:
    """Make hollow spherical capsules in a dark medium (invented data).

    ``count`` capsules of random outer radius (12–26 % of the smallest physical extent) are
    placed wholly inside the scan, at least two voxels apart, except ``touching`` pairs whose
    shells are pressed together (centres ``R1 + R2 - shell_thickness / 2`` apart). The
    ``nested`` largest capsules each hold one smaller capsule (outer radius 0.55 of the host's
    inner radius) placed at random inside, clear of the host's shell. Radii and distances
    are in physical units, so anisotropic spacing gives spheres, not voxel-space balls.

    For the demo and for benchmarks only: the geometry is invented.

    Parameters
    ----------
    shape : sequence of int
        ``(z, y, x)``.
    count : int
        Number of outer capsules; ``truth`` holds ``count + nested`` chambers.
    nested : int
        Number of capsules holding a smaller capsule, at most ``count``.
    shell_thickness : float
        Shell thickness in voxels of the coarsest axis (``shell_thickness * max(spacing)``
        in physical units).
    noise : float
        Standard deviation of the added Gaussian noise, as a fraction of the shell-to-interior
        contrast (1); 0.3 is a hard case.
    ramp : float
        Illumination gain rising linearly from 1 at the first corner to ``ramp`` at the
        opposite one.
    walls : {"bright", "dark"}
        Bright shells on a dark medium (default) or the inverse.
    touching : int
        Number of pairs of capsules whose shells touch, at most ``count // 2``.
    blur : float
        Gaussian blur, standard deviation in voxels.
    spacing : sequence of float
        Voxel size in µm, ``(z, y, x)``.
    seed : int
        Seed of the random generator; the same seed gives the same scene.

    Returns
    -------
    Scene
        ``truth`` labels each voxel with the innermost chamber whose filled region holds
        it: an inner capsule's interior has its own label; the outer capsule's label covers
        the space between the shells *including* the inner capsule's shell; every capsule's
        own shell, and the medium, are 0.

    Notes
    -----
    The image is made in this order: partial-volume shells (1) on 0 → blur → polarity →
    illumination → Gaussian noise.

    Examples
    --------
    >>> scene = capsules((40, 48, 48), count=3, nested=1, touching=1, seed=2)
    >>> scene.n_labels
    4
    """
    params = dict(generator="capsules", shape=shape, count=count, nested=nested,
                  shell_thickness=shell_thickness, noise=noise, ramp=ramp, walls=walls,
                  touching=touching, blur=blur, spacing=spacing, seed=seed)
    shape = check_shape(shape, 3)
    spacing = _checks.spacing(spacing, 3)
    count = check_count("count", count, 1)
    nested = check_count("nested", nested)
    touching = check_count("touching", touching)
    if nested > count:
        raise ParameterError(f"nested must be at most count ({count}); got {nested}.")
    if 2 * touching > count:
        raise ParameterError(f"touching must be at most count // 2 ({count // 2}); "
                             f"got {touching}.")
    check_range("shell_thickness", shell_thickness, 0.5, 20.0)
    check_imaging(noise=noise, ramp=ramp, blur=blur, walls=walls)
    rng = np.random.default_rng(seed)

    step = max(spacing)
    thickness = shell_thickness * step
    extent = np.array(shape) * np.array(spacing)
    low, high = _RADIUS_RANGE
    radii = np.sort(rng.uniform(low, high, count) * extent.min())[::-1]
    inner_min = thickness + 2.5 * step  # an inner capsule keeps an interior >= 2.5 voxels
    host_min = 2 * inner_min + thickness + _GAP * step
    if nested and host_min > extent.min() / 2 - 3 * step:
        raise ParameterError(
            f"nested={nested}: a capsule in this scan is too small to hold another with "
            f"shell_thickness={shell_thickness}; enlarge shape or lower nested or "
            f"shell_thickness."
        )
    radii[:nested] = np.maximum(radii[:nested], host_min)
    centres = _place(rng, radii, extent, step, touching, thickness)
    inner = []
    for k in range(nested):
        r_in = max(inner_min, 0.55 * (radii[k] - thickness))
        room = radii[k] - thickness - _GAP * step - r_in
        offset = rng.standard_normal(3)
        offset *= rng.uniform(0, max(room, 0)) / np.linalg.norm(offset)
        inner.append((centres[k] + offset, r_in))

    shells = [(c, r) for c, r in zip(centres, radii, strict=True)] + inner
    clean = np.zeros(shape)
    truth = np.zeros(shape, np.int32)
    for label, (centre, radius) in enumerate(shells, start=1):  # outer ones painted first
        box, dist = _distance_box(centre, radius, shape, spacing)
        np.maximum(clean[box], soft_wall(np.abs(dist - (radius - thickness / 2)),
                                         thickness / 2, step), out=clean[box])
        truth[box][dist < radius - thickness] = label
    truth = relabel(truth)
    image = render(clean, rng, blur=blur, walls=walls, ramp=ramp, noise=noise)
    cut = border_labels(truth)
    description = (
        f"Synthetic hollow capsules (invented data, for the demo and benchmarks only): "
        f"{count} spherical shells of outer radius {radii.min():.3g}–{radii.max():.3g} µm in "
        f"a dark medium, {nested} holding a smaller capsule, {touching} touching pair(s); "
        f"{truth.max()} chambers in a {'x'.join(map(str, shape))} scan at spacing {spacing} "
        f"µm; shells {shell_thickness} voxels thick, {walls} walls, blur σ={blur} voxels, "
        f"illumination ×1→×{ramp}, Gaussian noise σ={noise} of the shell contrast."
    )
    return Scene(image=image, truth=truth, spacing=spacing, border_labels=cut,
                 description=description, params=params)


def _place(rng: np.random.Generator, radii: np.ndarray, extent: np.ndarray, step: float,
           touching: int, thickness: float) -> np.ndarray:
    """Centres for capsules of ``radii`` (descending) wholly inside ``extent``: random
    pairs from a permutation touch, the rest keep ``_GAP`` voxels apart."""
    n = len(radii)
    partner = np.full(n, -1)
    order = rng.permutation(n)
    for k in range(touching):
        i, j = sorted(order[2 * k: 2 * k + 2])
        partner[j] = i
    centres = np.zeros((n, 3))
    for k in range(n):
        lo = radii[k] + step
        hi = extent - radii[k] - 2 * step
        if np.any(hi <= lo):
            raise ParameterError(
                f"A capsule of radius {radii[k]:.3g} µm does not fit in a scan of "
                f"{fmt_extent(extent)} µm; enlarge shape."
            )
        for _ in range(_TRIES):
            if partner[k] >= 0:
                direction = rng.standard_normal(3)
                direction /= np.linalg.norm(direction)
                c = centres[partner[k]] + direction * (
                    radii[k] + radii[partner[k]] - thickness / 2)
                if np.any(c < lo) or np.any(c > hi):
                    continue
            else:
                c = rng.uniform(lo, hi)
            gaps = np.linalg.norm(centres[:k] - c, axis=1) - radii[:k] - radii[k]
            if partner[k] >= 0:
                gaps[partner[k]] = np.inf
            if np.all(gaps >= _GAP * step):
                centres[k] = c
                break
        else:
            raise ParameterError(
                f"Could not place {n} capsules in a scan of {fmt_extent(extent)} µm "
                f"after {_TRIES} tries for capsule {k + 1}; lower count or enlarge shape."
            )
    return centres


def _distance_box(centre: np.ndarray, radius: float, shape: tuple[int, ...],
                  spacing: tuple[float, ...]) -> tuple[tuple[slice, ...], np.ndarray]:
    """Slices of the voxels within ``radius`` + 2 voxels of ``centre``, and their physical
    distance to it."""
    box, axes = [], []
    for c, n, s in zip(centre, shape, spacing, strict=True):
        start = max(int(np.floor((c - radius) / s)) - 2, 0)
        stop = min(int(np.ceil((c + radius) / s)) + 3, n)
        box.append(slice(start, stop))
        axes.append(np.arange(start, stop) * s - c)
    z, y, x = np.meshgrid(*axes, indexing="ij")
    return tuple(box), np.sqrt(z**2 + y**2 + x**2)

