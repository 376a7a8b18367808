"""Shells: the wall voxels around a region, optionally thickened, and three-class maps."""

from __future__ import annotations

from typing import Any

import numpy as np
from scipy import ndimage as ndi

from .._errors import ParameterError

__all__ = ["INSIDE", "OUTSIDE", "SHELL", "region_mask", "shell", "shell_labels", "three_class",
           "touching_walls"]

#: Values of :func:`three_class`.
OUTSIDE, INSIDE, SHELL = 0, 1, 2


def region_mask(seg: Any, label: int) -> np.ndarray:
    """Boolean mask of region ``label`` (chambers and border-cut regions; enclosures too)."""
    table = seg.regions
    if label not in set(table["label"].tolist()):
        raise ParameterError(f"label {label} is not a region of this segmentation; labels "
                             f"run from 1 to {len(table)}.")
    kind = table["kind"][table["label"] == label][0]
    source = seg.enclosure_labels() if kind == "enclosure" else seg.all_labels
    return source == label


def shell(seg: Any, label: int, *, thickness: float = 0.0) -> np.ndarray:
    """The shell of region ``label``: wall voxels sharing a face with it, then every wall
    voxel within ``thickness`` (physical units, spacing respected) of those.

    One definition for :meth:`Segmentation.shell`, the shell map (:func:`shell_labels`) and
    the shell columns of the regions table (:func:`cavitas.measure.measure_regions`). Walls
    are the voxels of no region (label 0 of the map of chambers and border-cut regions); a
    chamber nested in another (a capsule in a capsule) has its wall in its host's label
    (:func:`~cavitas.segment._regions.fill_islands`), and that counts as its wall here.
    """
    inside = region_mask(seg, label)
    wall = seg.all_labels == 0
    rows = seg.regions
    host = rows["parent"][rows["label"] == label][0]
    if host > 0 and rows["kind"][rows["label"] == host][0] == "chamber":
        wall |= seg.all_labels == host  # a nested chamber's wall was given to its host
    return _thickened(touching_walls(inside, wall), wall & ~inside, seg.volume.spacing,
                      thickness)


def touching_walls(inside: np.ndarray, wall: np.ndarray) -> np.ndarray:
    """Voxels of ``wall`` that share a face with ``inside``.

    Examples
    --------
    >>> inside = np.zeros((3, 3), bool); inside[1, 1] = True
    >>> touching_walls(inside, ~inside).astype(int).tolist()
    [[0, 1, 0], [1, 0, 1], [0, 1, 0]]
    """
    faces = ndi.generate_binary_structure(inside.ndim, 1)
    return ndi.binary_dilation(inside, faces) & wall & ~inside


def _thickened(ring: np.ndarray, allowed: np.ndarray, spacing: tuple[float, ...],
               thickness: float) -> np.ndarray:
    """``ring`` and every ``allowed`` voxel within ``thickness`` of it."""
    if thickness <= 0 or not ring.any():
        return ring
    dist = ndi.distance_transform_edt(~ring, sampling=spacing)
    return ring | ((dist <= thickness) & allowed)


def three_class(seg: Any, label: int, *, thickness: float = 0.0) -> np.ndarray:
    """uint8 map of one region: :data:`INSIDE` (1), :data:`SHELL` (2), :data:`OUTSIDE` (0).

    Inside is the region's filled extent (its voxels and everything it encloses).
    """
    inside = ndi.binary_fill_holes(region_mask(seg, label))
    out = np.zeros(inside.shape, np.uint8)
    out[shell(seg, label, thickness=thickness) & ~inside] = SHELL
    out[inside] = INSIDE
    return out


def shell_labels(labels: np.ndarray, spacing: tuple[float, ...], thickness: float,
                 walls: np.ndarray | None = None) -> np.ndarray:
    """The shell map: each region's shell (see :func:`shell`) in its label.

    Wall voxels sharing a face with a region, and every wall voxel within ``thickness`` of
    those, take the label of the nearest region. A wall voxel in two shells (a wall one
    voxel thick between two regions) shows the nearer, or either at equal distance; the
    regions table counts it for both. ``walls`` defaults to ``labels == 0``.

    Examples
    --------
    >>> lab = np.zeros((1, 7), np.int32); lab[0, 0] = 1; lab[0, 6] = 2
    >>> shell_labels(lab, (1.0, 1.0), 0.0).tolist()
    [[0, 1, 0, 0, 0, 2, 0]]
    >>> shell_labels(lab, (1.0, 1.0), 1.0).tolist()
    [[0, 1, 1, 0, 2, 2, 0]]
    """
    wall = labels == 0 if walls is None else walls & (labels == 0)
    ring = _thickened(touching_walls(labels > 0, wall), wall, spacing, thickness)
    if not ring.any():
        return np.zeros_like(labels)
    nearest = ndi.distance_transform_edt(labels == 0, sampling=spacing,
                                         return_distances=False, return_indices=True)
    return np.where(ring, labels[tuple(nearest)], 0).astype(labels.dtype)
