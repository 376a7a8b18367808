"""Boundary trees: what one box of the volume tells its neighbours, and how two boxes join.

A **box** is a block of whole chunks. Its :class:`BoundaryTree` (one per sweep: H0 of the
walls, or the complement for cavities) holds the nodes left by :mod:`._seam_kernels` with
their global voxel index and value, and, for every side of the box that is a seam, a
**face map**: the node of each voxel of that side (``-1`` where the voxel is not part of
the sweep: outside the mask for H0). :func:`sweep_chunk` makes the trees of one chunk;
:func:`join_boxes` joins two boxes that touch along one axis: it sweeps the graph made of
both trees and the edges across the seam (neighbours under the sweep's connectivity, read
from the two face maps) and keeps what the joined box's own seams need. The pairs settled
on the way are final (see :mod:`._seam_kernels`).

Ties are broken as in the whole-volume sweep, by (value, global flat index); the local
order of a chunk is its global order restricted to it, since both are C order.

Examples
--------
Two halves of a 1 x 1 x 4 line, swept apart and joined, give the pairs of the whole line:

>>> import numpy as np
>>> plan = SweepPlan(shape=(1, 1, 4), walls="bright", connectivity=1, ndim=3,
...                  h0=True, cavities=True)
>>> line = np.array([[[5, 1, 2, 6]]], np.uint8)
>>> left = sweep_chunk(line[..., :2], None, Box((0, 0, 0), (1, 1, 2)), plan)
>>> right = sweep_chunk(line[..., 2:], None, Box((0, 0, 2), (1, 1, 4)), plan)
>>> joined = join_boxes(left.summary, right.summary, 2, plan)
>>> rows = np.concatenate([left.rows.h0, right.rows.h0, joined.rows.h0])
>>> sorted(rows[["birth", "death"]].tolist())
[(5.0, 1.0), (6.0, -inf)]
"""

from __future__ import annotations

from collections.abc import Callable, Iterable
from dataclasses import dataclass
from typing import Any

import numpy as np

from ._diagram import PAIR_DTYPE
from ._neighbors import dual_connectivity, neighbor_offsets
from ._seam_kernels import (
    BORDER,
    CLOSED,
    SEAM,
    adjacency,
    chunk_sweep,
    graph_sweep,
    merge_orders,
)
from ._sort import engine_array, sort_voxels

__all__ = ["Box", "BoundaryTree", "MergeRecords", "PairRows", "Summary", "SweepPlan", "Swept",
           "join_boxes", "sweep_chunk"]


@dataclass(frozen=True)
class SweepPlan:
    """What every chunk and join needs to know about the whole run.

    ``shape`` is the volume's shape in the 3D view (a 2D image is one plane).
    """

    shape: tuple[int, int, int]
    walls: str
    connectivity: int
    ndim: int
    h0: bool
    cavities: bool
    name: str = "image"
    merges: bool = False  # also record what the cavity tree needs (MergeRecords)

    @property
    def bright(self) -> bool:
        return self.walls == "bright"

    def sweep_connectivity(self, cavity: bool) -> int:
        """The neighbour rule of a sweep: the walls', or the complement's for cavities."""
        return dual_connectivity(self.ndim, self.connectivity) if cavity else self.connectivity


