"""The cavity tree of a chunked volume, chunk by chunk on Dask workers.

:func:`chunked_cavity_tree` is to :func:`~cavitas.cubical.cavity_sweep` what
:func:`._chunked.chunked_persistence` is to :func:`~cavitas.cubical.persistence`.

The result equals :func:`~cavitas.cubical.cavity_sweep`'s tree field for field: every node
(those of zero persistence too), its core and breach with their levels, its parent and its
size. Two passes over the chunks:

1. **Merges.** The chunk sweeps and joins of :mod:`._chunked` (cavity sweep only) also
   record every death they settle, of zero persistence too (:class:`._boundary.MergeRecords`):
   the dying root (a core: every node but the outside dies exactly once), the breach and
   an *anchor*, the eldest root it merged into there. A seam voxel found not to start a
   component, when it leaves the seams, is *redirected* to the root it joined. On the
   client the cores sorted in sweep order are the nodes; the parent of a node is the
   root, right after its breach, of its anchor's component (:func:`._tree_kernels.link_parents`
   takes the deaths in breach order with a union-find over the nodes). Nothing is held by
   the joins beyond their boundary trees: the records go straight to the client.
2. **Owners and sizes.** A voxel's *owner* is the node that is its component's root right
   after it arrives; a node's size is the voxels it owns plus its children's sizes. Which
   node owns a voxel of a component that reached a seam depends on the whole volume at
   that voxel's level, which no boundary tree keeps (only its levels at the nodes), so each
   chunk is swept once more (:func:`sweep_again`, :func:`._tree_kernels.chunk_owners`)
   with its cores and the ancestors of its seam components' roots (small tables, sent
   with the task) and returns one count per node it met.

:class:`ChunkedTree` keeps those tables with the tree, so later passes over the chunks
(the nested region labels of :mod:`cavitas.segment._chunked_regions`) sweep each chunk
again and get every voxel's owner, without the global sweep order.

Memory: a chunk task holds what a chunk sweep of :mod:`._chunked` holds; a join, two
boxes' boundary trees; the client, the records (40 bytes per node) and, while it builds
the tree, about a dozen arrays of 8 bytes per node (a count of arrays, not a measurement).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from .._checks import refuse_nonfinite
from ._boundary import Box, MergeRecords, PairRows, Summary, SweepPlan
from ._chunked import (
    _boxes,
    _plan,
    chunk_window,
    lazy_image,
    lazy_mask_blocks,
    swept_here,
    swept_on_dask,
)
from ._neighbors import dual_connectivity, neighbor_offsets
from ._sort import engine_array, sort_voxels
from ._tree import CavityTree
from ._tree_kernels import ancestors, chunk_owners, link_parents, subtree_sizes

__all__ = ["ChunkArrivals", "ChunkChains", "ChunkedTree", "cavity_tree_in_chunks",
           "chunked_cavity_tree", "sweep_again", "tree_chunks_here", "tree_chunks_on_dask"]


@dataclass(frozen=True)
class _Skeleton:
    """The tree without sizes, node 0 the outside; ``core_order`` sorts ``core[1:]`` by
    voxel (for finding a node by its core)."""

    core: np.ndarray
    core_level: np.ndarray
    breach: np.ndarray
    breach_level: np.ndarray
    parent: np.ndarray
    core_order: np.ndarray
    redirects: tuple[np.ndarray, np.ndarray]

    def node_of(self, voxels: np.ndarray) -> np.ndarray:
        """The node whose core is each voxel (the outside for ``-1``), ``-1`` if none."""
        cores = self.core[1:][self.core_order]
        out = np.where(voxels == -1, 0, -1).astype(np.int64)
        if len(cores):
            at = np.minimum(np.searchsorted(cores, voxels), len(cores) - 1)
            found = cores[at] == voxels
            out[found] = self.core_order[at[found]] + 1
        return out

    def resolved(self, voxels: np.ndarray) -> np.ndarray:
        """The node of each voxel's component from its arrival on: its own if it is a core,
        else the node its redirects lead to."""
        sources, targets = self.redirects
        nodes = self.node_of(voxels)
        voxels = voxels.copy()
        for _ in range(len(sources) + 1):
            missing = np.flatnonzero(nodes < 0)
            if not len(missing):
                return nodes
            at = np.searchsorted(sources, voxels[missing])
            if np.any(at >= len(sources)) or np.any(sources[np.minimum(
                    at, len(sources) - 1)] != voxels[missing]):
                break
            voxels[missing] = targets[at]
            nodes[missing] = self.node_of(voxels[missing])
        raise RuntimeError("chunked cavity tree: a root is neither a core nor redirected")


def _sweep_order(value: np.ndarray, voxel: np.ndarray, bright: bool) -> np.ndarray:
    """Indices sorting ``(value, voxel)`` in cavity-sweep order: value increasing for
    bright walls, decreasing for dark ones, ties by increasing voxel."""
    return np.lexsort((voxel, value if bright else -value))


def _skeleton(records: Sequence[MergeRecords], plan: SweepPlan) -> _Skeleton:
    """Nodes, levels and parents from every step's merge records."""
    def gathered(name: str) -> np.ndarray:
        return np.concatenate([getattr(r, name) for r in records])

    dying, breach, anchor = gathered("dying"), gathered("breach"), gathered("anchor")
    dying_value, breach_value = gathered("dying_value"), gathered("breach_value")
    by_node = _sweep_order(dying_value, dying, plan.bright)
    outside_level = -np.inf if plan.bright else np.inf
    core = np.concatenate(([-1], dying[by_node]))
    sources, targets = gathered("redirect_from"), gathered("redirect_to")
    by_source = np.argsort(sources, kind="stable")
    skeleton = _Skeleton(
        core=core, core_level=np.concatenate(([outside_level], dying_value[by_node])),
        breach=np.concatenate(([-1], breach[by_node])),
        breach_level=np.concatenate(([np.nan], breach_value[by_node])),
        parent=np.empty(0, np.int64), core_order=np.argsort(core[1:], kind="stable"),
        redirects=(sources[by_source], targets[by_source]))
    if np.any(np.diff(core[1:][skeleton.core_order]) == 0):
        raise RuntimeError("chunked cavity tree: a core died twice")
    anchors = np.concatenate(([0], skeleton.resolved(anchor[by_node])))
    by_breach = _sweep_order(skeleton.breach_level[1:], skeleton.breach[1:], plan.bright) + 1
    parent = link_parents(by_breach, skeleton.breach, anchors, len(core))
    if np.any(parent[1:] >= np.arange(1, len(core))):
        raise RuntimeError("chunked cavity tree: a parent is not elder than its child")
    return replace(skeleton, parent=parent)


