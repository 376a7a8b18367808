"""Compiled sweeps of the chunked engine: one chunk of voxels, or a graph of merged chunks.

Both sweeps are the elder-rule union-find of :mod:`._kernels` (H0 of the wall set, or the
complement with its outside node) with one addition: they know which vertices lie on a
**seam** (a face shared with a chunk not seen yet) and keep only what the seams need, the
*boundary tree*. Everything else they settle for good.

Flagged components
------------------
A component is *flagged* when it holds a seam vertex (or the outside, which every chunk
shares). A flagged component may still meet other chunks' components below any level, so
the elder rule cannot be applied to it yet; an unflagged one is closed for good, so a pair
whose dying component is unflagged is **final**: the same pair comes out of the whole
volume. ``last[root]`` holds the boundary-tree node at the top of a flagged component
(``-1``: unflagged).

A vertex becomes a **node** of the boundary tree when it lies on a seam, or when it joins
two flagged components, or a flagged one and an elder unflagged one (whose root, its birth,
then becomes a node too). Each node's ``parent`` is the next node of its component in sweep
order. Swept as a graph whose edges are ``node -- parent``, the tree reproduces, at every
level, which seam vertices are connected and the birth of their component: all that a
merge with the neighbouring chunk can depend on (:mod:`._boundary`).

Union-find codes: ``parent[v] = -1`` not visited; a root holds ``-(position + 3)`` with its
position in the sweep (the elder has the greater code); the outside holds ``-2``, elder
than every voxel.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from ._kernels import _find_neg, add_distinct, eldest_root
from ._neighbors import is_interior, neighbor_or_outside, unravel3

__all__ = ["adjacency", "chunk_roots", "chunk_sweep", "graph_sweep", "is_seam_voxel",
           "merge_orders", "outside_first"]

#: Face states of a chunk, per side (z low, z high, y low, y high, x low, x high).
CLOSED = 0  # nothing lies beyond (the z sides of a 2D image)
BORDER = 1  # the scan's border: the outside lies beyond (cavity sweeps)
SEAM = 2  # another chunk lies beyond


@njit(cache=True, inline="always")
def _open_roots(order, backwards, parent, last):
    """The roots left unflagged at the end of a sweep (H0: its essential classes), in sweep
    order (``order`` read backwards if ``backwards``)."""
    m = order.shape[0]
    count = 0
    for j in range(m):
        if parent[order[j]] < -2 and last[order[j]] < 0:
            count += 1
    out = np.empty(count, np.int64)
    count = 0
    for j in range(m):
        v = order[m - 1 - j] if backwards else order[j]
        if parent[v] < -2 and last[v] < 0:
            out[count] = v
            count += 1
    return out


@njit(cache=True)
def _grow_rows(a, n):
    b = np.empty((max(2 * a.shape[0], n), a.shape[1]), a.dtype)
    b[: a.shape[0]] = a
    return b


@njit(cache=True, inline="always")
def _push(rows, count, first, second):
    if count == rows.shape[0]:
        rows = _grow_rows(rows, count + 1)
    rows[count, 0] = first
    rows[count, 1] = second
    return rows, count + 1


@njit(cache=True, inline="always")
def _push_node(nodes, count, vertex, parent_node, position):
    nodes, count = _push(nodes, count, vertex, parent_node)
    nodes[count - 1, 2] = position
    return nodes, count


@njit(cache=True, inline="always")
def _push_pair(pairs, count, dying, vertex, eldest):
    pairs, count = _push(pairs, count, dying, vertex)
    pairs[count - 1, 2] = eldest
    return pairs, count


@njit(cache=True, inline="always")
def _arrive(v, code, on_seam, roots, nr, parent, last, nodes, nn, pairs, npairs):
    """Vertex ``v`` joins the components ``roots[:nr]`` of its visited neighbours.

    ``nodes[i] = (vertex, parent node, sweep position)`` is the boundary tree; ``pairs[i]
    = (dying root, v, eldest root)`` the final pairs (those of zero persistence too: the
    caller, which knows the values, drops them for the diagram; the cavity tree keeps
    them). The eldest root is the *anchor* of the death: the dying node's parent in the
    whole volume is the root of the anchor's component right after ``v``
    (:mod:`._chunked_tree`). Returns the grown arrays and counts.
    """
    if nr == 0:
        parent[v] = code
        last[v] = -1
        if on_seam:
            nodes, nn = _push_node(nodes, nn, v, -1, -code - 3)
            last[v] = nn - 1
        return nodes, nn, pairs, npairs
    best = eldest_root(parent, roots, nr)
    flagged = 0
    for q in range(nr):
        if last[roots[q]] >= 0:
            flagged += 1
    keep = on_seam or flagged >= 2 or (flagged == 1 and last[best] < 0)
    kv = nn
    if keep:
        nodes, nn = _push_node(nodes, nn, v, -1, -code - 3)
        for q in range(nr):
            r = roots[q]
            if last[r] >= 0:
                nodes[last[r], 1] = kv
            elif r == best:  # the elder birth of a component that is flagged from now on
                nodes, nn = _push_node(nodes, nn, r, kv, -parent[r] - 3)
    for q in range(nr):
        r = roots[q]
        if r != best:
            if last[r] < 0:
                pairs, npairs = _push_pair(pairs, npairs, r, v, best)
            parent[r] = best
    parent[v] = best
    if keep:
        last[best] = kv
    return nodes, nn, pairs, npairs


@njit(cache=True, inline="always")
def is_seam_voxel(z, y, x, nz, ny, nx, faces):
    """Whether chunk voxel ``(z, y, x)`` lies on a side that is a :data:`SEAM`."""
    return ((z == 0 and faces[0] == SEAM) or (z == nz - 1 and faces[1] == SEAM)
            or (y == 0 and faces[2] == SEAM) or (y == ny - 1 and faces[3] == SEAM)
            or (x == 0 and faces[4] == SEAM) or (x == nx - 1 and faces[5] == SEAM))


@njit(cache=True, inline="always")
def _beyond_border(zz, yy, xx, nz, ny, nx, faces):
    """Whether an out-of-chunk position lies beyond a border side (not only seams)."""
    return ((zz < 0 and faces[0] == BORDER) or (zz >= nz and faces[1] == BORDER)
            or (yy < 0 and faces[2] == BORDER) or (yy >= ny and faces[3] == BORDER)
            or (xx < 0 and faces[4] == BORDER) or (xx >= nx and faces[5] == BORDER))


@njit(cache=True, inline="always")
def outside_first(parent, mask, use_mask):
    """Start a cavity sweep's union-find: the outside (the last slot) visited, the eldest
    root, and every voxel outside the mask already in it."""
    n = parent.shape[0] - 1
    parent[n] = -2
    if use_mask:
        for i in range(n):
            if not mask[i]:
                parent[i] = n


@njit(cache=True, inline="always")
def chunk_roots(v, z, y, x, cavity, parent, roots, offsets_flat, offsets_zyx, nz, ny, nx,
                zmargin, faces):
    """The distinct roots of the visited neighbours of chunk voxel ``v`` (at ``z, y, x``)
    into ``roots``; their count. In a cavity sweep a border side's beyond is the outside
    (slot ``nz * ny * nx``); a seam side's beyond is not seen."""
    n = nz * ny * nx
    interior = is_interior(z, y, x, nz, ny, nx, zmargin)
    nr = 0
    for k in range(offsets_flat.shape[0]):
        if interior:
            w = v + offsets_flat[k]
        else:
            w = neighbor_or_outside(v, z, y, x, k, offsets_flat, offsets_zyx, nz, ny, nx)
            if w < 0:
                if not cavity or not _beyond_border(
                        z + offsets_zyx[k, 0], y + offsets_zyx[k, 1], x + offsets_zyx[k, 2],
                        nz, ny, nx, faces):
                    continue
                w = n
        if parent[w] == -1:
            continue
        nr = add_distinct(roots, nr, _find_neg(parent, w))
    return nr