@dataclass(frozen=True)
class Box:
    """A block of the volume, ``start`` to ``stop`` (exclusive) in the 3D view."""

    start: tuple[int, int, int]
    stop: tuple[int, int, int]

    @property
    def shape(self) -> tuple[int, int, int]:
        a, b, c = (hi - lo for lo, hi in zip(self.start, self.stop, strict=True))
        return (a, b, c)

    def sides(self, plan: SweepPlan) -> np.ndarray:
        """:data:`CLOSED`, :data:`BORDER` or :data:`SEAM` per side (z-, z+, y-, y+, x-, x+)."""
        out = np.empty(6, np.int64)
        for axis in range(3):
            for high in (0, 1):
                edge = self.stop[axis] == plan.shape[axis] if high else self.start[axis] == 0
                if not edge:
                    out[2 * axis + high] = SEAM
                elif axis == 0 and plan.ndim == 2:
                    out[2 * axis + high] = CLOSED
                else:
                    out[2 * axis + high] = BORDER
        return out

    def seams(self, plan: SweepPlan) -> list[int]:
        """The sides that are seams, in order."""
        return [int(side) for side in np.flatnonzero(self.sides(plan) == SEAM)]

    @classmethod
    def spanning(cls, start: Iterable[Any], stop: Iterable[Any]) -> Box:
        """The box from ``start`` to ``stop`` (three integers each)."""
        a, b, c = (int(x) for x in start)
        d, e, f = (int(x) for x in stop)
        return cls((a, b, c), (d, e, f))

    def join(self, other: Box) -> Box:
        """The smallest box holding both."""
        return Box.spanning(np.minimum(self.start, other.start),
                            np.maximum(self.stop, other.stop))


@dataclass(frozen=True)
class BoundaryTree:
    """The nodes of one box's sweep that its seams need.

    Attributes
    ----------
    voxel : (k,) int64
        Global flat index of each node, in sweep order; ``-1`` for the outside (cavity
        sweeps), always node 0.
    value : (k,) float64
        Its value (the outside: ``-inf`` for bright walls, ``+inf`` for dark ones).
    parent : (k,) int64
        The next node of its component in sweep order, ``-1`` if none yet.
    faces : dict of int to (a, b) int64
        For each seam side (0..5, as :meth:`Box.sides`), the node of every voxel of that
        side, ``-1`` where there is none.
    """

    voxel: np.ndarray
    value: np.ndarray
    parent: np.ndarray
    faces: dict[int, np.ndarray]


@dataclass(frozen=True)
class Summary:
    """A box and the boundary trees of its sweeps (``None`` for a sweep not asked for, or
    when the box holds ``nonfinite`` NaN or infinite values inside the mask: then nothing
    was swept and the run is refused once the count is known)."""

    box: Box
    h0: BoundaryTree | None
    cavities: BoundaryTree | None
    nonfinite: int = 0


@dataclass(frozen=True)
class MergeRecords:
    """The merges of the cavity sweep settled by one chunk sweep or one join, for the
    cavity tree (:mod:`._chunked_tree`); voxels are global flat indices, ``-1`` the outside.

    Attributes
    ----------
    dying, dying_value : (p,) int64, float64
        Root voxel of each component whose death is final (a node of the tree: its core)
        and its value; zero persistence included.
    breach, breach_value : (p,) int64, float64
        The voxel whose arrival merged it, and its value.
    anchor : (p,) int64
        The eldest root it merged into here: the node's parent is the root of the anchor's
        component, in the whole volume, right after the breach.
    redirect_from, redirect_to : (r,) int64
        A seam voxel found here to start no component, and the root whose component it
        joined on arrival.
    flagged_roots : (f,) int64
        Chunk sweeps only: the roots of the components that reached a seam (the births of
        the boundary tree), whose root in the whole volume changes over the sweep.
    """

    dying: np.ndarray
    dying_value: np.ndarray
    breach: np.ndarray
    breach_value: np.ndarray
    anchor: np.ndarray
    redirect_from: np.ndarray
    redirect_to: np.ndarray
    flagged_roots: np.ndarray


@dataclass(frozen=True)
class PairRows:
    """Final pairs (:data:`PAIR_DTYPE` rows) settled by one chunk sweep or one join, and
    the cavity sweep's merge records when the plan asks for them."""

    h0: np.ndarray
    cavities: np.ndarray
    merges: MergeRecords | None = None


@dataclass(frozen=True)
class Swept:
    """What a chunk sweep or a join returns: its final pairs and the box's summary."""

    rows: PairRows
    summary: Summary


def _empty_rows() -> np.ndarray:
    return np.empty(0, PAIR_DTYPE)