@dataclass(frozen=True)
class ChunkChains:
    """What sweeping one chunk again needs (:func:`sweep_again`): its cores (local voxels,
    increasing) with their nodes, its seam roots (local voxels) and the ancestors of their
    nodes, each entry with its next one (``-1``: the outside) and its breach."""

    core_local: np.ndarray
    core_node: np.ndarray
    root_local: np.ndarray
    root_start: np.ndarray
    node: np.ndarray
    parent: np.ndarray
    breach_value: np.ndarray
    breach_voxel: np.ndarray

    @property
    def entry_node(self) -> np.ndarray:
        """The node of every owner entry of :func:`._tree_kernels.chunk_owners`: the cores,
        the chain entries, the outside."""
        return np.concatenate((self.core_node, self.node, [0])).astype(np.int64)


def _chains(seam_roots: np.ndarray, cores: tuple[np.ndarray, np.ndarray], box: Box,
            plan: SweepPlan, skeleton: _Skeleton, stamp: np.ndarray, mark: int) -> ChunkChains:
    starts = skeleton.resolved(seam_roots)
    nodes = ancestors(skeleton.parent, starts, stamp, mark)
    entry = np.empty(len(skeleton.core), np.int64)
    entry[nodes] = np.arange(len(nodes))
    parent = skeleton.parent[nodes]
    return ChunkChains(core_local=cores[0], core_node=cores[1],
                       root_local=_local(seam_roots, box, plan), root_start=entry[starts],
                       node=nodes,
                       parent=np.where(parent >= 0, entry[np.maximum(parent, 0)], -1),
                       breach_value=skeleton.breach_level[nodes],
                       breach_voxel=skeleton.breach[nodes])


