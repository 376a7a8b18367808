"""The :class:`CavityTree`: merge events of the complement, recorded by the cavity sweep."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["CavityTree", "OUTSIDE"]

#: Node id of the outside (everything connected to the scan or ROI border).
OUTSIDE = 0


@dataclass(frozen=True, eq=False)
class CavityTree:
    """Merge tree of the complement of the wall set, in elder-rule form.

    The cavity sweep visits voxels from the darkest to the brightest (bright walls; the
    reverse for dark walls). Each voxel that touches no visited voxel and not the border
    starts a component: a **node** whose **core** is that voxel. When a voxel joins two or
    more components, every younger one merges into the eldest (the outside is the eldest of
    all); the merging voxel is the younger node's **breach**. Every node but the outside
    merges exactly once, so ``parent`` describes a tree rooted at :data:`OUTSIDE`.

    Node ``i`` is the cavity ``(birth=breach_level[i], death=core_level[i])``: at levels
    between the two, the component of the complement holding ``core[i]`` is enclosed.

    Attributes
    ----------
    shape : tuple of int
        Shape of the image.
    walls : {"bright", "dark"}
        Polarity of the filtration.
    connectivity : int
        Connectivity of the wall set; the complement uses the complementary rule.
    core : (n_nodes,) int64
        Flat index of each node's first (darkest) voxel; ``-1`` for the outside.
    core_level : (n_nodes,) float64
        Image value at the core (``-inf`` for the outside with bright walls, ``+inf`` dark).
    breach : (n_nodes,) int64
        Flat index of the voxel whose arrival merged the node into its parent; ``-1`` for
        the outside.
    breach_level : (n_nodes,) float64
        Image value at the breach (the level at which the enclosure opens).
    parent : (n_nodes,) int64
        The elder node it merged into; ``-1`` for the outside.
    size : (n_nodes,) int64 or None
        Voxels in each node's component just before it merged (its breach region: its own
        voxels and those of the nodes that merged into it first); for the outside, the
        voxels it took. None when the tree was built by hand.

    Notes
    -----
    Nodes are numbered in sweep order, so ``parent[i] < i`` for every ``i > 0`` and the
    core levels are monotone in node id. Nodes of zero persistence (a plateau voxel that
    merges at its own level) are kept: they are harmless to the tree and pruning removes
    them.
    """

    shape: tuple[int, ...]
    walls: str
    connectivity: int
    core: np.ndarray
    core_level: np.ndarray
    breach: np.ndarray
    breach_level: np.ndarray
    parent: np.ndarray
    size: np.ndarray | None = None

    @property
    def n_nodes(self) -> int:
        """Number of nodes, the outside included."""
        return int(self.core.shape[0])

    @property
    def persistence(self) -> np.ndarray:
        """``|breach_level - core_level|`` per node (``inf`` for the outside)."""
        with np.errstate(invalid="ignore"):
            pers = np.abs(self.breach_level - self.core_level)
        pers[OUTSIDE] = np.inf
        return pers