def _refused(box: Box, nonfinite: int) -> Swept:
    """A box holding non-finite values: nothing swept, only the count."""
    return Swept(PairRows(_empty_rows(), _empty_rows()), Summary(box, None, None, nonfinite))


def _each_sweep(box: Box, plan: SweepPlan,
                sweep: Callable[[bool], tuple[np.ndarray, BoundaryTree, MergeRecords | None]]
                ) -> Swept:
    """``sweep(cavity)`` for each sweep the plan asks for (H0, then cavities). With merge
    records the cavity rows are left out: the records hold every pair and more."""
    rows = {False: _empty_rows(), True: _empty_rows()}
    trees: dict[bool, BoundaryTree | None] = {False: None, True: None}
    merges = None
    for cavity, wanted in ((False, plan.h0), (True, plan.cavities)):
        if wanted:
            rows[cavity], trees[cavity], found = sweep(cavity)
            if found is not None:
                rows[cavity], merges = _empty_rows(), found
    return Swept(PairRows(rows[False], rows[True], merges),
                 Summary(box, trees[False], trees[True]))


def _merge_records(pairs: np.ndarray, voxel: np.ndarray, value: np.ndarray,
                   redirects: np.ndarray, flagged_roots: np.ndarray) -> MergeRecords:
    """:class:`MergeRecords` of a sweep's final ``(dying, merging, eldest)`` rows and its
    ``(vertex, eldest root)`` redirects, in a sweep's vertex ids (``voxel`` and ``value``
    map them)."""
    return MergeRecords(
        dying=voxel[pairs[:, 0]], dying_value=value[pairs[:, 0]], breach=voxel[pairs[:, 1]],
        breach_value=value[pairs[:, 1]], anchor=voxel[pairs[:, 2]],
        redirect_from=voxel[redirects[:, 0]], redirect_to=voxel[redirects[:, 1]],
        flagged_roots=voxel[flagged_roots])


def _rows(pairs: np.ndarray, open_roots: np.ndarray, voxel: np.ndarray, value: np.ndarray,
          cavity: bool, bright: bool) -> np.ndarray:
    """Diagram rows of final pairs ``(dying root, merging vertex)`` of nonzero persistence
    and, for H0, of the roots that never die; ``voxel`` and ``value`` map a sweep's vertex
    ids."""
    pairs = pairs[value[pairs[:, 0]] != value[pairs[:, 1]]]
    dying, merging = pairs[:, 0], pairs[:, 1]
    if cavity:  # birth at the breach, death at the core
        births, deaths = merging, dying
        open_roots = open_roots[:0]
    else:
        births, deaths = dying, merging
    rows = np.empty(len(pairs) + len(open_roots), PAIR_DTYPE)
    rows["birth_voxel"][: len(pairs)] = voxel[births]
    rows["birth"][: len(pairs)] = value[births]
    rows["death_voxel"][: len(pairs)] = voxel[deaths]
    rows["death"][: len(pairs)] = value[deaths]
    rows["birth_voxel"][len(pairs):] = voxel[open_roots]
    rows["birth"][len(pairs):] = value[open_roots]
    rows["death_voxel"][len(pairs):] = -1
    rows["death"][len(pairs):] = -np.inf if bright else np.inf
    return rows


def _side_voxels(shape: tuple[int, int, int], side: int) -> np.ndarray:
    """Local flat indices of the voxels of one side of a block, as a 2D array."""
    axis, high = divmod(side, 2)
    grid = [np.arange(s) for s in shape]
    grid[axis] = np.array([shape[axis] - 1 if high else 0])
    zyx = np.meshgrid(*grid, indexing="ij")
    return np.ravel_multi_index(zyx, shape).squeeze(axis)


def _global_index(local: np.ndarray, box: Box, plan: SweepPlan) -> np.ndarray:
    """Global flat indices of local flat indices of ``box``."""
    zyx = np.unravel_index(local, box.shape)
    return np.ravel_multi_index(
        tuple(c + s for c, s in zip(zyx, box.start, strict=True)), plan.shape).astype(np.int64)


