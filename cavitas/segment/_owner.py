"""The size of every cavity: which node's component each voxel joins in the sweep (numba).

A node's *breach region* (its component just before it opens) is every voxel that joined
the component while the node, or a node that merged into it, owned it. One replay of the
sweep's union-find gives each voxel's owner on arrival; summing the owners up the tree
(children merge before their parents open) gives every node's region size at once.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from ..cubical._kernels import add_distinct
from ..cubical._neighbors import is_interior, neighbor_or_outside, unravel3
from ._label_kernels import _find

__all__ = ["region_sizes"]


def region_sizes(tree, order: np.ndarray, outside: np.ndarray | None, connectivity: int,
                 shape: tuple[int, ...]) -> np.ndarray:
    """Voxels in each node's breach region (``inf`` for the outside).

    Examples
    --------
    >>> from cavitas import cubical
    >>> img = np.ones((7, 7)); img[2:5, 2:5] = 0; img[3, 3] = -1
    >>> order, tree = cubical.cavity_sweep(img, walls="bright")
    >>> region_sizes(tree, order, None, 1, img.shape)[1:].tolist()
    [9.0]
    """
    from ..cubical._neighbors import dual_connectivity, grid_shape3, neighbor_offsets

    size = int(np.prod(shape))
    index_type = np.int32 if max(size, tree.n_nodes) < 2**31 else np.int64
    owner = np.full(size, -1, index_type)
    owner[tree.core[1:]] = np.arange(1, tree.n_nodes)
    seed = (np.zeros(1, np.bool_) if outside is None
            else np.ascontiguousarray(outside.ravel(), np.bool_))
    offsets, offsets_zyx = neighbor_offsets(shape, dual_connectivity(len(shape), connectivity))
    grid = (*grid_shape3(shape), 1 if len(shape) == 3 else 0)
    bad = owner_pass(order, seed, outside is not None, *grid, offsets, offsets_zyx, owner)
    if bad >= 0:
        raise RuntimeError(f"cavity tree and sweep order disagree at voxel {bad}")
    del seed
    # voxels beyond the ROI are the outside's (node 0), whose size is infinite anyway
    return _sum_up(tree.parent.astype(np.int64), _count(owner, tree.n_nodes))


@njit(cache=True, nogil=True)
def _count(owner, n_nodes):
    counts = np.zeros(n_nodes, np.float64)
    for i in range(owner.shape[0]):
        counts[owner[i]] += 1.0
    return counts


@njit(cache=True, nogil=True)
def _sum_up(parent, counts):
    out = counts.copy()
    for n in range(parent.shape[0] - 1, 0, -1):
        out[parent[n]] += out[n]
    out[0] = np.inf
    return out


@njit(cache=True, nogil=True)
def _owner_of(out, root, size):
    return 0 if root == size else out[root]


@njit(cache=True, nogil=True)
def owner_pass(order, outside_seed, use_seed, nz, ny, nx, zmargin, off, offz, out):
    """Write into ``out`` (flat) the node that owns each voxel's component on arrival.

    On entry ``out`` holds each core's node and -1 elsewhere. The owner of a component is
    its eldest node (the outside, 0, is the eldest of all); voxels beyond the ROI
    (``outside_seed``, read if ``use_seed``) are the outside's. Returns -1, or the first
    voxel that starts a component without being a node's core (tree and order disagree).
    """
    n = order.shape[0]
    size = out.shape[0]
    # uf[i] < 0: not visited yet. Every root is a core (or ``size``, the outside), and a
    # core's owner is its own node, so the owner of a root is ``out[root]``.
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
        last = -1
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
