"""Pruning the cavity tree into chambers and enclosures.

The :class:`~cavitas.cubical.CavityTree` is the merge tree of the complement in elder-rule
form: when two components meet, the younger node records the meeting voxel (its breach)
and the elder carries on. Pruning keeps the nodes whose persistence passes the selection
(their ancestors pass too: an elder that absorbed a kept node lives at least as long).

Every kept node is a **chamber**, the elder side of a split as well as the younger one.
A split whose inner wall closes low compared with the wall around the group (a wall with a
hole) is dropped before pruning (:func:`cavitas.segment._select.split_rule`): the dropped
node is contracted into its parent, as when its pair is cancelled, so its region is part
of the parent's and its kept children hang from the nearest kept ancestor.
A chamber closes at the first of two events: it merges into its parent, or its first kept
child merges into it. Its region is its component just before that rank (or at a chosen
fraction of the way from its core level to that level).

Each merge of kept nodes forms a group of chambers; the group lives until its next merge.
A group of two or more chambers whose own life (the level where it next merges minus the
level where it formed) passes the same persistence threshold is an **enclosure**: the
chambers it holds are joined through walls clearly weaker than the wall around them.

::

    level (bright walls: the sweep rises)
      ^
    b3+ - - - - - - - - - - - -+-------- E = {A, B} joins the outside at b3
      |                        |
    b2+ - - - - - - - -+-------|-------- C joins the outside at b2 (C closes at b2)
      |                |       |
    b1+ - - -+---------|-------+         B merges into A at b1: A and B both close at
      |      |         |       |         b1; the group E forms at b1 and lives until b3
      |      |         |       |         (an enclosure if b3 - b1 passes the threshold)
      |      B         C       A
      +-------------------------------> core levels: A (the elder) < B, C

Chambers: A, B, C. Enclosure: E (kept when its life b3 - b1 passes the threshold).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..cubical._tree import OUTSIDE, CavityTree

__all__ = ["Hierarchy", "prune"]


@dataclass(frozen=True)
class Hierarchy:
    """Chambers and enclosures of a pruned tree; levels are positions in ``order``.

    Ids: chambers are ``1..n_chambers`` (in node order), enclosures follow
    (``n_chambers + 1 ...``); ``parent`` uses the same ids, 0 meaning the outside.
    """

    node: np.ndarray          # (n,) tree node at the root of each region
    close_rank: np.ndarray    # (n,) rank where the region closes (its level)
    formed_rank: np.ndarray   # (n,) rank where it formed (core rank for chambers)
    parent: np.ndarray        # (n,) id of the enclosing enclosure, 0 = outside
    n_chambers: int

    @property
    def n_enclosures(self) -> int:
        """Number of kept enclosures."""
        return int(self.node.shape[0]) - self.n_chambers


def prune(tree: CavityTree, keep: np.ndarray, rank_of: np.ndarray, level_of_rank,
          threshold: float) -> Hierarchy:
    """Chambers (kept nodes but the outside) and enclosures of ``tree``.

    Parameters
    ----------
    tree : CavityTree
    keep : (n_nodes,) bool
        Kept nodes, closed under ancestors but for the nodes the split rule dropped
        (:func:`cavitas.segment._select.split_rule`): those are contracted into their
        parent, and their kept descendants attach to the nearest kept ancestor.
    rank_of : (n_voxels,) int array
        Position of each voxel in the sweep order.
    level_of_rank : callable
        Sweep value (polarity applied) at given ranks, for enclosure lifetimes.
    threshold : float
        Persistence an enclosure's own life must reach to be kept.
    """
    parent = tree.parent
    nodes = np.flatnonzero(keep)
    nodes = nodes[nodes != OUTSIDE]
    n_ch = len(nodes)
    merge_rank = np.full(tree.n_nodes, np.iinfo(np.int64).max, np.int64)
    has_breach = tree.breach >= 0
    merge_rank[has_breach] = rank_of[tree.breach[has_breach]]
    kept_parent, merge_rank = _kept_ancestors(parent, merge_rank, keep, nodes)
    chamber_id = np.full(tree.n_nodes, -1, np.int64)
    chamber_id[nodes] = np.arange(n_ch)
    inner = kept_parent != OUTSIDE
    core_rank = rank_of[tree.core[nodes]] if n_ch else np.zeros(0, np.int64)

    # Groups: replay the merges of kept nodes in rank order.
    group_of = np.arange(n_ch)            # union-find over chambers
    current = list(range(n_ch))           # candidate id of each group root
    cand_node = list(nodes)
    cand_formed = list(core_rank)
    cand_size = [1] * n_ch
    cand_end = [0] * n_ch
    cand_parent = [-1] * n_ch

    def find(a: int) -> int:
        while group_of[a] != a:
            group_of[a] = group_of[group_of[a]]
            a = group_of[a]
        return a

    for j in np.argsort(merge_rank, kind="stable"):
        rank = int(merge_rank[j])
        gj = find(int(j))
        cj = current[gj]
        cand_end[cj] = rank
        if not inner[j]:
            continue
        gp = find(int(chamber_id[kept_parent[j]]))
        cp = current[gp]
        cand_end[cp] = rank
        new = len(cand_node)
        cand_node.append(cand_node[cp] if cand_node[cp] < cand_node[cj] else cand_node[cj])
        cand_formed.append(rank)
        cand_size.append(cand_size[cp] + cand_size[cj])
        cand_end.append(0)
        cand_parent.append(-1)
        cand_parent[cj] = cand_parent[cp] = new
        group_of[gj] = gp
        current[gp] = new

    end_rank = np.asarray(cand_end, np.int64)
    formed_rank = np.asarray(cand_formed, np.int64)
    life = np.zeros(len(cand_node))
    if len(cand_node) > n_ch:
        enc = slice(n_ch, None)
        life[enc] = np.abs(level_of_rank(end_rank[enc]) - level_of_rank(formed_rank[enc]))
    kept_cand = np.arange(len(cand_node)) < n_ch
    kept_cand |= (np.asarray(cand_size) >= 2) & (life >= threshold)
    new_id = np.cumsum(kept_cand)  # 1-based ids of kept candidates
    parent_id = np.zeros(len(cand_node), np.int64)
    for c in range(len(cand_node) - 1, -1, -1):  # parents have larger candidate ids
        p = cand_parent[c]
        while p >= 0 and not kept_cand[p]:
            p = cand_parent[p]
        parent_id[c] = new_id[p] if p >= 0 else 0
    idx = np.flatnonzero(kept_cand)
    return Hierarchy(
        node=np.asarray(cand_node, np.int64)[idx],
        close_rank=end_rank[idx],
        formed_rank=formed_rank[idx],
        parent=parent_id[idx],
        n_chambers=n_ch,
    )


def _kept_ancestors(parent: np.ndarray, merge_rank: np.ndarray, keep: np.ndarray,
                    nodes: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Nearest kept ancestor of each of ``nodes`` and the rank where it is reached.

    With ``keep`` closed upward this is the parent and the node's own merge rank. A node
    dropped by the split rule is contracted into its parent, as when its pair is cancelled:
    a kept descendant then reaches the kept ancestor only where the dropped node merged
    (ranks grow towards the root, so the last step of the chain is the largest).
    """
    up = parent[nodes].copy()
    rank = merge_rank[nodes].copy()
    for i in np.flatnonzero((up != OUTSIDE) & ~keep[up]):
        p = up[i]
        while p != OUTSIDE and not keep[p]:
            rank[i] = merge_rank[p]
            p = parent[p]
        up[i] = p
    return up, rank
