"""Compiled steps of the chunked cavity tree (:mod:`._chunked_tree`).

* :func:`link_parents` (client): the parent of every node from the merge records, deaths
  taken in the order of their breaches with a union-find over the nodes.
* :func:`ancestors` (client): the nodes a chunk's seam components may belong to.
* :func:`chunk_owners` (worker): the chunk swept again, each voxel given (and counted for)
  the node that is its component's root in the whole volume right after it arrives.
* :func:`subtree_sizes` (client): a node's size is its own voxels and its children's sizes.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from ._kernels import eldest_root
from ._neighbors import unravel3
from ._seam_kernels import chunk_roots, is_seam_voxel, outside_first
from ._tunnels import _find

__all__ = ["ancestors", "chunk_owners", "link_parents", "subtree_sizes"]


@njit(cache=True, nogil=True)
def link_parents(by_breach, breach, anchor, n_nodes):
    """Parents of nodes ``1 .. n_nodes - 1`` (node 0 is the outside, the eldest).

    Parameters
    ----------
    by_breach : (n_nodes - 1,) int64
        The nodes but the outside in the sweep order of their breaches.
    breach : (n_nodes,) int64
        Breach voxel per node (nodes of one breach are adjacent in ``by_breach``).
    anchor : (n_nodes,) int64
        Per node, a node of the component it merged into (before its breach).

    Notes
    -----
    Every component that a breach ``v`` merges dies at ``v`` but the eldest, which is the
    parent of all of them. Each death's anchor lies in one of those components; the
    component of the eldest dying one is anchored in an elder one, so the eldest root met
    over the anchors of one breach (found with every earlier death linked to its parent)
    is the parent.
    """
    uf = np.arange(n_nodes)
    parent = np.full(n_nodes, -1, np.int64)
    i = 0
    m = by_breach.shape[0]
    while i < m:
        j = i
        eldest = n_nodes
        while j < m and breach[by_breach[j]] == breach[by_breach[i]]:
            eldest = min(eldest, _find(uf, anchor[by_breach[j]]))
            j += 1
        for k in range(i, j):
            parent[by_breach[k]] = eldest
            uf[by_breach[k]] = eldest
        i = j
    return parent


@njit(cache=True, nogil=True)
def ancestors(parent, starts, stamp, mark):
    """The nodes of ``starts`` and all their ancestors, each once, in the order met.

    ``stamp`` (one entry per node) remembers the last ``mark`` that took a node, so one
    array serves every chunk without being cleared.
    """
    out = np.empty(16, np.int64)
    count = 0
    for s in range(starts.shape[0]):
        node = starts[s]
        while node >= 0 and stamp[node] != mark:
            stamp[node] = mark
            if count == out.shape[0]:
                grown = np.empty(2 * count, np.int64)
                grown[:count] = out
                out = grown
            out[count] = node
            count += 1
            node = parent[node]
    return out[:count].copy()


@njit(cache=True, inline="always")
def _breached_by(bvalue, bvoxel, value, voxel, ascending):
    """Whether a breach at ``(bvalue, bvoxel)`` comes at or before voxel ``(value, voxel)``
    in the cavity sweep."""
    if bvalue != value:
        return (bvalue < value) == ascending
    return bvoxel <= voxel


@njit(cache=True, inline="always")
def _core_entry(core_local, u):
    """The position of local voxel ``u`` in the sorted ``core_local`` (``-1`` if absent)."""
    at = np.searchsorted(core_local, u)
    if at < core_local.shape[0] and core_local[at] == u:
        return at
    return -1


@njit(cache=True, nogil=True)
def chunk_owners(values, order, mask, use_mask, offsets_flat, offsets_zyx, nz, ny, nx, zmargin,
                 faces, origin, global_shape, ascending, core_local, root_local, root_start,
                 chain_parent, chain_breach_value, chain_breach_voxel, owner):
    """The owner of every voxel of a chunk: its component's root in the whole volume right
    after the voxel arrives (``cavity_sweep``'s node of the voxel's arrival).

    The chunk is swept as by :func:`._seam_kernels.chunk_sweep` (cavity sweep), with the
    same eldest roots. A voxel of a component that never reached a seam belongs to the
    component's root, a core of this chunk; of the outside's, to the outside; of one that
    reached a seam, to the root of its component in the whole volume at that moment: the
    chain of ancestors of its seam root (``root_local[i]`` starts at ``root_start[i]``) is
    followed up while their breaches come at or before the voxel.

    Owners are *entries* of the chunk's candidate nodes: the cores of the chunk (entry
    ``i`` for ``core_local[i]``), then the chain entries (``len(core_local) + p``), then
    the outside (the last entry).

    Parameters
    ----------
    values : (n,) float64
        The chunk, raveled.
    order, mask, use_mask, offsets_flat, offsets_zyx, nz, ny, nx, zmargin, faces
        As for :func:`._seam_kernels.chunk_sweep` (``order`` ascending).
    origin, global_shape : (3,) int64
        The chunk's first voxel and the volume's shape (3D view), for global indices.
    ascending : bool
        The cavity sweep visits increasing values (bright walls).
    core_local : (c,) int64
        The local voxels of the cores in the chunk, increasing.
    root_local : (f,) int64
        Local voxel of each seam root.
    root_start, chain_parent, chain_breach_value, chain_breach_voxel
        Its first chain entry; per entry the next one (``-1``: the outside, never
        breached) and its breach's value and global voxel.
    owner : (n,) or (0,) int array
        Filled with each voxel's entry (``-1`` outside the mask), unless it is empty.

    Returns
    -------
    counts : (c + len(chain_parent) + 1,) int64
        Voxels per entry.
    """
    n = nz * ny * nx
    out = n
    n_cores = core_local.shape[0]
    outside_entry = n_cores + chain_parent.shape[0]
    write = owner.shape[0] == n
    if write:
        owner[:] = -1
    parent = np.full(n + 1, -1, order.dtype)
    flagged = np.zeros(n + 1, np.uint8)
    core_of = np.full(n + 1, -1, order.dtype)  # per unflagged root: its entry
    seam_root = np.full(n + 1, -1, order.dtype)
    for i in range(root_local.shape[0]):
        seam_root[root_local[i]] = i
    at = root_start.copy()
    counts = np.zeros(outside_entry + 1, np.int64)
    outside_first(parent, mask, use_mask)
    flagged[out] = 1
    roots = np.empty(offsets_flat.shape[0] + 1, parent.dtype)
    for j in range(order.shape[0]):
        u = order[j]
        z, y, x = unravel3(u, ny, nx)
        nr = chunk_roots(u, z, y, x, True, parent, roots, offsets_flat, offsets_zyx, nz, ny, nx,
                         zmargin, faces)
        seam = is_seam_voxel(z, y, x, nz, ny, nx, faces)
        if nr == 0:
            parent[u] = -(j + 3)
            best = u
            if not seam:
                core_of[u] = _core_entry(core_local, u)
                if core_of[u] < 0:
                    raise RuntimeError("a component born inside a chunk has no node")
        else:
            best = eldest_root(parent, roots, nr)
            for q in range(nr):
                seam = seam or flagged[roots[q]] == 1
                if roots[q] != best:
                    parent[roots[q]] = best
            parent[u] = best
        flagged[best] = 1 if seam else 0
        if best == out:
            entry = outside_entry
        elif not seam:
            entry = core_of[best]
        else:
            i = seam_root[best]
            if i < 0:
                raise RuntimeError("a component that reached a seam has no seam root")
            voxel = ((z + origin[0]) * global_shape[1] + y + origin[1]) * global_shape[2] \
                + x + origin[2]
            p = at[i]
            while chain_parent[p] >= 0 and _breached_by(chain_breach_value[p],
                                                        chain_breach_voxel[p], values[u],
                                                        voxel, ascending):
                p = chain_parent[p]
            at[i] = p
            entry = n_cores + p
        counts[entry] += 1
        if write:
            owner[u] = entry
    return counts


@njit(cache=True, nogil=True)
def subtree_sizes(parent, own):
    """Voxels per node when it merged: its own voxels and its descendants' (children have
    larger ids than their parents)."""
    size = own.copy()
    for i in range(size.shape[0] - 1, 0, -1):
        size[parent[i]] += size[i]
    return size
