"""Compiled sweeps for 2D images: local pairing first, then a union-find over the rest.

The general kernels (:mod:`._kernels`) visit every voxel in value order, which is random
in space: most of their time goes to cache misses. In a 2D image most pixels are
*regular* (:mod:`._ring`): the earlier pixels of their 8-pixel ring form one piece, so the
pixel only joins the component of that piece. Only the *critical* pixels (a minimum, a
possible merge, or a pixel on the image border; about 4 % of a smoothed-noise image) can
start or merge components. Each sweep therefore runs in three passes:

1. :func:`plane_critical` (raster order): a regular pixel gets a pointer to an earlier
   neighbour of its piece, a critical one is numbered. Following pointers from a pixel
   always descends in the sweep order and ends at a critical pixel that is in the same
   component from the pixel's arrival on.
2. :func:`plane_links` (raster order over the critical pixels): for each critical pixel,
   the critical pixels reached from its earlier neighbours, one neighbour per piece of the
   earlier ring (the outside too, for a border pixel of the cavity sweep).
3. The critical pixels are sorted by (value, flat index), as the full sweep would visit
   them, and :func:`plane_h0_merges` / :func:`plane_cavity_merges` run the union-find of
   :mod:`._kernels` over them alone, in a compact array of one slot per critical pixel.

Merges, births, deaths and tree nodes are exactly those of the full sweep: the pixels left
out change nothing. Only the passes in raster order touch the whole image, so the random
memory accesses of a value-ordered sweep are confined to the small arrays of step 3.

Numbering: critical pixel ``c`` (``0 <= c < m``, in raster order) holds ``-(c + 2)`` in
``parent``; slot ``n`` of ``parent`` (the outside, which pixels outside the mask point to in
the cavity sweep) holds ``-(m + 2)``, so the outside is critical number ``m``.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from ._kernels import _find_neg, add_distinct, eldest_root, grow
from ._ring import RING_DX, RING_DY

__all__ = ["plane_cavity_merges", "plane_critical", "plane_h0_merges", "plane_links"]


@njit(cache=True, inline="always")
def _ring_offsets(nx):
    off = np.empty(8, np.int64)
    for k in range(8):
        off[k] = RING_DY[k] * nx + RING_DX[k]
    return off


@njit(cache=True, inline="always")
def _before(a, b, bright):
    """Whether a pixel of value ``a`` with a smaller flat index enters the cavity sweep
    before one of value ``b``."""
    return a <= b if bright else a >= b


@njit(cache=True, inline="always")
def _before_later(a, b, bright):
    """The same for a pixel of value ``a`` with a larger flat index."""
    return a < b if bright else a > b


@njit(cache=True, inline="always")
def _cavity_earlier(values, w, v, bright):
    """Whether pixel ``w`` enters the cavity sweep before pixel ``v`` (ties by index)."""
    if w < v:
        return _before(values[w], values[v], bright)
    return _before_later(values[w], values[v], bright)


@njit(cache=True, inline="always")
def _row_codes(up, mid, down, bright, codes):
    """The ring code of every interior pixel of a row: bit k set if ring pixel k comes
    earlier in the cavity sweep (increasing (value, index) for bright walls).

    From slices of the rows above and below, so that the loop compiles to vector
    instructions.
    """
    if bright:
        for x in range(1, mid.shape[0] - 1):
            vp = mid[x]
            codes[x] = (
                np.uint8(up[x] <= vp) | np.uint8(up[x + 1] <= vp) << 1
                | np.uint8(mid[x + 1] < vp) << 2 | np.uint8(down[x + 1] < vp) << 3
                | np.uint8(down[x] < vp) << 4 | np.uint8(down[x - 1] < vp) << 5
                | np.uint8(mid[x - 1] <= vp) << 6 | np.uint8(up[x - 1] <= vp) << 7
            )
    else:
        for x in range(1, mid.shape[0] - 1):
            vp = mid[x]
            codes[x] = (
                np.uint8(up[x] >= vp) | np.uint8(up[x + 1] >= vp) << 1
                | np.uint8(mid[x + 1] > vp) << 2 | np.uint8(down[x + 1] > vp) << 3
                | np.uint8(down[x] > vp) << 4 | np.uint8(down[x - 1] > vp) << 5
                | np.uint8(mid[x - 1] >= vp) << 6 | np.uint8(up[x - 1] >= vp) << 7
            )


@njit(cache=True, inline="always")
def _row_mask_codes(up, mid, down, codes):
    """Set the bits of the ring pixels outside the mask (uint8 rows): in the cavity sweep
    they are earlier than every pixel (the outside); flipped for the H0 sweep, never."""
    for x in range(1, mid.shape[0] - 1):
        codes[x] |= (
            np.uint8(up[x] == 0) | np.uint8(up[x + 1] == 0) << 1
            | np.uint8(mid[x + 1] == 0) << 2 | np.uint8(down[x + 1] == 0) << 3
            | np.uint8(down[x] == 0) << 4 | np.uint8(down[x - 1] == 0) << 5
            | np.uint8(mid[x - 1] == 0) << 6 | np.uint8(up[x - 1] == 0) << 7
        )


@njit(cache=True, inline="always")
def _row_nonfinite(values, mask, use_mask):
    """NaN and +-inf values in a row (inside the mask)."""
    count = 0
    if use_mask:
        for x in range(values.shape[0]):
            count += np.int64(mask[x] != 0) & np.int64(not np.isfinite(values[x]))
    else:
        for x in range(values.shape[0]):
            count += np.int64(not np.isfinite(values[x]))
    return count


@njit(cache=True, nogil=True)
def _classify_row(codes, mask, use_mask, row, nx, interior_row, count, reps, off, parent,
                  critical, critical_codes, ncrit, masked_out):
    """Pointers and critical numbers of one row; the new number of critical pixels and
    of the pieces they may link to. (A function of its own: an array that may be
    reallocated inside a loop slows the loop down.)"""
    pieces = 0
    for x in range(nx):
        p = row + x
        if use_mask and not mask[p]:
            parent[p] = masked_out
            continue
        code = codes[x]
        if interior_row and x > 0 and x < nx - 1:  # the border meets the outside
            if count[code] == 1:
                parent[p] = p + off[reps[code, 0]]
                continue
            pieces += count[code]
        else:
            pieces += 6  # at most 5 neighbours in the image, and the outside
        parent[p] = -(ncrit + 2)
        critical[ncrit] = p
        critical_codes[ncrit] = code
        ncrit += 1
    return ncrit, pieces


@njit(cache=True, nogil=True)
def plane_critical(values, mask, use_mask, bright, for_h0, ny, nx, count, reps, parent,
                   check_finite):
    """Raster pass: point every regular pixel into its piece, number the critical ones.

    Parameters
    ----------
    values : (ny * nx,) array
        The image, raveled.
    mask : (ny * nx,) uint8 array
        ROI (read only if ``use_mask``).
    bright : bool
        Polarity (``walls == "bright"``).
    for_h0 : bool
        The H0 sweep (wall connectivity, reverse order) rather than the cavity sweep.
    count, reps
        :func:`._ring.ring_tables` of the sweep's connectivity.
    parent : (ny * nx + 1,) int array
        Work array, overwritten: a pointer per regular pixel, ``-(c + 2)`` per critical
        pixel ``c``; pixels outside the mask point to the outside (slot ``n``) in the
        cavity sweep and hold ``-1`` (never visited) in the H0 sweep.
    check_finite : bool
        Count non-finite values (float data).

    Returns
    -------
    critical : int array of ``parent``'s dtype
        Flat index of each critical pixel (inside the mask), in raster order.
    critical_codes : uint8 array
        The ring code of each (bit k set if ring pixel k, clockwise from N, comes earlier
        in the sweep); meaningless on the image border.
    max_links : int
        An upper bound of the number of links :func:`plane_links` finds.
    nonfinite : int
        Pixels inside the mask holding NaN or +-inf.
    """
    n = ny * nx
    off = _ring_offsets(nx)
    masked_out = -1 if for_h0 else n
    codes = np.zeros(nx, np.uint8)
    critical = np.empty(max(1024, n // 16), parent.dtype)
    critical_codes = np.empty(critical.shape[0], np.uint8)
    ncrit = 0
    max_links = 0
    nonfinite = 0
    for y in range(ny):
        row = y * nx
        interior_row = y > 0 and y < ny - 1
        if interior_row:
            _row_codes(values[row - nx:row], values[row:row + nx], values[row + nx:row + 2 * nx],
                       bright, codes)
            if use_mask:
                _row_mask_codes(mask[row - nx:row], mask[row:row + nx],
                                mask[row + nx:row + 2 * nx], codes)
            if for_h0:
                for x in range(nx):
                    codes[x] = ~codes[x]
        if check_finite:
            nonfinite += _row_nonfinite(values[row:row + nx], mask[row:row + nx], use_mask)
        if critical.shape[0] < ncrit + nx:
            critical = grow(critical, ncrit + nx)
            critical_codes = grow(critical_codes, critical.shape[0])
        ncrit, pieces = _classify_row(codes, mask, use_mask, row, nx, interior_row, count,
                                      reps, off, parent, critical, critical_codes, ncrit,
                                      masked_out)
        max_links += pieces
    parent[n] = -(ncrit + 2)
    return critical[:ncrit], critical_codes[:ncrit], max_links, nonfinite


@njit(cache=True, inline="always")
def _critical_of(parent, w):
    """Number of the critical pixel that the pointers from pixel ``w`` lead to; ``w`` is
    then pointed straight at it."""
    e = w
    while parent[e] >= 0:
        e = parent[e]
    while w != e:
        q = parent[w]
        parent[w] = e
        w = q
    return -parent[e] - 2


@njit(cache=True, inline="always")
def _append_new(links, first, nl, target):
    """Append ``target`` to ``links[first:nl]`` unless it is there; the new length."""
    for i in range(first, nl):
        if links[i] == target:
            return nl
    links[nl] = target
    return nl + 1


@njit(cache=True, nogil=True)
def _border_links(values, mask, use_mask, bright, for_h0, ny, nx, full, parent, off, v, y, x,
                  links, nl):
    """Append the links of critical pixel ``v`` at ``(y, x)`` on the image border."""
    n = ny * nx
    first = nl
    for k in range(0, 8, 1 if full else 2):
        yy = y + RING_DY[k]
        xx = x + RING_DX[k]
        w = v + off[k]
        if yy < 0 or yy >= ny or xx < 0 or xx >= nx or (use_mask and not mask[w]):
            if for_h0:
                continue  # beyond the image or the mask: never in the wall set
            w = n  # the outside
        elif for_h0 == _cavity_earlier(values, w, v, bright):
            continue  # a later neighbour
        nl = _append_new(links, first, nl, _critical_of(parent, w))
    return nl


@njit(cache=True, nogil=True)
def plane_links(values, mask, use_mask, bright, for_h0, ny, nx, full, count, reps, parent,
                critical, critical_codes, start, links):
    """The critical pixels that each critical pixel's earlier neighbours lead to.

    Parameters
    ----------
    values, mask, use_mask, bright, for_h0, ny, nx, count, reps
        As for :func:`plane_critical`.
    full : bool
        The sweep's connectivity is full (8 neighbours) rather than faces (4).
    parent, critical, critical_codes
        As left and returned by :func:`plane_critical`; pointers may be shortened.
    start : (m + 1,) int array
        Filled: critical pixel ``c`` is linked to ``links[start[c]:start[c + 1]]``.
    links : (max_links,) int array, ``max_links`` from :func:`plane_critical`
        Filled with distinct critical numbers (``m`` is the outside), each for a component
        that ``c`` joins on arrival.

    Returns
    -------
    int
        The number of links (``start[m]``).
    """
    m = critical.shape[0]
    off = _ring_offsets(nx)
    nl = 0
    for c in range(m):
        start[c] = nl
        v = critical[c]
        y = v // nx
        x = v - y * nx
        if y > 0 and y < ny - 1 and x > 0 and x < nx - 1:
            code = critical_codes[c]
            first = nl
            for i in range(count[code]):  # one neighbour per piece of the earlier ring
                nl = _append_new(links, first, nl, _critical_of(parent, v + off[reps[code, i]]))
        else:
            nl = _border_links(values, mask, use_mask, bright, for_h0, ny, nx, full, parent,
                               off, v, y, x, links, nl)
    start[m] = nl
    return nl


@njit(cache=True, inline="always")
def _minima(start, m):
    """Critical pixels without links: each starts a component."""
    count = 0
    for c in range(m):
        if start[c + 1] == start[c]:
            count += 1
    return count


@njit(cache=True, nogil=True)
def plane_h0_merges(order, start, links, critical_values, uf):
    """Elder-rule union-find over the critical pixels, in the wall filtration's order.

    Parameters
    ----------
    order : (m,) int array
        Critical numbers in cavity-sweep order; processed backwards.
    start, links
        From :func:`plane_links` (``for_h0=True``).
    critical_values : (m,) array
        Value of each critical pixel.
    uf : (m + 1,) int array
        Work array, overwritten.

    Returns
    -------
    births, deaths : arrays of ``order``'s dtype
        Critical numbers of the birth and death pixel of each finite pair with nonzero
        persistence.
    essential : array of ``order``'s dtype
        Critical number of the birth pixel of each class that never dies.
    """
    m = order.shape[0]
    uf[:] = -1
    roots = np.empty(8, uf.dtype)
    births = np.empty(_minima(start, m), order.dtype)  # a minimum dies at most once
    deaths = np.empty(births.shape[0], order.dtype)
    npairs = 0
    for j in range(m - 1, -1, -1):
        v = order[j]
        nr = 0
        for i in range(start[v], start[v + 1]):
            nr = add_distinct(roots, nr, _find_neg(uf, links[i]))
        if nr == 0:
            uf[v] = -(j + 2)
            continue
        eldest = roots[0]
        for q in range(1, nr):
            if uf[roots[q]] < uf[eldest]:
                eldest = roots[q]
        for q in range(nr):
            young = roots[q]
            if young == eldest:
                continue
            uf[young] = eldest
            if critical_values[young] != critical_values[v]:
                births[npairs] = young
                deaths[npairs] = v
                npairs += 1
        uf[v] = eldest
    nroots = 0
    for c in range(m):
        if uf[c] < -1:
            nroots += 1
    essential = np.empty(nroots, order.dtype)
    nroots = 0
    for c in range(m):
        if uf[c] < -1:
            essential[nroots] = c
            nroots += 1
    return births[:npairs], deaths[:npairs], essential


@njit(cache=True, nogil=True)
def plane_cavity_merges(order, start, links, uf):
    """Union-find with an outside node over the critical pixels: the tree's merges.

    Parameters
    ----------
    order, start, links, uf
        As for :func:`plane_h0_merges` (``order`` processed forwards, links from
        :func:`plane_links` with ``for_h0=False``).

    Returns
    -------
    core, breach, tree_parent : int64 arrays, one entry per node
        Node 0 is the outside (``-1``, ``-1``, ``-1``); ``core`` and ``breach`` are
        critical numbers, ``tree_parent`` node ids, as in
        :func:`._kernels.cavity_sweep_kernel`.
    """
    m = order.shape[0]
    uf[:] = -1
    uf[m] = -2  # the outside is node 0
    roots = np.empty(8, uf.dtype)
    nodes = 1 + _minima(start, m)  # the outside and a node per minimum
    core = np.empty(nodes, np.int64)
    breach = np.empty(nodes, np.int64)
    tparent = np.empty(nodes, np.int64)
    core[0] = -1
    breach[0] = -1
    tparent[0] = -1
    nnodes = 1
    for j in range(m):
        v = order[j]
        nr = 0
        for i in range(start[v], start[v + 1]):
            nr = add_distinct(roots, nr, _find_neg(uf, links[i]))
        if nr == 0:
            core[nnodes] = v
            breach[nnodes] = -1
            tparent[nnodes] = -1
            uf[v] = -(nnodes + 2)
            nnodes += 1
            continue
        best = eldest_root(uf, roots, nr)
        eldest = -uf[best] - 2
        for q in range(nr):
            r = roots[q]
            if r != best:
                node = -uf[r] - 2
                tparent[node] = eldest
                breach[node] = v
                uf[r] = best
        uf[v] = best
    return core, breach, tparent
