"""Shells: the wall voxels around a region, optionally thickened, and three-class maps."""

from __future__ import annotations

from typing import Any

import numpy as np
from scipy import ndimage as ndi

from .._errors import ParameterError
from ..cubical._neighbors import dual_connectivity

__all__ = ["INSIDE", "OUTSIDE", "SHELL", "region_mask", "shell", "shell_labels", "three_class"]

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
    """Wall voxels touching region ``label``, then every voxel within ``thickness`` of them.

    "Touching" uses the region's own connectivity (the complement's rule). Thickening uses
    the Euclidean distance in physical units (spacing respected) and never enters a region.
    """
    inside = region_mask(seg, label)
    conn = int(seg.params["connectivity"])
    ring = ndi.binary_dilation(inside, ndi.generate_binary_structure(
        inside.ndim, dual_connectivity(inside.ndim, conn))) & ~inside
    wall = seg.all_labels == 0
    rows = seg.regions
    host = rows["parent"][rows["label"] == label][0]
    if host > 0 and rows["kind"][rows["label"] == host][0] == "chamber":
        wall |= seg.all_labels == host  # a nested chamber's wall was given to its host
    ring &= wall
    if thickness > 0 and ring.any():
        dist = ndi.distance_transform_edt(~ring, sampling=seg.volume.spacing)
        ring = (dist <= thickness) & wall & ~inside
    return ring


def three_class(seg: Any, label: int, *, thickness: float = 0.0) -> np.ndarray:
    """uint8 map of one region: :data:`INSIDE` (1), :data:`SHELL` (2), :data:`OUTSIDE` (0).

    Inside is the region's filled extent (its voxels and everything it encloses).
    """
    inside = ndi.binary_fill_holes(region_mask(seg, label))
    out = np.zeros(inside.shape, np.uint8)
    out[shell(seg, label, thickness=thickness) & ~inside] = SHELL
    out[inside] = INSIDE
    return out


def shell_labels(labels: np.ndarray, spacing: tuple[float, ...],
                 thickness: float) -> np.ndarray:
    """A shell label map: every wall voxel within ``thickness`` (at least one voxel) of a
    region gets the label of the nearest region; shared walls are split half-way.

    Examples
    --------
    >>> lab = np.zeros((1, 7), np.int32); lab[0, 0] = 1; lab[0, 6] = 2
    >>> shell_labels(lab, (1.0, 1.0), 2.0).tolist()
    [[0, 1, 1, 0, 2, 2, 0]]
    """
    from skimage.segmentation import expand_labels

    reach = max(float(thickness), float(max(spacing)))
    grown = expand_labels(labels, distance=reach, spacing=spacing)
    return np.where(labels == 0, grown, 0).astype(labels.dtype)
