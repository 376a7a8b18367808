"""Nested region labels of a chunked volume, chunk by chunk (:func:`chunked_nested_map`).

The label map equals :func:`._regions.nested_map`'s, voxel for voxel and in its dtype: the
breach regions of :func:`._delineate.delineate` (``region="breach"``) and its enclosures.

In memory, region ``k`` is rooted at tree node ``node[k]`` and closes at a rank ``R_k`` of
the sweep order; a voxel that arrives at rank ``r`` in the component of node ``n`` (its
*owner*: the component's root right after the voxel arrives) belongs to the first region
of ``n`` (by close rank, then in the order given) with ``r < R_k``, else to what its
component becomes when ``n`` merges into its parent (``cont[n]``, the same rule one step
up, at ``n``'s breach).

Without the global order, regions close at *levels*: delineate's ranks are all
``rank_of_level(level)``, the first rank whose value is at or above the level ("regions are
components of {f < level}: plateaus at the level itself stay out"), and then ``r < R_k``
exactly when the voxel's value lies below ``level_k`` (above it for dark walls, whose sweep
descends). So:

1. The owner of every voxel is what the cavity tree's second sweep of a chunk finds
   (:func:`cavitas.cubical._chunked_tree.sweep_again`).
2. The client orders each node's regions and computes ``cont`` for every node
   (:func:`._label_kernels.continuation`, breach levels in place of ranks), then gives each
   chunk's task the rows of the nodes it can meet (its cores and its seam roots'
   ancestors): tasks never carry the whole table.
3. Each chunk is labelled alone (:func:`._label_kernels.resolve_arrivals`) and the label map
   is a Dask array of those blocks, chunked like the input (``to_zarr`` writes it chunk by
   chunk).

Ties. Two different levels give the same rank when no voxel value inside the mask lies in
between; in memory, two regions of one node with the same rank keep the order given.
Where one node has regions at different levels, those levels are first moved up to the
smallest voxel value at or above them (one more pass over the chunks, skipped when no node
has two regions at different levels, as in delineate's breach regions and enclosures,
whose levels are voxel values), which changes no comparison and makes equal ranks equal
levels.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .._errors import ParameterError
from ..cubical._boundary import Box, SweepPlan
from ..cubical._chunked import chunk_window
from ..cubical._chunked_tree import ChunkChains, ChunkedTree, sweep_again
from ..cubical._sort import engine_array
from ._label_kernels import continuation, resolve_arrivals
from ._result import label_dtype

__all__ = ["RegionSpec", "chunked_nested_map", "nested_map_in_chunks"]


@dataclass(frozen=True)
class RegionSpec:
    """The regions to label: region ``k`` is rooted at tree node ``node[k]``, closes at
    ``level[k]`` (the input's units: voxels below it for bright walls, above it for dark
    ones, are inside) and is labelled ``ids[k]``."""

    node: np.ndarray
    level: np.ndarray
    ids: np.ndarray

    @classmethod
    def checked(cls, node: Any, level: Any, ids: Any, n_nodes: int) -> RegionSpec:
        """The three arrays checked against each other and the tree's ``n_nodes``."""
        node, level, ids = np.asarray(node), np.asarray(level, np.float64), np.asarray(ids)
        whole = all(a.size == 0 or a.dtype.kind in "iu" for a in (node, ids))
        if node.ndim != 1 or not whole:
            raise ParameterError("node and ids must be one-dimensional integer arrays.",
                                 parameters=("node", "ids"))
        if not node.shape == level.shape == ids.shape:
            raise ParameterError(f"node, level and ids must have one entry per region; got "
                                 f"{node.size}, {level.size} and {ids.size}.",
                                 parameters=("node", "level", "ids"))
        if node.size and (node.min() < 0 or node.max() >= n_nodes):
            raise ParameterError(f"node must hold nodes of the cavity tree (0 to {n_nodes - 1}); "
                                 f"got {node.min()} to {node.max()}.", parameters=("node",))
        if np.isnan(level).any():
            raise ParameterError("level must not hold NaN.", parameters=("level",))
        return cls(node.astype(np.int64), level, ids.astype(np.int64))


