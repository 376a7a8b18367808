"""Splits into two cell-sized parts: weaker walls suffice where a region is too large.

The threshold is one number for the whole image, set so that noise is rare among the
regions. A wall between two neighbouring cells can dip at one point to the noise level
(dim illumination, a thin membrane): the smaller cell's cavity then stands just below the
threshold and the two cells make one region, about twice the typical size. Noise
cavities inside one cell are small at the detection scale (measured below), so a cavity
below the threshold that holds a cell's worth of voxels, inside a region that keeps a
cell's worth beside it, is the better explanation of an oversized region: two cells.

The rule applies where the noise is white (the false discovery rule's regime,
:mod:`cavitas.segment._discovery`); texture and organelles make cell-sized cavities inside
cells. A node is promoted when it

* passes the class test and lies below the threshold but at least
  :data:`WEAK_WALL_FRACTION` of it,
* holds at least :data:`CELL_FRACTION` of the typical region's voxels (the area-weighted
  median, :func:`_evidence.typical_size`, of the regions passing every test, each less
  the regions nested in it), and
* lies in a region (its nearest passing ancestor, less that ancestor's other passing
  descendants) of at least :data:`OVERSIZE` times the typical size that keeps at least
  :data:`CELL_FRACTION` of it without the node;

the strongest first, each promotion taking its voxels from its region.

Measured on the invented hard sheets of ``bench/segment_accuracy.py`` (400 cells of 10-16
pixels, 2-pixel walls, a 0.35-1 gain), against the label map's regions: at noise 0.3 of
the contrast (seeds 0 and 1, both polarities), the cavities of the second cell of a merged
pair stood at 0.3-0.97 of the threshold and held 0.05-0.59 of a typical region (most above
0.25) in regions of 1.1-3.2 typical ones; noise cavities inside one cell held at most
0.24. With the rule, dark walls at noise 0.3 (seeds 0-3; 2 and 3 were not looked at while
designing it): 91.5 / 90.1 / 86.1 / 86.9 % found -> 95.6 / 94.9 / 92.0 / 93.1 %, spurious
3.9 / 5.3 / 6.6 / 6.4 % -> 1.9 / 3.2 / 4.2 / 3.2 %; at noise 0.18 the one spurious region
of seed 0 goes. The size conditions keep noise out, not the persistence: a weak-wall
fraction of 0.35-0.45 gave the same, 0.5-0.7 lost up to 2 points (the weaker wall of many
merged pairs stands at 0.45-0.55 of the threshold), and cell fractions of 0.2-0.3 or
oversize 1.15-1.5 moved found by less than a point on average. Bright walls gain little
(seed 1: 96.5 -> 97.1 %): their merged cells fail the class test (in the dim corner the
dipping wall lies below the wall class), and admitting cavities that fail it split a cell
at noise 0.18, so they stay out. Every other scene of the bench and every real scan of
``bench/real_scans.py`` is unchanged.
"""

from __future__ import annotations

import numpy as np

from ..cubical._tree import OUTSIDE
from ._evidence import typical_size

__all__ = ["CELL_FRACTION", "OVERSIZE", "WEAK_WALL_FRACTION", "cell_sized_splits"]

#: Least persistence, as a fraction of the threshold, of a cell-sized split.
WEAK_WALL_FRACTION = 0.4
#: Least size of each part, as a fraction of the typical region.
CELL_FRACTION = 0.25
#: Least size of the region split, as a multiple of the typical region.
OVERSIZE = 1.3


def cell_sized_splits(parent: np.ndarray, persistence: np.ndarray, size: np.ndarray,
                      passing: np.ndarray, eligible: np.ndarray, threshold: float
                      ) -> np.ndarray:
    """Nodes below ``threshold`` that split an oversized region into cell-sized parts.

    Parameters
    ----------
    parent, persistence, size : (n_nodes,) arrays
        The cavity tree's parents (parents before children), persistence and voxels per
        node (its region where it joins its parent).
    passing : (n_nodes,) bool
        Nodes passing every test (the regions).
    eligible : (n_nodes,) bool
        Nodes passing the class test.
    threshold : float
        The persistence threshold.

    Returns
    -------
    (n_nodes,) bool
        The nodes to promote.

    Examples
    --------
    Node 1 is a region of 200 voxels; nodes 4 and 5, regions of 100, make the typical
    region 100 voxels. Node 2 holds 60 voxels of node 1 at 0.7 of the threshold, node 3
    only 10:

    >>> parent = np.array([-1, 0, 1, 1, 0, 0])
    >>> pers = np.array([np.inf, 5.0, 0.7, 0.9, 5.0, 5.0])
    >>> size = np.array([0, 200, 60, 10, 100, 100])
    >>> passing = np.array([False, True, False, False, True, True])
    >>> cell_sized_splits(parent, pers, size, passing, np.ones(6, bool), 1.0).tolist()
    [False, False, True, False, False, False]
    """
    promote = np.zeros(len(parent), bool)
    host = _nearest_passing(parent, passing)
    own = np.where(passing, size, 0).astype(np.float64)
    for n in np.flatnonzero(passing):
        if n != OUTSIDE and host[n] != OUTSIDE:
            own[host[n]] -= size[n]
    regions = passing.copy()
    regions[OUTSIDE] = False
    if threshold <= 0 or not regions.any():
        return promote
    typical = typical_size(own[regions])
    cell = CELL_FRACTION * typical
    candidates = np.flatnonzero(
        ~passing & eligible & (persistence < threshold)
        & (persistence >= WEAK_WALL_FRACTION * threshold) & (size >= cell))
    for n in candidates[np.argsort(-persistence[candidates], kind="stable")]:
        h = host[n]
        if h == OUTSIDE or own[h] < OVERSIZE * typical or own[h] - size[n] < cell:
            continue
        if _has_promoted_ancestor(n, h, parent, promote):
            continue
        promote[n] = True
        own[h] -= size[n]
    return promote


def _nearest_passing(parent: np.ndarray, passing: np.ndarray) -> np.ndarray:
    """Each node's nearest passing proper ancestor (``OUTSIDE`` at the top)."""
    host = np.full(len(parent), OUTSIDE, np.int64)
    for n in range(1, len(parent)):  # parents come first
        p = int(parent[n])
        if p != OUTSIDE:
            host[n] = p if passing[p] else host[p]
    return host


def _has_promoted_ancestor(node: int, host: int, parent: np.ndarray,
                           promote: np.ndarray) -> bool:
    """Whether a node between ``node`` and ``host`` was promoted already."""
    n = int(parent[node])
    while n != host and n != OUTSIDE:
        if promote[n]:
            return True
        n = int(parent[n])
    return False
