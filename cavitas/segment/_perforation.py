"""Perforated inner walls: chambers that touch each other through a hole at the fine scale.

The split rule (:mod:`cavitas.segment._select`) judges an inner wall by the level at which
it closes at the *detection* scale. Smoothing at that scale can nearly close a hole in a
wall (a ruptured foam wall, a window between two pores), so the wall looks complete and
the cell is cut in two. At the delineation scale (0.5 voxel) the hole is open: after walls
are removed (:func:`cavitas.segment._regions.remove_walls`) the two chambers touch each
other directly through it, face to face with no wall voxel between them. Chambers
separated by a complete wall touch only where noise punched a voxel-wide gap.

Two tests, both on the chamber map after wall removal and the delineation image:

* **contact**: the voxel faces the two chambers share, over the cross-section scale of the
  smaller one, ``volume ** ((d - 1) / d)`` (voxels), at least :data:`PERFORATION_CONTACT`;
* **depth**: the 10 % quantile of the shared faces' heights (a face's height is the higher
  of its two voxels) lies at most :data:`PERFORATION_DEPTH` of the way from the chambers'
  interior median to their wall cut level. A hole is filled with what fills the chambers;
  a faint but complete inner wall, which the cut may leave inside both chambers, is not.

Measured on invented bench foams (``cavitas.scenes.foam``, 64³, walls 2.5 voxels, holes of
radius twice the wall thickness, noise 0.1 and 0.3, both polarities): through holes,
contact 0.73-1.11 and depth -0.31 to -0.19 (7 walls); across complete walls, contact at
most 0.26 (136 chamber pairs). The faint complete walls of ``tests/test_segment_split.py``
(0.2 of the rim contrast, the Shepp-Logan ventricles' ratio) touch with contact 0.76-1.07
but depth 0.27-0.28, and stay.
"""

from __future__ import annotations

import numpy as np

from ..cubical._tree import OUTSIDE
from ._regions import _label_quantile

__all__ = ["HEIGHT_QUANTILE", "PERFORATION_CONTACT", "PERFORATION_DEPTH", "chamber_contacts",
           "perforated_splits"]

#: Shared faces over the smaller chamber's ``volume ** ((d - 1) / d)`` at and above which
#: two chambers are one region seen through a perforated wall.
PERFORATION_CONTACT = 0.45

#: Highest low-quantile height of the shared faces, from the chambers' interior median
#: (0) to their wall cut level (1), for a contact to count as a hole.
PERFORATION_DEPTH = 0.05

#: The quantile of the face heights that stands for the open part of a contact.
HEIGHT_QUANTILE = 0.1

#: Planes per slab when counting contacts (no full-size temporaries).
_SLAB = 32


