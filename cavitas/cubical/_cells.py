"""Cells of the cubical complex of a 3D image, addressed on the doubled grid.

The engine's two complexes (see :func:`._neighbors.check_connectivity`) are written here
with every cell explicit, for the reduction of the middle dimension (:mod:`._tunnels`):

* voxels as vertices (wall connectivity 1): voxel ``q`` sits at doubled coordinates
  ``2 q``; the cells are the points of ``[0, 2 n - 2]^3``; a cell is present when all its
  voxels are inside the mask and enters with the last of them;
* voxels as top cells (wall connectivity 3): voxel ``q`` sits at ``2 q + 1``; the cells are
  the points of ``[0, 2 n]^3``; a cell is present when it touches a voxel inside the mask
  and enters with the first of them.

In both, an odd coordinate is an interval along that axis, so a cell's dimension is its
number of odd coordinates, and the cells a voxel brings in are among the 27 points of the
``3 x 3 x 3`` block around it (its *star*).

Filtration key
--------------
Voxels enter in the order of their **wall rank** (``order`` reversed, so ties keep the
engine's (value, flat index) rule). A cell's key is ``(rank * 4 + dim) * 27 + local`` with
``rank`` the wall rank of its entry voxel and ``local`` its place in that voxel's star. Keys
are distinct, order faces before their cofaces (a face enters no later, and when with the
same voxel, with a lower dimension), and decode back to the cell (:func:`key_cell`).
"""

from __future__ import annotations

import itertools

import numpy as np
from numba import njit

__all__ = ["cell_key", "enters_with", "key_cell", "key_voxel", "star_codes", "star_key",
           "wall_ranks"]


def star_codes(dim: int, vertices: bool, descending: bool = False) -> tuple[np.ndarray,
                                                                            np.ndarray]:
    """The cells of dimension ``dim`` in a voxel's star, and the other voxels they touch.

    Returns
    -------
    codes : (k, 4) int64
        Per cell, its local code (0..26, ascending unless ``descending``) and its offset
        ``(dz, dy, dx)`` in doubled coordinates.
    others : (k, j, 3) int64
        Per cell, the offsets (in voxels) of the ``j`` other voxels it touches: the same
        in both constructions (``{0, d}`` along each axis where the offset ``d`` is not 0),
        where only the dimension differs.

    Examples
    --------
    >>> codes, others = star_codes(1, vertices=True)
    >>> codes[:, 0].tolist(), others.shape
    ([4, 10, 12, 14, 16, 22], (6, 1, 3))
    >>> star_codes(1, vertices=False)[1].shape
    (12, 3, 3)
    """
    codes, others = [], []
    for code in range(27):
        offset = (code // 9 - 1, code // 3 % 3 - 1, code % 3 - 1)
        nonzero = sum(d != 0 for d in offset)
        if (nonzero if vertices else 3 - nonzero) == dim:
            codes.append((code, *offset))
            steps = itertools.product(*[(0, d) if d else (0,) for d in offset])
            others.append([s for s in steps if any(s)])
    order = slice(None, None, -1) if descending else slice(None)
    return (np.array(codes, np.int64).reshape(-1, 4)[order].copy(),
            np.array(others, np.int64).reshape(len(codes), -1, 3)[order].copy())


@njit(cache=True)
def enters_with(rank, z, y, x, r, others, nz, ny, nx, top):
    """Whether the star cell whose other voxels are at ``others`` (offsets from voxel
    ``(z, y, x)`` of wall rank ``r``) enters with that voxel: all others in the grid and
    earlier (voxels as vertices), or none of them earlier (voxels as top cells)."""
    for j in range(others.shape[0]):
        oz, oy, ox = z + others[j, 0], y + others[j, 1], x + others[j, 2]
        if oz < 0 or oy < 0 or ox < 0 or oz >= nz or oy >= ny or ox >= nx:
            if top:
                continue
            return False
        earlier = rank[(oz * ny + oy) * nx + ox] < r
        if earlier == top:
            return False
    return True


@njit(cache=True, nogil=True)
def wall_ranks(order, n, rank):
    """Fill ``rank[v]`` with the wall rank of voxel ``v`` (``len(order)`` if outside the
    mask: never enters). ``order`` is the cavity-sweep order; walls enter in reverse."""
    m = order.shape[0]
    for i in range(n):
        rank[i] = m
    for j in range(m):
        rank[order[j]] = m - 1 - j


@njit(cache=True)
def _span(c, shift, n, top):
    """Voxel coordinates ``lo..hi`` touching doubled coordinate ``c`` along one axis, and
    whether the cell is an interval there (odd coordinate). Bit operations, as ``c - shift``
    may be -1: ``>> 1`` is floor division by 2, ``& 1`` the parity."""
    t = c - shift
    lo = t >> 1
    hi = lo + (t & 1)
    if top:  # voxels as top cells: the neighbours beyond the border are absent
        lo = max(lo, 0)
        hi = min(hi, n - 1)
    return lo, hi, c & 1


@njit(cache=True)
def cell_key(rank, cz, cy, cx, nz, ny, nx, top, absent):
    """Filtration key of the cell at doubled coordinates ``(cz, cy, cx)``, or -1 if the
    cell is not in the complex (outside the doubled grid, or outside the mask).

    ``top`` selects the construction (voxels as top cells); ``absent`` is the rank of a
    voxel that never enters.
    """
    shift = 1 if top else 0
    extra = 1 if top else -1  # doubled-grid extent: 2 n + 1 (top cells), 2 n - 1 (vertices)
    if (cz < 0 or cy < 0 or cx < 0 or cz >= 2 * nz + extra or cy >= 2 * ny + extra
            or cx >= 2 * nx + extra):
        return np.int64(-1)
    z0, z1, oz = _span(cz, shift, nz, top)
    y0, y1, oy = _span(cy, shift, ny, top)
    x0, x1, ox = _span(cx, shift, nx, top)
    best = absent if top else -1
    bz = by = bx = 0
    for z in range(z0, z1 + 1):
        for y in range(y0, y1 + 1):
            for x in range(x0, x1 + 1):
                r = rank[(z * ny + y) * nx + x]
                if (r < best) if top else (r > best):
                    best, bz, by, bx = r, z, y, x
    if best >= absent or best < 0:
        return np.int64(-1)
    dim = np.int64(oz) + np.int64(oy) + np.int64(ox)
    local = ((cz - 2 * bz - shift + 1) * 9 + (cy - 2 * by - shift + 1) * 3
             + (cx - 2 * bx - shift + 1))
    return star_key(best, dim, local)


@njit(cache=True)
def star_key(rank, dim, code):
    """Key of the cell of dimension ``dim`` at ``code`` in the star of the voxel of wall
    rank ``rank``, for a cell known to enter with that voxel."""
    return (np.int64(rank) * 4 + dim) * 27 + code


@njit(cache=True)
def key_voxel(key, order):
    """Flat index of the voxel with which the cell of this key enters."""
    m = order.shape[0]
    return order[m - 1 - key // (4 * 27)]


@njit(cache=True)
def key_cell(key, order, ny, nx, top):
    """Doubled coordinates ``(cz, cy, cx)`` of the cell with this key."""
    v = key_voxel(key, order)
    local = key % 27
    plane = ny * nx
    z = v // plane
    y = (v - z * plane) // nx
    x = v - z * plane - y * nx
    shift = 1 if top else 0
    return (2 * z + shift + local // 9 - 1, 2 * y + shift + local // 3 % 3 - 1,
            2 * x + shift + local % 3 - 1)