def _outside_value(plan: SweepPlan) -> float:
    return -np.inf if plan.bright else np.inf


def _chunk_tree(values: np.ndarray, order: np.ndarray, mask: np.ndarray | None, box: Box,
                plan: SweepPlan, cavity: bool
                ) -> tuple[np.ndarray, BoundaryTree, MergeRecords | None]:
    """One sweep of a chunk: its final rows, its boundary tree and (cavity sweep, if the
    plan asks) its merge records."""
    nz, ny, nx = box.shape
    n = nz * ny * nx
    local_shape = box.shape if plan.ndim == 3 else box.shape[1:]
    offsets = neighbor_offsets(local_shape, plan.sweep_connectivity(cavity))
    mask_u8 = mask.view(np.uint8) if mask is not None else np.zeros(1, np.uint8)
    sides = box.sides(plan)
    nodes, pairs, open_roots = chunk_sweep(
        order, cavity, mask_u8, mask is not None, *offsets, nz, ny, nx,
        1 if plan.ndim == 3 else 0, sides)
    nodes = _in_sweep_order(nodes)
    # The vertices named by the results (slot n: the outside), renumbered 0, 1, ...
    used = np.unique(np.concatenate((nodes[:, 0], pairs.ravel(), open_roots)))
    inside = used[used < n]
    vertex_voxel = np.append(_global_index(inside, box, plan), -1)
    vertex_value = np.append(values[inside].astype(np.float64), _outside_value(plan))

    def compact(ids: np.ndarray) -> np.ndarray:
        return np.searchsorted(used, ids)

    rows = _rows(compact(pairs), compact(open_roots), vertex_voxel, vertex_value, cavity,
                 plan.bright)
    # Face maps: every seam voxel is a node (seam voxels always are).
    by_vertex = np.append(np.argsort(nodes[:, 0], kind="stable"), -1)
    sorted_vertices = np.append(nodes[by_vertex[:-1], 0], n + 1)  # a sentinel past the end
    faces = {}
    for side in box.seams(plan):
        local = _side_voxels(box.shape, side)
        at = np.searchsorted(sorted_vertices, local)
        face = np.where(sorted_vertices[at] == local, by_vertex[at], -1)
        if mask is not None and cavity:
            face[~mask[local]] = 0  # node 0 of a cavity tree is the outside
        faces[side] = face.astype(np.int64)
    tree = BoundaryTree(voxel=vertex_voxel[compact(nodes[:, 0])],
                        value=vertex_value[compact(nodes[:, 0])], parent=nodes[:, 1].copy(),
                        faces=faces)
    merges = None
    if cavity and plan.merges:
        merges = _merge_records(compact(pairs), vertex_voxel, vertex_value,
                                np.empty((0, 2), np.int64), compact(_births(nodes, n)))
    return rows, tree, merges


def _births(nodes: np.ndarray, outside: int) -> np.ndarray:
    """The vertices of a boundary tree's leaves but the outside: the births of the
    components that reached a seam (every other node joins a component below it)."""
    has_child = np.zeros(len(nodes), bool)
    has_child[nodes[nodes[:, 1] >= 0, 1]] = True
    leaves = nodes[~has_child, 0]
    return leaves[leaves != outside]


def sweep_chunk(block: np.ndarray, mask: np.ndarray | None, box: Box,
                plan: SweepPlan) -> Swept:
    """Both sweeps of one chunk: its final pairs and its boundary trees.

    ``block`` holds the chunk's values (2D or 3D as the volume), ``mask`` its part of the
    ROI (or None). A chunk with non-finite values inside the mask is not swept; it only
    counts them (:attr:`Summary.nonfinite`).
    """
    values = engine_array(np.ascontiguousarray(block), plan.name).reshape(-1)
    flat_mask = None if mask is None else np.ascontiguousarray(mask, dtype=bool).reshape(-1)
    order, nonfinite = sort_voxels(values, flat_mask, descending=not plan.bright)
    if nonfinite:
        return _refused(box, nonfinite)
    return _each_sweep(box, plan, lambda cavity: _chunk_tree(values, order, flat_mask, box,
                                                             plan, cavity))


