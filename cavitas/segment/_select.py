"""Feature selection on the cavity tree: the threshold, top-k, and the split rule.

The split rule
--------------
A kept node whose parent is not the outside is a *split*: at its breach an inner wall
opens between it and the rest of an enclosure. Passing the noise threshold only says the
split is not noise; a wall with a wide hole (a perforated foam wall, a pore joined to its
neighbour through a window) passes it too, because blurring raises the hole a few counts
above the two lobes' cores. A split is a chamber boundary only when the inner wall closes
a substantial part of the way up the local wall contrast::

    breach_level[n] - core_level[n]  >=  split_fraction * (breach_level[q] - core_level[n])

where ``q`` is the chamber ``n`` splits from (its parent, or the chamber that parent was
merged into) and ``breach_level[q]`` is where the whole group opens to the rest of the
tree (its weakest outer wall). Both sides are levels of the same neighbourhood measured
from the same core, so the ratio is free of the intensity scale, of offsets and of slow
illumination changes; it lies in (0, 1] because a child always opens before its parent.
Nodes are decided parents first, so a lobe of a merged lobe is tested against the group
that really holds it. Nodes whose parent is the outside are never tested (that wall is the
enclosure's own, judged by the persistence threshold alone).

Measured ratios at the detection scale (invented bench scenes, ``cavitas.scenes``):
complete walls between two chambers 0.82-1.00 (229 splits in 2D sheets, walls 2 pixels,
noise 0.1 and 0.3, ramp 3x, both polarities; 5th percentile 0.91); perforated foam walls
(holes of radius twice the wall thickness) 0.07-0.09 in ``sample_volumes/foam.nii.gz``,
0.07-0.27 with walls 2.5 voxels thick, 0.17-0.88 with walls 2 voxels thick (the detection
smoothing nearly closes their 4-voxel holes). The lower bound is set by designed weak
inner walls that must stay: the two ventricles of the Shepp-Logan phantom (Shepp & Logan
1974) lie in brain tissue at 0.2 of the skull contrast (ratio 0.2), and an enclosure's
inner walls are by definition weaker than its outer wall. The default
:data:`SPLIT_FRACTION` = 0.15 sits below 0.2 and above the holes of the bundled foam. Holes
that smoothing raised above it are found afterwards at the delineation scale, where the two
chambers touch through them (:mod:`cavitas.segment._perforation`).
"""

from __future__ import annotations

import numpy as np

from ..cubical._tree import OUTSIDE, CavityTree

__all__ = ["SPLIT_FRACTION", "close_upward", "persistence_threshold", "select_nodes",
           "split_rule"]

#: Default fraction of the local wall contrast an inner wall must close at to split an
#: enclosure into two chambers (see the module notes for the measurements behind it).
SPLIT_FRACTION = 0.15


def persistence_threshold(*, auto: float | None, absolute: float | None,
                          relative: float | None, robust_range: float) -> float:
    """The strictest of the given persistence criteria (0 when none is given)."""
    values = [0.0]
    if auto is not None:
        values.append(auto)
    if absolute is not None:
        values.append(absolute)
    if relative is not None:
        values.append(relative * robust_range)
    return float(max(values))


def close_upward(keep: np.ndarray, parent: np.ndarray) -> np.ndarray:
    """Add every ancestor of a kept node (nodes are in sweep order: parents come first)."""
    keep = keep.copy()
    for n in range(len(keep) - 1, 0, -1):
        if keep[n]:
            keep[parent[n]] = True
    keep[OUTSIDE] = True
    return keep


def select_nodes(persistence: np.ndarray, parent: np.ndarray, threshold: float,
                 top: int | None, eligible: np.ndarray | None = None) -> np.ndarray:
    """Kept nodes: persistence > 0 and >= ``threshold``, at most ``top`` of them, closed upward.

    ``eligible`` (per node) further restricts the candidates before ``top`` applies.

    Examples
    --------
    >>> pers = np.array([np.inf, 5.0, 0.5, 3.0])
    >>> select_nodes(pers, np.array([-1, 0, 1, 1]), 1.0, None).tolist()
    [True, True, False, True]
    >>> select_nodes(pers, np.array([-1, 0, 1, 1]), 0.0, 1).tolist()
    [True, True, False, False]
    """
    keep = (persistence > 0) & (persistence >= threshold)
    if eligible is not None:
        keep &= eligible
    keep[OUTSIDE] = False
    if top is not None and keep.sum() > top:
        cand = np.flatnonzero(keep)
        best = cand[np.argsort(-persistence[cand], kind="stable")[:top]]
        keep[:] = False
        keep[best] = True
    return close_upward(keep, parent)


def split_rule(tree: CavityTree, keep: np.ndarray, fraction: float,
               open_hosts: np.ndarray | None = None) -> np.ndarray:
    """Drop the kept splits whose inner wall closes below ``fraction`` of the local contrast.

    ``keep`` is closed upward (:func:`select_nodes`); the result is not: a dropped node's
    region joins the chamber it splits from, its kept descendants stay chambers. Nodes in
    ``open_hosts`` (their breach is on closed faces, ``keep_border``) are no wall to compare
    with: splits from them are kept, as splits from the outside are.

    Examples
    --------
    Node 1 opens to the outside at 10 from a core at 0; node 2 (core 1) splits from it
    through a wall closing at 2, node 3 (core 0.5) through a wall closing at 9:

    >>> from types import SimpleNamespace
    >>> tree = SimpleNamespace(parent=np.array([-1, 0, 1, 1]),
    ...                        core_level=np.array([-np.inf, 0.0, 1.0, 0.5]),
    ...                        breach_level=np.array([np.nan, 10.0, 2.0, 9.0]))
    >>> split_rule(tree, np.ones(4, bool), 0.5).tolist()
    [True, True, False, True]
    >>> split_rule(tree, np.ones(4, bool), 0.0).tolist()
    [True, True, True, True]
    """
    keep = keep.copy()
    if fraction <= 0:
        return keep
    parent, core, breach = tree.parent, tree.core_level, tree.breach_level
    host = np.arange(len(keep))  # the chamber each dropped node's region joins
    for n in np.flatnonzero(keep):  # node order: parents come first
        if n == OUTSIDE or parent[n] == OUTSIDE:
            continue
        q = host[parent[n]]
        if open_hosts is not None and open_hosts[q]:
            continue
        if breach[n] - core[n] < fraction * (breach[q] - core[n]):
            keep[n] = False
            host[n] = q
    return keep
