"""H1 of a 3D image (tunnels, handles, loops of struts): a compiled cohomology reduction.

H0 and the cavities come from union-find sweeps (:mod:`._kernels`); the middle dimension of a
3D complex has no such shortcut and is reduced here, on exactly the engine's complex and
filtration (:mod:`._cells`: same cells, same levels, ties by the same voxel order).

Route (Chen & Kerber 2011; Bauer, Kerber & Reininghaus 2014; Bauer 2021):

1. **Clearing.** One union-find pass over the vertices and edges in filtration order marks
   the edges that merge two components (the deaths of H0). Their cohomology columns would
   reduce to zero, so they are skipped (Chen & Kerber 2011). One bit per edge.
2. **Cohomology, edges from last to first.** The column of an edge is its coboundary (the
   up to four squares that contain it); its pivot is the earliest square.
3. **Apparent pairs first.** When that earliest square's latest face is the edge itself,
   the two are a persistence pair whatever the rest of the matrix holds (Bauer 2021):
   paired with no reduction and nothing stored. Most pairs of an image are of this kind
   (a voxel's own lower star), and any later column that meets such a pivot re-creates
   that edge's coboundary on the fly instead of reading it.
4. **Reduction of the rest.** A column whose pivot is not apparent is reduced with a binary
   heap (entries that meet twice cancel, Z/2); the reduced column is stored under its pivot
   in an open-addressing hash table. A column that reduces to zero is an essential class
   (only a mask with a handle leaves one).

Memory beyond the image and the sweep order: a 4-byte wall rank per voxel and one byte of
edge flags per vertex, plus the union-find array of step 1 (4 bytes per vertex, freed before
step 2), plus the stored columns and pairs.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numba import njit

from ._cells import cell_key, enters_with, key_cell, key_voxel, star_codes, star_key, wall_ranks
from ._kernels import grow, prefetch_around
from ._neighbors import unravel3
from ._sort import index_dtype

__all__ = ["TunnelPairs", "tunnel_pairs"]

#: How many voxels ahead in the sweep order the neighbourhood is prefetched.
_AHEAD = 8


@dataclass(frozen=True)
class TunnelPairs:
    """H1 of a 3D image, as the voxels with which each birth and death enters.

    Attributes
    ----------
    birth_voxel, death_voxel : (k,) int64
        Flat indices of the voxels whose entry brings the edge that opens a loop and the
        square that fills it, for every finite pair of nonzero persistence.
    essential : (e,) int64
        Birth voxel of each loop that never fills (a handle of the mask).
    apparent, reduced : int
        How many columns were paired without reduction, and how many were reduced.
    """

    birth_voxel: np.ndarray
    death_voxel: np.ndarray
    essential: np.ndarray
    apparent: int
    reduced: int


@njit(cache=True)
def _axis_step(axis):
    """Unit steps ``(dz, dy, dx)`` along ``axis`` (0 = z, 1 = y, 2 = x)."""
    return (1 if axis == 0 else 0), (1 if axis == 1 else 0), (1 if axis == 2 else 0)


@njit(cache=True)
def _odd_axis(cz, cy, cx):
    """The axis along which an edge (one odd coordinate) is an interval."""
    if cz % 2 == 1:
        return 0
    if cy % 2 == 1:
        return 1
    return 2


@njit(cache=True)
def _vertex_index(cz, cy, cx, ly, lx):
    """Index of the vertex at even doubled coordinates in the vertex lattice."""
    return ((cz // 2) * ly + cy // 2) * lx + cx // 2


@njit(cache=True)
def _find(parent, x):
    while parent[x] != x:
        parent[x] = parent[parent[x]]
        x = parent[x]
    return x


@njit(cache=True, nogil=True)
def _mark_h0_deaths(order, rank, nz, ny, nx, top, vertex_codes, vertex_others, edge_codes,
                    edge_others, parent, killer):
    """Step 1: set bit ``axis`` of ``killer[vertex]`` for each edge (from ``vertex`` along
    ``axis``) that joins two components when the vertices and edges enter in key order."""
    m = order.shape[0]
    shift = 1 if top else 0
    ly, lx = (ny + 1, nx + 1) if top else (ny, nx)
    for r in range(m):
        prefetch_around(rank, order, m - 1 - r - _AHEAD, nz, ny, nx, 1, True)
        if not top:  # the vertices are the voxels
            prefetch_around(parent, order, m - 1 - r - _AHEAD, nz, ny, nx, 1, True)
        v = order[m - 1 - r]
        z, y, x = unravel3(v, ny, nx)
        pz, py, px = 2 * z + shift, 2 * y + shift, 2 * x + shift
        for i in range(vertex_codes.shape[0]):
            if enters_with(rank, z, y, x, r, vertex_others[i], nz, ny, nx, top):
                u = _vertex_index(pz + vertex_codes[i, 1], py + vertex_codes[i, 2],
                                  px + vertex_codes[i, 3], ly, lx)
                parent[u] = u
        for i in range(edge_codes.shape[0]):
            if not enters_with(rank, z, y, x, r, edge_others[i], nz, ny, nx, top):
                continue
            cz, cy, cx = pz + edge_codes[i, 1], py + edge_codes[i, 2], px + edge_codes[i, 3]
            axis = _odd_axis(cz, cy, cx)
            sz, sy, sx = _axis_step(axis)
            low = _vertex_index(cz - sz, cy - sy, cx - sx, ly, lx)
            a = _find(parent, low)
            b = _find(parent, _vertex_index(cz + sz, cy + sy, cx + sx, ly, lx))
            if a != b:
                parent[max(a, b)] = min(a, b)
                killer[low] |= np.uint8(1 << axis)


@njit(cache=True)
def _cofaces(rank, cz, cy, cx, nz, ny, nx, top, absent, out):
    """Keys of the squares containing the edge at ``(cz, cy, cx)`` into ``out``; their count
    and the earliest of them with its doubled coordinates (key -1 if there is none)."""
    axis = _odd_axis(cz, cy, cx)
    count = 0
    best = np.int64(-1)
    bz = by = bx = 0
    for other in range(3):
        if other == axis:
            continue
        sz, sy, sx = _axis_step(other)
        for sign in (-1, 1):
            qz, qy, qx = cz + sign * sz, cy + sign * sy, cx + sign * sx
            k = cell_key(rank, qz, qy, qx, nz, ny, nx, top, absent)
            if k >= 0:
                out[count] = k
                count += 1
                if best < 0 or k < best:
                    best, bz, by, bx = k, qz, qy, qx
    return count, best, bz, by, bx


@njit(cache=True)
def _latest_face(rank, cz, cy, cx, nz, ny, nx, top, absent):
    """Key of the last face to enter of the square at ``(cz, cy, cx)`` (all are present)."""
    best = np.int64(-1)
    for axis in range(3):
        if (cz, cy, cx)[axis] % 2 == 0:
            continue
        sz, sy, sx = _axis_step(axis)
        for sign in (-1, 1):
            k = cell_key(rank, cz + sign * sz, cy + sign * sy, cx + sign * sx, nz, ny, nx, top,
                         absent)
            best = max(best, k)
    return best


@njit(cache=True)
def _heap_push(heap, size, key):
    if size == heap.shape[0]:
        heap = grow(heap, size + 1)
    i = size
    heap[i] = key
    while i > 0:
        up = (i - 1) // 2
        if heap[up] <= heap[i]:
            break
        heap[up], heap[i] = heap[i], heap[up]
        i = up
    return heap, size + 1


@njit(cache=True)
def _heap_pop(heap, size):
    """Remove the smallest key (``heap[0]``); the new size."""
    size -= 1
    heap[0] = heap[size]
    i = 0
    while True:
        a = 2 * i + 1
        if a >= size:
            break
        if a + 1 < size and heap[a + 1] < heap[a]:
            a += 1
        if heap[i] <= heap[a]:
            break
        heap[a], heap[i] = heap[i], heap[a]
        i = a
    return size


@njit(cache=True)
def _heap_pivot(heap, size):
    """The smallest key present an odd number of times (-1 if none); pairs below it are
    removed (they cancel over Z/2). Returns the key and the new size."""
    while size > 0:
        top = heap[0]
        size = _heap_pop(heap, size)
        if size > 0 and heap[0] == top:
            size = _heap_pop(heap, size)
            continue
        heap, size = _heap_push(heap, size, top)
        return top, heap, size
    return np.int64(-1), heap, size


@njit(cache=True)
def _slot(keys, key):
    """Slot of ``key`` in the open-addressing table ``keys`` (its own, or the empty one)."""
    mask = keys.shape[0] - 1
    h = (np.uint64(key) * np.uint64(11400714819323198485)) >> np.uint64(40)
    i = np.int64(h) & mask
    while keys[i] != key and keys[i] != -1:
        i = (i + 1) & mask
    return i


@njit(cache=True)
def _rehash(keys, vals):
    new_keys = np.full(2 * keys.shape[0], -1, np.int64)
    new_vals = np.empty(2 * keys.shape[0], np.int64)
    for i in range(keys.shape[0]):
        if keys[i] != -1:
            j = _slot(new_keys, keys[i])
            new_keys[j] = keys[i]
            new_vals[j] = vals[i]
    return new_keys, new_vals


@njit(cache=True, nogil=True)
def _reduce_coboundaries(order, rank, nz, ny, nx, top, edge_codes, edge_others, killer):
    """Steps 2 to 4: pair every edge left by the clearing with a square, or as essential.

    Returns the birth and death voxels of the pairs that enter with different voxels (the
    others have zero persistence; the image values are not read here, so the kernel is
    compiled once for every dtype), the birth voxels of the essential classes, and the
    numbers of apparent and reduced columns.
    """
    m = order.shape[0]
    shift = 1 if top else 0
    ly, lx = (ny + 1, nx + 1) if top else (ny, nx)
    cof = np.empty(4, np.int64)
    heap = np.empty(64, np.int64)
    keys = np.full(1024, -1, np.int64)  # pivot square -> stored column
    vals = np.empty(1024, np.int64)
    n_stored = 0
    pool = np.empty(1024, np.int64)
    starts = np.zeros(1024, np.int64)
    births = np.empty(1024, np.int64)
    deaths = np.empty(1024, np.int64)
    essential = np.empty(16, np.int64)
    n_pairs = n_essential = n_apparent = n_reduced = 0
    for r in range(m - 1, -1, -1):
        prefetch_around(rank, order, m - 1 - r + _AHEAD, nz, ny, nx, 1, True)
        v = order[m - 1 - r]
        z, y, x = unravel3(v, ny, nx)
        pz, py, px = 2 * z + shift, 2 * y + shift, 2 * x + shift
        for i in range(edge_codes.shape[0]):
            if not enters_with(rank, z, y, x, r, edge_others[i], nz, ny, nx, top):
                continue
            cz, cy, cx = pz + edge_codes[i, 1], py + edge_codes[i, 2], px + edge_codes[i, 3]
            edge = star_key(r, 1, edge_codes[i, 0])
            axis = _odd_axis(cz, cy, cx)
            sz, sy, sx = _axis_step(axis)
            if killer[_vertex_index(cz - sz, cy - sy, cx - sx, ly, lx)] & (1 << axis):
                continue  # cleared: this edge ends a component
            count, pivot, qz, qy, qx = _cofaces(rank, cz, cy, cx, nz, ny, nx, top, m, cof)
            if pivot >= 0 and _latest_face(rank, qz, qy, qx, nz, ny, nx, top, m) == edge:
                n_apparent += 1
            else:
                n_reduced += 1
                size = 0
                for q in range(count):
                    heap, size = _heap_push(heap, size, cof[q])
                while True:
                    pivot, heap, size = _heap_pivot(heap, size)
                    if pivot < 0:
                        break
                    slot = _slot(keys, pivot)
                    if keys[slot] == pivot:  # a stored column has this pivot: add it
                        col = vals[slot]
                        for q in range(starts[col], starts[col + 1]):
                            heap, size = _heap_push(heap, size, pool[q])
                        continue
                    qz, qy, qx = key_cell(pivot, order, ny, nx, top)
                    other = _latest_face(rank, qz, qy, qx, nz, ny, nx, top, m)
                    if other != edge:
                        oz, oy, ox = key_cell(other, order, ny, nx, top)
                        count, first, _, _, _ = _cofaces(rank, oz, oy, ox, nz, ny, nx, top, m,
                                                         cof)
                        if first == pivot:  # an apparent pair's column, re-created
                            for q in range(count):
                                heap, size = _heap_push(heap, size, cof[q])
                            continue
                    break
                if pivot >= 0:  # store the reduced column under its pivot
                    if 2 * (n_stored + 1) > keys.shape[0]:
                        keys, vals = _rehash(keys, vals)
                    if n_stored + 2 > starts.shape[0]:
                        starts = grow(starts, n_stored + 2)
                    slot = _slot(keys, pivot)
                    keys[slot] = pivot
                    vals[slot] = n_stored
                    at = starts[n_stored]
                    while True:
                        top_key, heap, size = _heap_pivot(heap, size)
                        if top_key < 0:
                            break
                        size = _heap_pop(heap, size)
                        if at == pool.shape[0]:
                            pool = grow(pool, at + 1)
                        pool[at] = top_key
                        at += 1
                    n_stored += 1
                    starts[n_stored] = at
            if pivot < 0:
                if n_essential == essential.shape[0]:
                    essential = grow(essential, n_essential + 1)
                essential[n_essential] = v
                n_essential += 1
                continue
            dead = key_voxel(pivot, order)
            if dead != v:
                if n_pairs == births.shape[0]:
                    births = grow(births, n_pairs + 1)
                    deaths = grow(deaths, n_pairs + 1)
                births[n_pairs] = v
                deaths[n_pairs] = dead
                n_pairs += 1
    return (births[:n_pairs].copy(), deaths[:n_pairs].copy(), essential[:n_essential].copy(),
            n_apparent, n_reduced)


def tunnel_pairs(values: np.ndarray, order: np.ndarray, shape: tuple[int, int, int],
                 connectivity: int) -> TunnelPairs:
    """H1 of a 3D image under the engine's filtration.

    Parameters
    ----------
    values : (n,) array
        The image, raveled (read only to drop the pairs of zero persistence).
    order : (m,) int array
        The cavity-sweep order of :func:`._sort.sort_voxels`; voxels outside the mask are
        absent from it, so they never enter.
    shape : (nz, ny, nx)
    connectivity : {1, 3}
        The wall connectivity: 1 builds voxels as vertices, 3 voxels as top cells.

    Returns
    -------
    TunnelPairs

    Examples
    --------
    A square ring of bright voxels (value 2) around a dark one, in one plane of a volume:
    one loop, born when the ring closes (its last voxel, 0, as ties go by flat index) and
    filled when the centre (4) enters.

    >>> ring = np.zeros((1, 3, 3), np.uint8)
    >>> ring[0] = [[2, 2, 2], [2, 1, 2], [2, 2, 2]]
    >>> from cavitas.cubical._sort import sort_voxels
    >>> order = sort_voxels(ring.reshape(-1), None, descending=False)[0]
    >>> found = tunnel_pairs(ring.reshape(-1), order, (1, 3, 3), 1)
    >>> found.birth_voxel.tolist(), found.death_voxel.tolist()
    ([0], [4])
    """
    nz, ny, nx = shape
    top = connectivity != 1
    n = nz * ny * nx
    rank: np.ndarray = np.empty(n, index_dtype(n + 1))
    wall_ranks(order, n, rank)
    lattice = (nz + 1) * (ny + 1) * (nx + 1) if top else n
    killer = np.zeros(lattice, np.uint8)
    parent: np.ndarray = np.empty(lattice, index_dtype(lattice))
    _mark_h0_deaths(order, rank, nz, ny, nx, top, *star_codes(0, not top),
                    *star_codes(1, not top), parent, killer)
    del parent
    births, deaths, essential, apparent, reduced = _reduce_coboundaries(
        order, rank, nz, ny, nx, top, *star_codes(1, not top, descending=True), killer)
    persists = values[births] != values[deaths]
    return TunnelPairs(births[persists], deaths[persists], essential, int(apparent),
                       int(reduced))
