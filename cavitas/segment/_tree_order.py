"""Pruning a cavity tree without the sweep order (:func:`prune_by_levels`).

:func:`._tree.prune` reads the sweep order only at the voxels the tree names, its cores and
breaches: it sorts the merges by the ranks of their breaches, takes a chamber's formation
at its core's rank and measures an enclosure's life between two of those ranks. Those
voxels sorted as the sweep sorts them (value, then flat index) rank them the same way, so
the tree alone gives the same hierarchy, with positions in that shorter order in place of
ranks, and every close level (the value at such a position). That is what a chunked volume
has: the tree of :mod:`cavitas.cubical._chunked_tree` and no order.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..cubical._tree import CavityTree
from ._tree import Hierarchy, prune

__all__ = ["PrunedLevels", "prune_by_levels"]


@dataclass(frozen=True)
class PrunedLevels:
    """:func:`._tree.prune`'s hierarchy from the tree alone.

    ``hier``'s ranks are positions among the tree's cores and breaches in sweep order;
    ``close_level`` and ``formed_level`` are the values (the input's units) they stand for:
    ``close_level`` is what :func:`cavitas.segment._chunked_regions.chunked_nested_map`
    takes; ``voxel`` is the voxel at each of those positions (what the sweep order holds
    at the rank it stands for).
    """

    hier: Hierarchy
    close_level: np.ndarray
    formed_level: np.ndarray
    voxel: np.ndarray


def prune_by_levels(tree: CavityTree, keep: np.ndarray, threshold: float) -> PrunedLevels:
    """:func:`._tree.prune` of ``tree`` without the sweep order (see the module notes).

    Examples
    --------
    >>> from cavitas.cubical import cavity_sweep
    >>> two = np.array([[9, 9, 9, 9, 9], [9, 1, 5, 2, 9], [9, 9, 9, 9, 9]], np.uint8)
    >>> tree = cavity_sweep(two)[1]
    >>> pruned = prune_by_levels(tree, tree.persistence >= 3, 3.0)
    >>> pruned.hier.node.tolist(), pruned.close_level.tolist()
    ([1, 2, 1], [5.0, 5.0, 9.0])
    """
    named = tree.breach[1:] >= 0
    voxel = np.concatenate((tree.core[1:], tree.breach[1:][named]))
    value = np.concatenate((tree.core_level[1:], tree.breach_level[1:][named]))
    key = value if tree.walls == "bright" else -value
    voxel, first = np.unique(voxel, return_index=True)
    by_sweep = np.lexsort((voxel, key[first]))
    rank = np.empty(voxel.size, np.int64)
    rank[by_sweep] = np.arange(voxel.size)
    level = value[first][by_sweep]

    def position(voxels: np.ndarray) -> np.ndarray:
        found = np.full(voxels.shape, -1, np.int64)
        named = voxels >= 0
        found[named] = rank[np.searchsorted(voxel, voxels[named])]
        return found

    ranked = replace(tree, core=position(tree.core), breach=position(tree.breach))
    # prune's life of an enclosure is an absolute difference: the input's units will do
    hier = prune(ranked, keep, np.arange(voxel.size), lambda ranks: level[ranks], threshold)
    return PrunedLevels(hier, level[hier.close_rank], level[hier.formed_rank], voxel[by_sweep])