@dataclass(frozen=True)
class _RegionTable:
    """Regions grouped by node (``start``, one more entry than nodes): each with the key it
    closes at (its level in the sweep's direction) and its label; per node ``cont``."""

    start: np.ndarray
    key: np.ndarray
    label: np.ndarray
    cont: np.ndarray

    def rows(self, nodes: np.ndarray) -> _RegionTable:
        """The same table on ``nodes`` only (entry ``i`` is node ``nodes[i]``)."""
        counts = self.start[nodes + 1] - self.start[nodes]
        start = np.concatenate(([0], np.cumsum(counts))).astype(np.int64)
        pick = np.repeat(self.start[nodes] - start[:-1], counts) + np.arange(start[-1])
        return _RegionTable(start, self.key[pick], self.label[pick], self.cont[nodes])


def _key(levels: np.ndarray, bright: bool) -> np.ndarray:
    """Levels in the sweep's direction: the sweep visits increasing keys."""
    return np.asarray(levels, np.float64) if bright else -np.asarray(levels, np.float64)


def _table(chunked: ChunkedTree, spec: RegionSpec, key: np.ndarray) -> _RegionTable:
    tree = chunked.tree
    by_node = np.lexsort((key, spec.node))  # stable: equal keys keep the order given
    start = np.zeros(tree.n_nodes + 1, np.int64)
    np.add.at(start, spec.node + 1, 1)
    start = np.cumsum(start)
    reg_key, reg_label = key[by_node], spec.ids[by_node]
    # the outside (node 0) has no breach and no continuation: any key will do there
    merge_key = _key(np.where(tree.breach >= 0, tree.breach_level, 0.0), chunked.plan.bright)
    cont = continuation(tree.parent.astype(np.int64), merge_key, start, reg_key, reg_label)
    return _RegionTable(start, reg_key, reg_label, cont)


def _unsettled_keys(spec: RegionSpec, key: np.ndarray) -> np.ndarray:
    """The keys of the nodes with regions at two or more different levels (sorted)."""
    by_node = np.lexsort((key, spec.node))
    node, sorted_key = spec.node[by_node], key[by_node]
    differ = (node[1:] == node[:-1]) & (sorted_key[1:] != sorted_key[:-1])
    mixed = np.unique(node[1:][differ])
    return np.unique(key[np.isin(spec.node, mixed)])


def _first_at_or_above(block: np.ndarray, mask: np.ndarray | None, box: Box, plan: SweepPlan,
                       chains: ChunkChains, queries: np.ndarray) -> np.ndarray:
    """Per query key, the smallest key of a voxel of the chunk (inside the mask) at or above
    it; infinity where none."""
    values = engine_array(np.ascontiguousarray(block), plan.name)
    if mask is not None:
        values = values[np.asarray(mask, bool)]
    keys = np.append(np.unique(_key(values.reshape(-1), plan.bright)), np.inf)
    return keys[np.searchsorted(keys, queries, side="left")]


def _settled_keys(chunked: ChunkedTree, spec: RegionSpec) -> np.ndarray:
    """Each region's key, moved up to a voxel value where its node has other levels."""
    key = _key(spec.level, chunked.plan.bright)
    queries = _unsettled_keys(spec, key)
    if not queries.size:
        return key
    found = chunked.per_chunk(_first_at_or_above, [queries] * len(chunked.chains))
    if chunked.on_dask:
        import dask

        found = list(dask.compute(*found))
    moved = np.min(np.stack(found), axis=0)
    at = np.searchsorted(queries, key)
    hit = (at < queries.size) & (queries[np.minimum(at, queries.size - 1)] == key)
    return np.where(hit, moved[np.minimum(at, queries.size - 1)], key)


def _label_chunk(block: np.ndarray, mask: np.ndarray | None, box: Box, plan: SweepPlan,
                 chains: ChunkChains, table: _RegionTable, dtype: np.dtype) -> np.ndarray:
    """One chunk's labels (worker): owners by a second sweep, then the regions."""
    arrivals = sweep_again(block, mask, box, plan, chains)
    out = np.empty(arrivals.owner.size, dtype)
    resolve_arrivals(arrivals.owner, arrivals.values, plan.bright, table.start, table.key,
                     table.label, table.cont, out)
    return out.reshape(_block_shape(box, plan))


