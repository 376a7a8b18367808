"""Compiled labelling passes over the cavity-sweep order (numba, private).

The kernels replay the union-find of the cavity sweep over ``order`` once, with the
neighbour rules of :mod:`cavitas.cubical._neighbors` (the complement's connectivity, the
border joining the outside), so they see exactly the components the
:class:`~cavitas.cubical.CavityTree` describes. Neither sorts nor relabels per feature.

* :func:`owner_pass` writes the tree node that owned each voxel's component when the voxel
  arrived; :func:`resolve_regions` then labels every voxel with the innermost kept region
  (chamber or enclosure) that holds it. Each region is rooted at a tree node and closes at
  a rank ``R`` (its level, as a position in ``order``); a voxel that enters the component
  of node ``n`` at rank ``r`` belongs to the first region of ``n`` with ``r < R``,
  otherwise to ``cont[n]``: what its component becomes when ``n`` merges into its parent.
* :func:`basin_pass` floods from the kept cores: a voxel takes the basin of its
  earliest-visited labelled neighbour; voxels of components without a kept core wait in a
  union-find until their component first touches a basin (at its lowest pass), and then
  all take that basin. The border (and everything outside the ROI) is the basin ``outside``.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from ..cubical._kernels import add_distinct, prefetch_around
from ..cubical._neighbors import is_interior, neighbor_or_outside, unravel3
from ..cubical._prefetch import prefetch

#: How many voxels ahead in the sweep order the neighbourhood is prefetched.
_AHEAD = 8

__all__ = ["basin_pass", "continuation", "keep_largest_pieces", "owner_pass",
           "resolve_arrivals", "resolve_regions", "same_value_pieces"]


@njit(cache=True, nogil=True)
def _find(uf, a):
    root = a
    while uf[root] != root:
        root = uf[root]
    while uf[a] != root:
        nxt = uf[a]
        uf[a] = root
        a = nxt
    return root


@njit(cache=True, nogil=True)
def _identity(size, dtype):
    """``arange(size)`` in the voxel index type (int32 below 2**31 voxels: half the memory)."""
    out = np.empty(size, dtype)
    for i in range(size):
        out[i] = i
    return out


@njit(cache=True, nogil=True)
def _resolve(node, r, reg_start, reg_rank, reg_label, cont):
    for j in range(reg_start[node], reg_start[node + 1]):
        if r < reg_rank[j]:
            return reg_label[j]
    return cont[node]


@njit(cache=True, nogil=True)
def continuation(parent, merge_rank, reg_start, reg_rank, reg_label):
    """``cont[n]``: the region a voxel of node ``n``'s component ends in once ``n`` merges.

    Nodes are in sweep order (``parent[n] < n``), so one increasing loop suffices.
    """
    n_nodes = parent.shape[0]
    cont = np.zeros(n_nodes, reg_label.dtype)
    for n in range(1, n_nodes):
        cont[n] = _resolve(parent[n], merge_rank[n], reg_start, reg_rank, reg_label, cont)
    return cont


@njit(cache=True, nogil=True)
def _owner_of(out, root, size):
    return 0 if root == size else out[root]


@njit(cache=True, nogil=True)
def owner_pass(order, outside_seed, use_seed, nz, ny, nx, zmargin, off, offz, out):
    """Write into ``out`` (flat) the tree node that owns each voxel's component on arrival.

    On entry ``out`` holds each core's node and -1 elsewhere. The owner of a component is
    its eldest node (the outside, 0, is the eldest of all); voxels beyond the ROI
    (``outside_seed``, read if ``use_seed``) belong to the outside from the start, as in
    the cavity sweep. Returns -1, or the first voxel that starts a component without being
    a node's core (the tree and the order disagree).
    """
    n = order.shape[0]
    size = out.shape[0]
    # uf[i] < 0: not visited yet. Every root is a core (or ``size``, the outside), and a
    # core's owner is its own node, so a root's owner is read from ``out``: no per-voxel
    # arrays beyond the union-find itself.
    uf = np.full(size + 1, -1, order.dtype)
    uf[size] = size
    if use_seed:
        for i in range(size):
            if outside_seed[i]:
                uf[i] = size
                out[i] = 0
    roots = np.empty(off.shape[0] + 1, np.int64)
    for r in range(n):
        v = order[r]
        z, y, x = unravel3(v, ny, nx)
        inner = is_interior(z, y, x, nz, ny, nx, zmargin)
        touch = False
        m = 0
        last = -1  # union-find entry of the last visited neighbour: same entry, same root
        for k in range(off.shape[0]):
            if inner:
                u = v + off[k]
            else:
                u = neighbor_or_outside(v, z, y, x, k, off, offz, nz, ny, nx)
                if u < 0:
                    touch = True
                    continue
            if uf[u] >= 0:
                if uf[u] == last:
                    continue
                last = uf[u]
                m = add_distinct(roots, m, _find(uf, u))
        if touch:
            m = add_distinct(roots, m, size)
        if m == 0:
            if out[v] < 0:
                return v
            uf[v] = v
        else:
            best = roots[0]
            for j in range(1, m):
                if _owner_of(out, roots[j], size) < _owner_of(out, best, size):
                    best = roots[j]
            for j in range(m):
                if roots[j] != best:
                    uf[roots[j]] = best
            uf[v] = best
            out[v] = _owner_of(out, best, size)
    return -1


@njit(cache=True, nogil=True)
def resolve_regions(order, reg_start, reg_rank, reg_label, cont, out):
    """Turn :func:`owner_pass`'s owners in ``out`` into the innermost region of each voxel.

    A voxel that entered the component of node ``n`` at rank ``r`` belongs to the first
    region of ``n`` with ``r < R``, otherwise to ``cont[n]``. Voxels beyond the ROI (not in
    ``order``) keep the outside's 0.
    """
    for r in range(order.shape[0]):
        v = order[r]
        out[v] = _resolve(out[v], r, reg_start, reg_rank, reg_label, cont)


@njit(cache=True, nogil=True)
def resolve_arrivals(owner, values, ascending, reg_start, reg_key, reg_label, cont, out):
    """:func:`resolve_regions` for one chunk of a chunked volume, without ranks.

    ``owner[u]`` is the entry (the tables' node index) that owned voxel ``u``'s component on
    arrival (-1: outside the mask, label 0); a region closes at a *key*, the level in the
    sweep's direction (``-level`` when the sweep descends), and a voxel lies before it when
    its own key is smaller: what ``r < R`` is when ``R`` is the first rank at that level.
    """
    for u in range(owner.shape[0]):
        e = owner[u]
        if e < 0:
            out[u] = 0
        else:
            key = np.float64(values[u]) if ascending else -np.float64(values[u])
            out[u] = _resolve(e, key, reg_start, reg_key, reg_label, cont)


@njit(cache=True, nogil=True)
def basin_pass(order, rank, label_of_core, outside_seed, nz, ny, nx, zmargin, off, offz,
               outside_label, out, fetch):
    """Flood from the kept cores into ``out`` (flat); return the number of voxels labelled.

    ``label_of_core[v]`` is the basin label (>= 1) of a kept core, else 0; ``rank[v]`` is
    the position of ``v`` in ``order`` (-1 beyond the ROI: ``outside_seed``, which starts
    in the outside basin). ``fetch``: prefetch ahead
    (:func:`cavitas.cubical._kernels.worth_prefetching`).
    """
    pending = -1
    n = order.shape[0]
    size = out.shape[0]
    uf = _identity(size, order.dtype)
    root_label = np.zeros(size, out.dtype)
    out[:] = 0  # 0: not visited yet; a visited voxel holds its basin or ``pending``
    for i in range(size):
        if outside_seed[i]:
            out[i] = outside_label
    waiting = np.empty(off.shape[0], np.int64)
    full = off.shape[0] > 2 * (2 + zmargin)
    for r in range(n):
        if fetch:
            prefetch_around(out, order, r + _AHEAD, nz, ny, nx, zmargin, full)
            if r + _AHEAD < n:
                prefetch(label_of_core, order[r + _AHEAD])
        v = order[r]
        if label_of_core[v] > 0:
            out[v] = label_of_core[v]
            continue
        z, y, x = unravel3(v, ny, nx)
        inner = is_interior(z, y, x, nz, ny, nx, zmargin)
        # Most voxels see one basin only, and then no rank need be read; where basins
        # meet, the earliest-visited labelled neighbour decides.
        best = 0
        mixed = False
        m = 0
        seen = False
        if inner:  # without branches: the largest and smallest label around, if none waits
            hi = 0
            lo = outside_label + 1
            waits = False
            for k in range(off.shape[0]):
                lab = out[v + off[k]]
                waits |= lab == pending
                hi = max(hi, lab)
                lo = min(lo, lab if lab > 0 else outside_label + 1)
            seen = not waits
            if seen and hi > 0:
                best = hi
                mixed = lo != hi
        for k in range(off.shape[0] if seen else 0, off.shape[0]):  # else one by one
            if inner:
                u = v + off[k]
            else:
                u = neighbor_or_outside(v, z, y, x, k, off, offz, nz, ny, nx)
                if u < 0:
                    if best == 0:
                        best = outside_label
                    elif best != outside_label:
                        mixed = True
                    continue
            lab = out[u]
            if lab == 0:
                continue
            if lab == pending:
                rt = _find(uf, u)
                lab = root_label[rt]
                if lab == 0:
                    m = add_distinct(waiting, m, rt)
                    continue
            if best == 0:
                best = lab
            elif lab != best:
                mixed = True
        if mixed:
            best_rank = n + 1
            for k in range(off.shape[0]):
                if inner:
                    u = v + off[k]
                else:
                    u = neighbor_or_outside(v, z, y, x, k, off, offz, nz, ny, nx)
                    if u < 0:
                        best = outside_label
                        best_rank = -1
                        continue
                lab = out[u]
                if lab == 0:
                    continue
                if lab == pending:
                    lab = root_label[_find(uf, u)]
                    if lab == 0:
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


@njit(cache=True, nogil=True)
def same_value_pieces(labels, back):
    """Connected pieces of equal nonzero value, numbered ``1..`` in raster order of their
    first voxel (as :func:`skimage.measure.label` with ``background=0`` numbers them).

    ``labels`` is 3D (a 2D image as one plane); ``back`` holds the ``(dz, dy, dx)``
    neighbour offsets that come earlier in raster order. One int32 array (4 bytes per
    voxel) serves as union-find forest and then as the output; the root of a piece is its
    first voxel, so numbering is one increasing pass.
    """
    nz, ny, nx = labels.shape
    flat = labels.ravel()
    out = np.empty(flat.shape[0], np.int32)
    for z in range(nz):
        for y in range(ny):
            for x in range(nx):
                i = (z * ny + y) * nx + x
                lab = flat[i]
                out[i] = i
                if lab == 0:
                    continue
                for k in range(back.shape[0]):
                    zz, yy, xx = z + back[k, 0], y + back[k, 1], x + back[k, 2]
                    if zz < 0 or yy < 0 or xx < 0 or yy >= ny or xx >= nx:
                        continue
                    j = (zz * ny + yy) * nx + xx
                    if flat[j] != lab:
                        continue
                    a = _find(out, i)
                    b = _find(out, j)
                    if a < b:
                        out[b] = a
                    elif b < a:
                        out[a] = b
    # parents come before their children: one increasing pass points every voxel at its
    # root and numbers the roots (negative while the pass runs)
    count = 0
    for i in range(flat.shape[0]):
        if flat[i] == 0:
            out[i] = 0
        elif out[i] == i:
            count += 1
            out[i] = -count
        else:
            out[i] = out[out[i]]
    for i in range(flat.shape[0]):
        out[i] = -out[i]
    return out.reshape(labels.shape), count


@njit(cache=True, nogil=True)
def keep_largest_pieces(labels, back, n_labels, prefer):
    """``labels`` (3D, values ``0..n_labels``) with each value kept on one piece only, as int32.

    The piece kept is the one holding voxel ``prefer[value]`` (flat index; -1 for none),
    else the largest (:func:`same_value_pieces`; ties go to the piece numbered last).

    Works in the int32 piece array itself: 4 bytes per voxel in all.
    """
    out, count = same_value_pieces(labels, back)
    flat, lab = out.ravel(), labels.ravel()
    size = np.zeros(count + 1, np.int64)
    owner = np.zeros(count + 1, np.int64)
    for i in range(flat.shape[0]):
        p = flat[i]
        if p > 0:
            size[p] += 1
            owner[p] = lab[i]
    best = np.zeros(n_labels + 1, np.int64)
    best_size = np.zeros(n_labels + 1, np.int64)
    for p in range(1, count + 1):
        if size[p] >= best_size[owner[p]]:
            best_size[owner[p]] = size[p]
            best[owner[p]] = p
    for value in range(1, min(n_labels + 1, prefer.shape[0])):
        v = prefer[value]
        if v >= 0 and lab[v] == value and flat[v] > 0:
            best[value] = flat[v]
    for i in range(flat.shape[0]):
        p = flat[i]
        flat[i] = lab[i] if p > 0 and best[owner[p]] == p else 0
    return out