def _local(voxels: np.ndarray, box: Box, plan: SweepPlan) -> np.ndarray:
    """Global flat indices of voxels of ``box`` as flat indices within it."""
    zyx = np.unravel_index(voxels, plan.shape)
    return np.ravel_multi_index(tuple(c - s for c, s in zip(zyx, box.start, strict=True)),
                                box.shape).astype(np.int64)


def _cores_by_chunk(core: np.ndarray, boxes: np.ndarray,
                    plan: SweepPlan) -> list[tuple[np.ndarray, np.ndarray]]:
    """Per chunk (in :func:`._chunked._boxes` order) its cores as local voxels, increasing,
    and their nodes."""
    starts = [np.array([boxes[tuple(i if a == axis else 0 for a in range(3))].start[axis]
                        for i in range(boxes.shape[axis])]) for axis in range(3)]
    nodes = np.arange(1, len(core), dtype=np.int64)
    zyx = np.unravel_index(core[1:], plan.shape)
    cell = tuple(np.searchsorted(s, c, side="right") - 1
                 for s, c in zip(starts, zyx, strict=True))
    chunk = np.ravel_multi_index(cell, boxes.shape)
    by_chunk = np.argsort(chunk, kind="stable")
    bounds = np.searchsorted(chunk[by_chunk], np.arange(boxes.size + 1))
    out = []
    for i, box in enumerate(boxes.flat):
        mine = by_chunk[bounds[i]:bounds[i + 1]]
        local = _local(core[1:][mine], box, plan)
        increasing = np.argsort(local)
        out.append((local[increasing], nodes[mine][increasing]))
    return out


@dataclass(frozen=True)
class ChunkArrivals:
    """One chunk swept again: the owner of every voxel on arrival, as an entry of the
    chunk's candidate nodes (:attr:`ChunkChains.entry_node`)."""

    count: np.ndarray    # voxels per entry
    owner: np.ndarray    # entry per voxel of the chunk (C order), -1 outside the mask
    values: np.ndarray   # the chunk, raveled, as the sweep read it


def sweep_again(block: np.ndarray, mask: np.ndarray | None, box: Box, plan: SweepPlan,
                chains: ChunkChains, *, owners: bool = True) -> ChunkArrivals:
    """The second sweep of one chunk (:func:`._tree_kernels.chunk_owners`); ``owners=False``
    counts only (``owner`` left empty)."""
    values = engine_array(np.ascontiguousarray(block), plan.name).reshape(-1)
    flat_mask = None if mask is None else np.ascontiguousarray(mask, dtype=bool).reshape(-1)
    order, _ = sort_voxels(values, flat_mask, descending=not plan.bright)
    nz, ny, nx = box.shape
    local_shape = box.shape if plan.ndim == 3 else box.shape[1:]
    offsets = neighbor_offsets(local_shape, dual_connectivity(plan.ndim, plan.connectivity))
    mask_u8 = flat_mask.view(np.uint8) if flat_mask is not None else np.zeros(1, np.uint8)
    readable = values.view(np.uint8) if values.dtype == np.bool_ else values
    entries = len(chains.core_local) + len(chains.node) + 1
    wide = np.int32 if entries < 2**31 else np.int64
    owner = np.empty(values.size if owners else 0, wide)
    count = chunk_owners(
        readable, order, mask_u8, flat_mask is not None, *offsets, nz, ny, nx,
        1 if plan.ndim == 3 else 0, box.sides(plan), np.array(box.start, np.int64),
        np.array(plan.shape, np.int64), plan.bright, chains.core_local, chains.root_local,
        chains.root_start, chains.parent, chains.breach_value, chains.breach_voxel, owner)
    return ChunkArrivals(count, owner, readable)


@dataclass(frozen=True)
class _Counts:
    """One chunk's counts: voxels per node met (nodes may repeat)."""

    node: np.ndarray
    count: np.ndarray


def _count_chunk(block: np.ndarray, mask: np.ndarray | None, box: Box, plan: SweepPlan,
                 chains: ChunkChains) -> _Counts:
    """The voxels of one chunk counted for their owners (:func:`sweep_again`)."""
    count = sweep_again(block, mask, box, plan, chains, owners=False).count
    met = count > 0
    return _Counts(node=chains.entry_node[met], count=count[met])


