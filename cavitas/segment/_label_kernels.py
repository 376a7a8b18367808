"""Compiled labelling passes over the cavity-sweep order (numba, private).

Both kernels replay the union-find of the cavity sweep over ``order`` once, with the
neighbour rules of :mod:`cavitas.cubical._neighbors` (the complement's connectivity, the
border joining the outside), so they see exactly the components the
:class:`~cavitas.cubical.CavityTree` describes. Neither sorts nor relabels per feature.

* :func:`nested_pass` labels every voxel with the innermost kept region (chamber or
  enclosure) that holds it. Each region is rooted at a tree node and closes at a rank
  ``R`` (its level, as a position in ``order``); a voxel that enters the component of node
  ``n`` at rank ``r`` belongs to the first region of ``n`` with ``r < R``, otherwise to
  ``cont[n]``: what its component becomes when ``n`` merges into its parent.
* :func:`basin_pass` floods from the kept cores: a voxel takes the basin of its
  earliest-visited labelled neighbour; voxels of components without a kept core wait in a
  union-find until their component first touches a basin (at its lowest pass), and then
  all take that basin. The border (and everything outside the ROI) is the basin ``outside``.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from ..cubical._neighbors import is_interior, neighbor_or_outside, unravel3

__all__ = ["basin_pass", "continuation", "nested_pass"]


@njit(cache=True)
def _find(uf, a):
    root = a
    while uf[root] != root:
        root = uf[root]
    while uf[a] != root:
        nxt = uf[a]
        uf[a] = root
        a = nxt
    return root


@njit(cache=True)
def _resolve(node, r, reg_start, reg_rank, reg_label, cont):
    for j in range(reg_start[node], reg_start[node + 1]):
        if r < reg_rank[j]:
            return reg_label[j]
    return cont[node]


@njit(cache=True)
def continuation(parent, merge_rank, reg_start, reg_rank, reg_label):
    """``cont[n]``: the region a voxel of node ``n``'s component ends in once ``n`` merges.

    Nodes are in sweep order (``parent[n] < n``), so one increasing loop suffices.
    """
    n_nodes = parent.shape[0]
    cont = np.zeros(n_nodes, reg_label.dtype)
    for n in range(1, n_nodes):
        cont[n] = _resolve(parent[n], merge_rank[n], reg_start, reg_rank, reg_label, cont)
    return cont


@njit(cache=True)
def nested_pass(order, node_of_core, outside_seed, nz, ny, nx, zmargin, off, offz,
                reg_start, reg_rank, reg_label, cont, out):
    """Write into ``out`` (flat) the innermost region of every voxel; return -1 or the bad voxel.

    ``node_of_core[v]`` is the node whose core is ``v`` (else -1); ``outside_seed[v]`` marks
    the voxels beyond the ROI, which are not in ``order`` and belong to the outside from the
    start (as in the cavity sweep). A voxel starting a component
    that is no node's core means the tree and the order disagree: its index is returned.
    """
    n = order.shape[0]
    size = out.shape[0]
    uf = np.arange(size + 1)
    node_at = np.full(size + 1, -1, np.int64)
    node_at[size] = 0
    visited = outside_seed.copy()
    for i in range(size):
        if outside_seed[i]:
            uf[i] = size
    roots = np.empty(off.shape[0] + 1, np.int64)
    for r in range(n):
        v = order[r]
        z, y, x = unravel3(v, ny, nx)
        inner = is_interior(z, y, x, nz, ny, nx, zmargin)
        touch = False
        m = 0
        for k in range(off.shape[0]):
            if inner:
                u = v + off[k]
            else:
                u = neighbor_or_outside(v, z, y, x, k, off, offz, nz, ny, nx)
                if u < 0:
                    touch = True
                    continue
            if visited[u]:
                rt = _find(uf, u)
                new = True
                for j in range(m):
                    if roots[j] == rt:
                        new = False
                if new:
                    roots[m] = rt
                    m += 1
        if touch:
            rt = _find(uf, size)
            new = True
            for j in range(m):
                if roots[j] == rt:
                    new = False
            if new:
                roots[m] = rt
                m += 1
        visited[v] = True
        if m == 0:
            nd = node_of_core[v]
            if nd < 0:
                return v
            node_at[v] = nd
        else:
            best = roots[0]
            for j in range(1, m):
                if node_at[roots[j]] < node_at[best]:
                    best = roots[j]
            for j in range(m):
                if roots[j] != best:
                    uf[roots[j]] = best
            uf[v] = best
            nd = node_at[best]
        out[v] = _resolve(nd, r, reg_start, reg_rank, reg_label, cont)
    return -1


@njit(cache=True)
def basin_pass(order, rank, label_of_core, outside_seed, nz, ny, nx, zmargin, off, offz,
               outside_label, out):
    """Flood from the kept cores into ``out`` (flat); return the number of voxels labelled.

    ``label_of_core[v]`` is the basin label (>= 1) of a kept core, else 0; ``rank[v]`` is
    the position of ``v`` in ``order`` (-1 beyond the ROI: ``outside_seed``, which starts
    in the outside basin).
    """
    pending = -1
    n = order.shape[0]
    size = out.shape[0]
    uf = np.arange(size)
    root_label = np.zeros(size, out.dtype)
    visited = outside_seed.copy()
    for i in range(size):
        if outside_seed[i]:
            out[i] = outside_label
    waiting = np.empty(off.shape[0], np.int64)
    for r in range(n):
        v = order[r]
        visited[v] = True
        if label_of_core[v] > 0:
            out[v] = label_of_core[v]
            continue
        z, y, x = unravel3(v, ny, nx)
        inner = is_interior(z, y, x, nz, ny, nx, zmargin)
        best = 0
        best_rank = n
        m = 0
        for k in range(off.shape[0]):
            if inner:
                u = v + off[k]
            else:
                u = neighbor_or_outside(v, z, y, x, k, off, offz, nz, ny, nx)
                if u < 0:
                    best = outside_label
                    best_rank = -1
                    continue
            if not visited[u] or u == v:
                continue
            lab = out[u]
            if lab == pending:
                rt = _find(uf, u)
                lab = root_label[rt]
                if lab == 0:
                    new = True
                    for j in range(m):
                        if waiting[j] == rt:
                            new = False
                    if new:
                        waiting[m] = rt
                        m += 1
                    continue
            if rank[u] < best_rank:
                best = lab
                best_rank = rank[u]
        if best != 0:
            out[v] = best
            for j in range(m):
                root_label[waiting[j]] = best
        else:
            out[v] = pending
            for j in range(m):
                uf[waiting[j]] = v
    for r in range(n):
        v = order[r]
        if out[v] == pending:
            out[v] = root_label[_find(uf, v)]
    return n