@njit(cache=True, nogil=True)
def chunk_sweep(order, cavity, mask, use_mask, offsets_flat, offsets_zyx, nz, ny, nx, zmargin,
                faces):
    """One chunk's sweep: its final pairs and its boundary tree.

    Parameters
    ----------
    order : (m,) int array
        Cavity-sweep order of the chunk's voxels inside the mask (local flat indices in C
        order, which sort like the global ones); the H0 sweep reads it backwards.
    cavity : bool
        True: the complement with the outside node (slot ``n``); False: H0 of the walls.
    mask, use_mask
        ROI as uint8; outside it a voxel is absent (H0) or part of the outside (cavities).
    offsets_flat, offsets_zyx, nz, ny, nx, zmargin
        Neighbours and grid, as for :func:`._kernels.h0_sweep`.
    faces : (6,) int64
        :data:`CLOSED`, :data:`BORDER` or :data:`SEAM` per side.

    Returns
    -------
    nodes : (k, 3) int64
        Boundary tree: local vertex (``n`` for the outside), parent node (``-1``: none
        yet) and position in the sweep (``-1`` for the outside).
    pairs : (p, 3) int64
        Final pairs: dying root, the vertex that merged it and the eldest root it merged
        into (zero persistence included).
    roots : int64 array
        Unflagged roots left at the end (H0: essential classes), in sweep order.
    """
    n = nz * ny * nx
    parent = np.full(n + 1, -1, order.dtype)
    last = np.empty(n + 1, order.dtype)
    nodes = np.empty((64, 3), np.int64)
    pairs = np.empty((64, 3), np.int64)
    nn = 0
    npairs = 0
    if cavity:
        outside_first(parent, mask, use_mask)
        nodes, nn = _push_node(nodes, nn, n, -1, -1)
        last[n] = 0
    roots = np.empty(offsets_flat.shape[0] + 1, parent.dtype)
    m = order.shape[0]
    for j in range(m):
        v = order[j] if cavity else order[m - 1 - j]
        z, y, x = unravel3(v, ny, nx)
        nr = chunk_roots(v, z, y, x, cavity, parent, roots, offsets_flat, offsets_zyx, nz, ny,
                         nx, zmargin, faces)
        on_seam = is_seam_voxel(z, y, x, nz, ny, nx, faces)
        nodes, nn, pairs, npairs = _arrive(v, -(j + 3), on_seam, roots, nr, parent, last,
                                           nodes, nn, pairs, npairs)
    return nodes[:nn].copy(), pairs[:npairs].copy(), _open_roots(order, not cavity, parent, last)