def _tree(skeleton: _Skeleton, counts: Sequence[_Counts], plan: SweepPlan) -> CavityTree:
    """The tree with every node's size from the chunks' counts."""
    own = np.bincount(np.concatenate([c.node for c in counts]),
                      weights=np.concatenate([c.count for c in counts]),
                      minlength=len(skeleton.core))
    size = subtree_sizes(skeleton.parent, np.rint(own).astype(np.int64))
    shape = plan.shape if plan.ndim == 3 else plan.shape[1:]
    return CavityTree(shape=shape, walls=plan.walls, connectivity=plan.connectivity,
                      core=skeleton.core, core_level=skeleton.core_level,
                      breach=skeleton.breach, breach_level=skeleton.breach_level,
                      parent=skeleton.parent, size=size)


def _tree_plan(shape: tuple[int, ...], dtype: Any, walls: str, connectivity: object) -> SweepPlan:
    return replace(_plan(shape, dtype, walls, connectivity, (len(shape) - 1,)), merges=True)


def _merges(parts: Sequence[PairRows], root: Summary, plan: SweepPlan,
            masked: bool) -> list[MergeRecords]:
    """Every step's merge records (or the refusal of non-finite values, as in memory)."""
    refuse_nonfinite(root.nonfinite, image=plan.name, masked=masked)
    return [p.merges for p in parts if p.merges is not None]


def _all_chains(parts: Sequence[PairRows], boxes: np.ndarray, plan: SweepPlan,
                skeleton: _Skeleton) -> tuple[ChunkChains, ...]:
    """The chains of every chunk, in :func:`._chunked._boxes` order."""
    stamp = np.full(len(skeleton.core), -1, np.int64)
    out = []
    cores = _cores_by_chunk(skeleton.core, boxes, plan)
    for i, box in enumerate(boxes.flat):
        merges = parts[i].merges
        assert merges is not None
        out.append(_chains(merges.flagged_roots, cores[i], box, plan, skeleton, stamp, i))
    return tuple(out)


@dataclass(frozen=True)
class ChunkedTree:
    """The cavity tree of a chunked volume and what sweeping its chunks again needs.

    Made by :func:`tree_chunks_here` (NumPy blocks, one process) or
    :func:`tree_chunks_on_dask` (Dask delayed blocks); :meth:`per_chunk` runs a task on
    every chunk the same way. The per-voxel passes of segmentation start from
    :func:`sweep_again` in such a task.
    """

    tree: CavityTree
    plan: SweepPlan
    boxes: np.ndarray                  # (cz, cy, cx) object array of Box
    chains: tuple[ChunkChains, ...]    # per chunk, in ``boxes.flat`` order
    blocks: tuple[Any, ...]            # per chunk: a NumPy block, or a Dask delayed one
    masks: tuple[Any, ...] | None
    on_dask: bool

    def per_chunk(self, task: Any, *extra: Sequence[Any]) -> list[Any]:
        """``task(block, mask, box, plan, chains, *extra_i)`` for every chunk ``i``: its
        result, or a Dask delayed object run on the workers."""
        return _per_chunk(task, self.blocks, self.masks, self.boxes, self.plan, self.chains,
                          self.on_dask, *extra)


def _per_chunk(task: Any, blocks: Sequence[Any], masks: Sequence[Any] | None,
               boxes: np.ndarray, plan: SweepPlan, chains: Sequence[ChunkChains],
               on_dask: bool, *extra: Sequence[Any]) -> list[Any]:
    call = task
    if on_dask:
        from dask import delayed

        call = delayed(task, pure=True)
    return [call(blocks[i], None if masks is None else masks[i], box, plan, chains[i],
                 *(e[i] for e in extra))
            for i, box in enumerate(boxes.flat)]


def _with_sizes(parts: Sequence[PairRows], root: Summary, plan: SweepPlan, boxes: np.ndarray,
                blocks: Sequence[Any], masks: Sequence[Any] | None,
                on_dask: bool) -> ChunkedTree:
    """The skeleton from the first pass, then the sizes from a second sweep of each chunk."""
    skeleton = _skeleton(_merges(parts, root, plan, masks is not None), plan)
    chains = _all_chains(parts, boxes, plan, skeleton)
    counts = _per_chunk(_count_chunk, blocks, masks, boxes, plan, chains, on_dask)
    if on_dask:
        import dask

        counts = list(dask.compute(*counts))
    return ChunkedTree(tree=_tree(skeleton, counts, plan), plan=plan, boxes=boxes,
                       chains=chains, blocks=tuple(blocks),
                       masks=None if masks is None else tuple(masks), on_dask=on_dask)