def _label_tasks(chunked: ChunkedTree, node: Any, level: Any,
                 ids: Any) -> tuple[list[Any], np.dtype]:
    """Every chunk's labelling (results or delayed) and the label dtype."""
    tree = chunked.tree
    spec = RegionSpec.checked(node, level, ids, tree.n_nodes)
    table = _table(chunked, spec, _settled_keys(chunked, spec))
    # nested_map's dtype: its array holds tree nodes first, then labels
    index = np.int32 if tree.n_nodes < 2**31 else np.int64
    dtype = np.promote_types(label_dtype(int(spec.ids.max(initial=0))), index)
    tables = [table.rows(chains.entry_node) for chains in chunked.chains]
    return chunked.per_chunk(_label_chunk, tables, [dtype] * len(tables)), dtype


def _block_shape(box: Box, plan: SweepPlan) -> tuple[int, ...]:
    """A chunk's shape in the input (2D images: without the z axis)."""
    return box.shape if plan.ndim == 3 else box.shape[1:]


def nested_map_in_chunks(chunked: ChunkedTree, node: Any, level: Any, ids: Any) -> np.ndarray:
    """:func:`chunked_nested_map` computed in this process, one chunk after the other, from
    :func:`cavitas.cubical._chunked_tree.tree_chunks_here`; a NumPy array.

    Examples
    --------
    >>> from cavitas.cubical._chunked_tree import tree_chunks_here
    >>> ring = np.zeros((5, 6), np.uint8); ring[1:4, 1:5] = 9; ring[2, 2:4] = (1, 3)
    >>> chunked = tree_chunks_here(ring, ((2, 3), (3, 3)))
    >>> nested_map_in_chunks(chunked, [1], [9.0], [7])[2].tolist()
    [0, 0, 7, 7, 0, 0]
    """
    if chunked.on_dask:
        raise ParameterError("chunked: a tree made on Dask gives its labels with "
                             "chunked_nested_map.", parameters=("chunked",))
    tasks, dtype = _label_tasks(chunked, node, level, ids)
    plan = chunked.plan
    out = np.empty(plan.shape if plan.ndim == 3 else plan.shape[1:], dtype)
    for box, block in zip(chunked.boxes.flat, tasks, strict=True):
        out[chunk_window(box, plan)] = block
    return out


def chunked_nested_map(chunked: ChunkedTree, node: Any, level: Any, ids: Any) -> Any:
    """:func:`._regions.nested_map`'s labels of a chunked volume, one task per chunk.

    Parameters
    ----------
    chunked : ChunkedTree
        From :func:`cavitas.cubical._chunked_tree.tree_chunks_on_dask`.
    node, level, ids : (k,) arrays
        Region ``k`` is rooted at tree node ``node[k]``, holds the voxels below
        ``level[k]`` (in the input's units; above it for dark walls) and is labelled
        ``ids[k]`` (see :class:`RegionSpec`).

    Returns
    -------
    dask.array.Array
        Chunked like the input; each block is computed by one task that reads its chunk
        once more. Equal, voxel for voxel and in dtype, to ``nested_map(sweep, node,
        sweep.rank_of_level(level), ids)`` on the in-memory sweep (values with walls high:
        ``-image`` for dark walls, and ``-level``).

    Examples
    --------
    >>> import dask.array as da
    >>> from cavitas.cubical._chunked_tree import tree_chunks_on_dask
    >>> ring = np.zeros((5, 6), np.uint8); ring[1:4, 1:5] = 9; ring[2, 2:4] = (1, 3)
    >>> chunked = tree_chunks_on_dask(da.from_array(ring, chunks=3))
    >>> chunked_nested_map(chunked, [1], [3.0], [7]).compute()[2].tolist()
    [0, 0, 7, 0, 0, 0]
    """
    import dask.array as da

    if not chunked.on_dask:
        raise ParameterError("chunked: a tree made in this process gives its labels with "
                             "nested_map_in_chunks.", parameters=("chunked",))
    tasks, dtype = _label_tasks(chunked, node, level, ids)
    blocks = np.empty(chunked.boxes.shape, object)
    for idx, task in zip(np.ndindex(*blocks.shape), tasks, strict=True):
        blocks[idx] = da.from_delayed(task, shape=_block_shape(chunked.boxes[idx], chunked.plan),
                                      dtype=dtype)
    return da.block((blocks if chunked.plan.ndim == 3 else blocks[0]).tolist())

