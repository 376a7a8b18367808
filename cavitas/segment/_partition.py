"""The partition: every voxel of the specimen given to a region, walls split at their ridge.

The label map keeps walls at 0: a cell is its inside. Tissue, foam and EM users often want
the tiling instead, where a cell owns its half of every wall it shares (the cell's volume
in the sense of a Voronoi tessellation of a foam or a membrane-bounded cell). The wall
between two regions is split along its ridge line, the line of highest wall signal, found
by flooding the image from the regions (a marker-controlled watershed, Beucher & Meyer
1993) on the image smoothed at the delineation scale. The background (the medium around
the specimen, regions not shown, beyond the ROI) floods too, as one more marker, so the
outer wall of the specimen is split between the cells and the background, and the
background stays 0.
"""

from __future__ import annotations

import numpy as np

__all__ = ["partition_map"]


def partition_map(labels: np.ndarray, image: np.ndarray, background: np.ndarray) -> np.ndarray:
    """Grow ``labels`` over the walls up to their ridge line in ``image`` (walls high).

    Parameters
    ----------
    labels : ndarray of int
        Regions ``1..n``; walls 0.
    image : ndarray of float
        The image with walls high, same shape.
    background : ndarray of bool
        Voxels that belong to no region and are no wall; they take part in the flooding
        and stay 0.

    Returns
    -------
    ndarray
        Same dtype as ``labels``: every wall voxel holds the region on its side of the
        ridge, or 0 on the background's side. A ridge voxel goes to the side that
        reaches it first.

    Examples
    --------
    >>> lab = np.array([[1, 1, 0, 0, 0, 0, 2]])
    >>> img = np.array([[0, 0, 2, 5, 4, 3, 0]], float)  # the ridge: the 5
    >>> partition_map(lab, img, np.zeros(lab.shape, bool)).tolist()
    [[1, 1, 1, 1, 2, 2, 2]]
    """
    from skimage.segmentation import watershed

    n = int(labels.max(initial=0))
    markers = labels.astype(np.int32 if n < np.iinfo(np.int32).max - 1 else np.int64)
    markers[background & (labels == 0)] = n + 1
    if n == 0 or not (markers == 0).any():
        grown = markers
    else:
        grown = watershed(image, markers)
    grown[grown == n + 1] = 0
    return grown.astype(labels.dtype, copy=False)