def tree_chunks_here(image: np.ndarray, chunks: Sequence[Sequence[int]], *,
                     walls: str = "bright", connectivity: int = 1,
                     mask: np.ndarray | None = None) -> ChunkedTree:
    """The chunked cavity tree computed in this process, one chunk after the other (no
    Dask), with what sweeping its chunks again needs."""
    image = np.asarray(image)
    plan = _tree_plan(image.shape, image.dtype, walls, connectivity)
    parts, root = swept_here(image, mask, chunks, plan)
    boxes = _boxes(chunks, image.ndim)
    windows = [chunk_window(box, plan) for box in boxes.flat]
    return _with_sizes(parts, root, plan, boxes, [image[w] for w in windows],
                       None if mask is None else [mask[w] for w in windows], on_dask=False)


def tree_chunks_on_dask(image: Any, *, walls: str = "bright", connectivity: int = 1,
                        mask: Any = None) -> ChunkedTree:
    """The chunked cavity tree computed on Dask's scheduler (see :func:`chunked_cavity_tree`),
    with what sweeping its chunks again needs."""
    image = lazy_image(image)
    plan = _tree_plan(tuple(image.shape), image.dtype, walls, connectivity)
    masks = lazy_mask_blocks(mask, image)
    computed = swept_on_dask(image, masks, plan)
    return _with_sizes(computed[:-1], computed[-1], plan, _boxes(image.chunks, image.ndim),
                       list(image.to_delayed().reshape(-1)),
                       None if masks is None else list(masks), on_dask=True)


def cavity_tree_in_chunks(image: np.ndarray, chunks: Sequence[Sequence[int]], *,
                          walls: str = "bright", connectivity: int = 1,
                          mask: np.ndarray | None = None) -> CavityTree:
    """The chunked computation of the cavity tree in this process, one chunk after the
    other (no Dask); the same tree as :func:`chunked_cavity_tree` with the same chunks.

    Examples
    --------
    >>> import numpy as np
    >>> ring = np.zeros((5, 5), np.uint8); ring[1:4, 1:4] = 9; ring[2, 2] = 1
    >>> tree = cavity_tree_in_chunks(ring, ((2, 1, 2), (3, 2)))
    >>> tree.n_nodes, int(tree.core[1]), float(tree.breach_level[1]), int(tree.size[1])
    (2, 12, 9.0, 1)
    """
    return tree_chunks_here(image, chunks, walls=walls, connectivity=connectivity,
                            mask=mask).tree


def chunked_cavity_tree(image: Any, *, walls: str = "bright", connectivity: int = 1,
                        mask: Any = None) -> CavityTree:
    """:func:`~cavitas.cubical.cavity_sweep`'s tree of a chunked array, chunk by chunk.

    Parameters
    ----------
    image : Dask array, Zarr array or HDF5 dataset
        Read one chunk per task, twice (see the module notes), never whole.
    walls, connectivity
        As for :func:`~cavitas.cubical.persistence`.
    mask : bool array of the image's shape, optional
        Any array Dask can chunk like the image.

    Returns
    -------
    CavityTree
        Equal, field for field, to ``cavity_sweep(numpy.asarray(image), ...)[1]``, sizes
        included (the sweep order itself, one entry per voxel, is not made).

    Examples
    --------
    >>> import dask.array as da, numpy as np
    >>> ring = np.zeros((5, 5), np.uint8); ring[1:4, 1:4] = 9; ring[2, 2] = 1
    >>> tree = chunked_cavity_tree(da.from_array(ring, chunks=2))
    >>> tree.n_nodes, int(tree.core[1]), float(tree.breach_level[1]), int(tree.size[1])
    (2, 12, 9.0, 1)
    """
    return tree_chunks_on_dask(image, walls=walls, connectivity=connectivity, mask=mask).tree