def _seam_offsets(plan: SweepPlan, cavity: bool, axis: int) -> list[tuple[int, int]]:
    """Steps ``(da, db)`` within the seam plane to a neighbour across it (the two axes
    other than ``axis``, in order)."""
    conn = plan.sweep_connectivity(cavity)
    others = [a for a in range(3) if a != axis]
    steps = []
    for da in (-1, 0, 1):
        for db in (-1, 0, 1):
            moved = [ax for ax, step in zip(others, (da, db), strict=True) if step]
            if plan.ndim == 2 and 0 in moved:
                continue  # a 2D image has no z steps
            if 1 + len(moved) <= conn:
                steps.append((da, db))
    return steps


def _seam_edges(low_face: np.ndarray, high_face: np.ndarray,
                steps: list[tuple[int, int]]) -> np.ndarray:
    """Edges ``(node of low_face, node of high_face)`` between neighbours across a seam."""
    na, nb = low_face.shape
    edges = []
    for da, db in steps:
        a0, a1 = max(0, -da), min(na, na - da)
        b0, b1 = max(0, -db), min(nb, nb - db)
        first = low_face[a0:a1, b0:b1].ravel()
        second = high_face[a0 + da:a1 + da, b0 + db:b1 + db].ravel()
        keep = (first >= 0) & (second >= 0)
        edges.append(np.stack((first[keep], second[keep]), axis=1))
    return np.concatenate(edges) if edges else np.empty((0, 2), np.int64)


def _in_sweep_order(nodes: np.ndarray) -> np.ndarray:
    """A kernel's ``(vertex, parent node, position)`` rows sorted by sweep position, the
    parents renumbered to match."""
    by_position = np.argsort(nodes[:, 2], kind="stable")
    new_id = np.empty(len(nodes), np.int64)
    new_id[by_position] = np.arange(len(nodes))
    out = nodes[by_position]
    linked = out[:, 1] >= 0
    out[linked, 1] = new_id[out[linked, 1]]
    return out


def _merged_order(voxel: np.ndarray, value: np.ndarray, split: int, plan: SweepPlan,
                  cavity: bool) -> np.ndarray:
    """The sweep order of two trees' nodes (ids below ``split``, then the rest), each
    already in sweep order: by value, then global index, as :mod:`._sort` orders voxels
    (the cavity sweep: increasing value for bright walls, ties by increasing index; H0:
    the reverse). The outside (value ``-inf`` bright, ``+inf`` dark) comes first."""
    return merge_orders(value, voxel, split, cavity == plan.bright, cavity)


def _renumbered(face: np.ndarray, ids: np.ndarray) -> np.ndarray:
    """A face map with its nodes renumbered by ``ids`` (``-1`` stays ``-1``)."""
    out = np.full(face.shape, -1, np.int64)
    there = face >= 0
    out[there] = ids[face[there]]
    return out


def _join_faces(axis: int, ids_a: np.ndarray, ids_b: np.ndarray,
                tree_a: BoundaryTree, tree_b: BoundaryTree, box: Box,
                plan: SweepPlan) -> dict[int, np.ndarray]:
    """The joined box's seam face maps, in graph vertex ids (``a`` lies below ``b``)."""
    faces = {}
    for side in box.seams(plan):
        side_axis, high = divmod(side, 2)
        if side_axis == axis:
            tree, ids = (tree_b, ids_b) if high else (tree_a, ids_a)
            faces[side] = _renumbered(tree.faces[side], ids)
        else:
            within = [x for x in range(3) if x != side_axis].index(axis)
            faces[side] = np.concatenate(
                (_renumbered(tree_a.faces[side], ids_a), _renumbered(tree_b.faces[side], ids_b)),
                axis=within)
    return faces