@njit(cache=True, nogil=True)
def graph_sweep(n, order, start, adjacent, on_seam, undecided):
    """The same sweep over a graph: the boundary trees of two boxes joined along a seam.

    Parameters
    ----------
    n : int
        Number of vertex ids.
    order : (m,) int64
        Sweep order of the vertices (the outside, if any, first); ids left out of it are
        not vertices.
    start, adjacent : int64 arrays
        Neighbours of vertex ``i``: ``adjacent[start[i]:start[i + 1]]``.
    on_seam : (n,) bool
        Vertices on a seam of the joined box.
    undecided : (n,) bool
        Vertices that lay on a seam of their own box: whether they start a component of
        the whole volume was not known before this sweep.

    Returns
    -------
    nodes, pairs, roots
        As for :func:`chunk_sweep`, in vertex ids of the graph.
    redirects : (r, 2) int64
        ``(vertex, eldest root)`` for each undecided vertex that leaves the seams here and
        joins a component on arrival (so it starts none): from its arrival on it shares
        the component of that root.
    """
    parent = np.full(n, -1, np.int64)
    last = np.empty(n, np.int64)
    nodes = np.empty((64, 3), np.int64)
    pairs = np.empty((64, 3), np.int64)
    redirects = np.empty((64, 2), np.int64)
    nn = 0
    npairs = 0
    nred = 0
    degree = 0
    for i in range(n):
        degree = max(degree, start[i + 1] - start[i])
    roots = np.empty(max(degree, 1), np.int64)
    for j in range(order.shape[0]):
        v = order[j]
        nr = 0
        for e in range(start[v], start[v + 1]):
            w = adjacent[e]
            if parent[w] != -1:
                nr = add_distinct(roots, nr, _find_neg(parent, w))
        if nr > 0 and undecided[v] and not on_seam[v]:
            redirects, nred = _push(redirects, nred, v, eldest_root(parent, roots, nr))
        nodes, nn, pairs, npairs = _arrive(v, -(j + 3), on_seam[v], roots, nr, parent, last,
                                           nodes, nn, pairs, npairs)
    return (nodes[:nn].copy(), pairs[:npairs].copy(), _open_roots(order, False, parent, last),
            redirects[:nred].copy())


@njit(cache=True, nogil=True)
def merge_orders(value, voxel, split, ascending_value, ascending_index):
    """Merge two runs already in sweep order, ids ``[0, split)`` and ``[split, n)``, into
    one sweep order: by value (ascending or not), ties by voxel index (ascending or not).
    The same comparison as the voxel sort, so ``-0.0`` ties with ``+0.0``."""
    n = value.shape[0]
    out = np.empty(n, np.int64)
    i = 0
    j = split
    for k in range(n):
        if j == n:
            take_first = True
        elif i == split:
            take_first = False
        elif value[i] != value[j]:
            take_first = (value[i] < value[j]) == ascending_value
        else:
            take_first = (voxel[i] < voxel[j]) == ascending_index
        if take_first:
            out[k] = i
            i += 1
        else:
            out[k] = j
            j += 1
    return out


@njit(cache=True, nogil=True)
def adjacency(first, second, n):
    """Neighbour lists of the undirected graph with edges ``first[e] -- second[e]`` over
    ``n`` vertices: those of ``i`` are ``adjacent[start[i]:start[i + 1]]``."""
    start = np.zeros(n + 1, np.int64)
    for e in range(first.shape[0]):
        start[first[e] + 1] += 1
        start[second[e] + 1] += 1
    for i in range(n):
        start[i + 1] += start[i]
    fill = start[:-1].copy()
    adjacent = np.empty(start[n], np.int64)
    for e in range(first.shape[0]):
        a = first[e]
        b = second[e]
        adjacent[fill[a]] = b
        fill[a] += 1
        adjacent[fill[b]] = a
        fill[b] += 1
    return start, adjacent