def chamber_contacts(labels: np.ndarray, n_chambers: int, image: np.ndarray
                     ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Pairs of chambers that share voxel faces, how many, and how high those faces are.

    Parameters
    ----------
    labels : ndarray of int
        Chambers ``1..n_chambers``; 0 and labels above ``n_chambers`` are not chambers.
    n_chambers : int
    image : ndarray
        Intensities with walls high; a face's height is the higher of its two voxels.

    Returns
    -------
    pairs : (k, 2) int64
        ``(a, b)`` with ``a < b``.
    faces : (k,) int64
    height : (k,) float64
        The :data:`HEIGHT_QUANTILE` quantile of each pair's face heights (the value at
        rank ``floor(q * (count - 1))``): the open part of the contact.

    Examples
    --------
    >>> lab = np.array([[1, 1, 2], [1, 0, 2], [3, 3, 3]])
    >>> img = np.arange(9.0).reshape(3, 3)
    >>> pairs, faces, height = chamber_contacts(lab, 3, img)
    >>> pairs.tolist(), faces.tolist(), height.tolist()
    ([[1, 2], [1, 3], [2, 3]], [1, 1, 1], [2.0, 6.0, 8.0])
    """
    width = np.int64(n_chambers + 1)
    keys, heights = [], []

    def collect(lo, hi, vlo, vhi):
        touch = (lo != hi) & (lo > 0) & (hi > 0) & (lo <= n_chambers) & (hi <= n_chambers)
        x, y = lo[touch].astype(np.int64), hi[touch].astype(np.int64)
        keys.append(np.minimum(x, y) * width + np.maximum(x, y))
        heights.append(np.maximum(vlo[touch], vhi[touch]).astype(np.float64))

    n0 = labels.shape[0]
    for start in range(0, n0, _SLAB):
        own, val = labels[start:start + _SLAB], image[start:start + _SLAB]
        for axis in range(1, labels.ndim):  # faces within the slab's planes
            a, v = np.moveaxis(own, axis, 0), np.moveaxis(val, axis, 0)
            collect(a[:-1], a[1:], v[:-1], v[1:])
        stop = min(start + _SLAB + 1, n0)  # faces across planes, and to the next slab
        a, v = labels[start:stop], image[start:stop]
        collect(a[:-1], a[1:], v[:-1], v[1:])
    key, height = np.concatenate(keys), np.concatenate(heights)
    order = np.lexsort((height, key))
    key, height = key[order], height[order]
    uniq, first, faces = np.unique(key, return_index=True, return_counts=True)
    low = height[first + np.floor(HEIGHT_QUANTILE * (faces - 1)).astype(np.int64)]
    return np.column_stack([uniq // width, uniq % width]), faces.astype(np.int64), low


def perforated_splits(labels: np.ndarray, image: np.ndarray, cut_level: np.ndarray,
                      chamber_nodes: np.ndarray, parent: np.ndarray, keep: np.ndarray, *,
                      contact: float = PERFORATION_CONTACT,
                      depth: float = PERFORATION_DEPTH) -> np.ndarray:
    """Kept split nodes to drop because their chamber touches its host through a hole.

    Parameters
    ----------
    labels : ndarray of int
        Chamber map after wall removal (chamber ``i`` is tree node ``chamber_nodes[i - 1]``).
    image : ndarray
        The delineation image the walls were removed on (walls high).
    cut_level : (n,) float array
        The level each chamber's walls were cut at.
    chamber_nodes : (n,) int array
        Tree node of each chamber label.
    parent : (n_nodes,) int array
        The cavity tree's parent pointers.
    keep : (n_nodes,) bool
        Nodes kept after the split rule.
    contact : float
        Least shared faces over the smaller chamber's cross-section scale.
    depth : float
        Highest low-quantile face height (:func:`chamber_contacts`), as a fraction of the
        way from the two chambers' interior median to their cut level: a hole is as dark
        as the chambers, a faint but complete wall that the cut left in both is not.

    Returns
    -------
    (n_nodes,) bool
        Nodes to drop: for each touching pair, the chamber whose nearest kept ancestor is
        the other one (so that dropping it joins the two). Pairs with no such relation
        (two siblings) are left as they are.
    """
    drop = np.zeros(len(keep), bool)
    n_ch = len(chamber_nodes)
    if n_ch < 2:
        return drop
    chambers = np.where(labels <= n_ch, labels, 0)
    pairs, faces, height = chamber_contacts(chambers, n_ch, image)
    if not len(pairs):
        return drop
    volumes = np.bincount(chambers.ravel(), minlength=n_ch + 1).astype(float)
    interior = np.concatenate([[np.nan], _label_quantile(image, chambers, n_ch, 0.5)])
    level = np.concatenate([[np.nan], np.asarray(cut_level, float)])
    a, b = pairs[:, 0], pairs[:, 1]
    scale = np.minimum(volumes[a], volumes[b]) ** ((labels.ndim - 1) / labels.ndim)
    floor = (interior[a] + interior[b]) / 2
    top = (level[a] + level[b]) / 2
    holes = (faces >= contact * np.maximum(scale, 1.0)) & (
        height - floor <= depth * (top - floor))
    for u, v in chamber_nodes[pairs[holes] - 1]:
        if _kept_ancestor(v, parent, keep) == u:
            drop[v] = True
        elif _kept_ancestor(u, parent, keep) == v:
            drop[u] = True
    return drop


def _kept_ancestor(node: int, parent: np.ndarray, keep: np.ndarray) -> int:
    """The nearest kept proper ancestor of ``node`` (``OUTSIDE`` at the top)."""
    n = int(parent[node])
    while n != OUTSIDE and not keep[n]:
        n = int(parent[n])
    return n