def _tree_edges(tree: BoundaryTree, ids: np.ndarray) -> np.ndarray:
    """The ``node -- parent`` edges of a boundary tree, in graph vertex ids."""
    child = np.flatnonzero(tree.parent >= 0)
    return np.stack((ids[child], ids[tree.parent[child]]), axis=1)


def _join_trees(a: Summary, b: Summary, axis: int, plan: SweepPlan, cavity: bool,
                box: Box) -> tuple[np.ndarray, BoundaryTree, MergeRecords | None]:
    """Sweep the graph of two boundary trees and their seam: final rows, joined tree and
    (cavity sweep, if the plan asks) merge records."""
    tree_a = a.cavities if cavity else a.h0
    tree_b = b.cavities if cavity else b.h0
    assert tree_a is not None and tree_b is not None
    na, nb = len(tree_a.voxel), len(tree_b.voxel)
    n = na + nb
    ids_a = np.arange(na, dtype=np.int64)
    ids_b = np.arange(na, n, dtype=np.int64)
    vertices = np.ones(n, bool)
    if cavity:  # one outside for both: b's slot is left out, its edges go to a's
        slot_b = int(np.flatnonzero(tree_b.voxel == -1)[0])
        ids_b[slot_b] = int(np.flatnonzero(tree_a.voxel == -1)[0])
        vertices[na + slot_b] = False
    voxel = np.concatenate((tree_a.voxel, tree_b.voxel))
    value = np.concatenate((tree_a.value, tree_b.value))
    seam = _seam_edges(tree_a.faces[2 * axis + 1], tree_b.faces[2 * axis],
                       _seam_offsets(plan, cavity, axis))
    edges = np.concatenate((_tree_edges(tree_a, ids_a), _tree_edges(tree_b, ids_b),
                            np.stack((ids_a[seam[:, 0]], ids_b[seam[:, 1]]), axis=1)))
    edges = edges[edges[:, 0] != edges[:, 1]]
    start, adjacent = adjacency(np.ascontiguousarray(edges[:, 0]),
                                np.ascontiguousarray(edges[:, 1]), n)
    faces = _join_faces(axis, ids_a, ids_b, tree_a, tree_b, box, plan)
    on_seam = np.zeros(n, bool)
    for face in faces.values():
        on_seam[face[face >= 0]] = True
    if cavity and faces:
        on_seam[voxel == -1] = True  # the outside is shared with every other box
    order = _merged_order(voxel, value, na, plan, cavity)
    order = order[vertices[order]]
    undecided = np.zeros(n, bool)  # vertices on a seam of their own box
    for tree, ids in ((tree_a, ids_a), (tree_b, ids_b)):
        for face in tree.faces.values():
            undecided[ids[face[face >= 0]]] = True
    undecided[voxel == -1] = False
    nodes, final, open_roots, redirects = graph_sweep(n, order, start, adjacent, on_seam,
                                                      undecided)
    nodes = _in_sweep_order(nodes)
    rows = _rows(final, open_roots, voxel, value, cavity, plan.bright)
    merges = None
    if cavity and plan.merges:
        merges = _merge_records(final, voxel, value, redirects, np.empty(0, np.int64))
    new_id = np.full(n, -1, np.int64)
    new_id[nodes[:, 0]] = np.arange(len(nodes))
    tree = BoundaryTree(voxel=voxel[nodes[:, 0]], value=value[nodes[:, 0]],
                        parent=nodes[:, 1].copy(),
                        faces={side: _renumbered(face, new_id) for side, face in faces.items()})
    return rows, tree, merges


def join_boxes(a: Summary, b: Summary, axis: int, plan: SweepPlan) -> Swept:
    """Join two boxes that touch along ``axis`` (``a`` below ``b``): the pairs that become
    final and the joined box's summary."""
    box = a.box.join(b.box)
    if a.nonfinite or b.nonfinite:
        return _refused(box, a.nonfinite + b.nonfinite)
    return _each_sweep(box, plan, lambda cavity: _join_trees(a, b, axis, plan, cavity, box))
