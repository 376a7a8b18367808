"""Bottleneck matching of two finite point sets without listing the edges of its graph.

The test "is there a matching of cost at most δ" asks for a matching of the graph whose
edges join a point of A and a point of B at most δ apart (L∞) that covers every *heavy*
point: one farther than δ from the diagonal (half its persistence > δ); the other points
may go to the diagonal. By the Mendelsohn–Dulmage theorem such a matching exists if and
only if one matching covers the heavy points of A and another the heavy points of B, and
one can be made from the two (:func:`merge_matchings`). Each of the two is a maximum
matching from the heavy points of one diagram into all points of the other.

The maximum matchings follow Efrat, Itai & Katz (2001) in spirit (from memory): augmenting
paths are grown breadth-first from every free heavy point at once, and the neighbours
of a point are found in a grid of cells of side δ over the other diagram, from which
every point is deleted once it is reached, so one phase reaches each point once. Each
breadth-first tree augments along the first free point it reaches; phases repeat until
one augments nothing (then no augmenting path is left: the matching is maximum).

References
----------
A. Efrat, A. Itai, M. J. Katz, "Geometry helps in bottleneck matching and related
problems", Algorithmica 31 (2001) 1-28. doi:10.1007/s00453-001-0016-8
N. S. Mendelsohn, A. L. Dulmage, "Some generalizations of the problem of distinct
representatives", Canad. J. Math. 10 (1958) 230-241. doi:10.4153/CJM-1958-024-3
"""

from __future__ import annotations

import numpy as np
from numba import njit

__all__ = ["merge_matchings", "saturate_heavy"]

#: Most grid cells along one axis (a larger cell than δ only widens the scan).
_MAX_CELLS = 2**30


@njit(cache=True, nogil=True)
def _cell_geometry(points, delta):
    """Origin, cell side, column and row counts of a grid over ``points`` whose cells are
    at least ``delta`` wide (wider only when ``delta`` is tiny against the spread)."""
    x0, y0 = points[:, 0].min(), points[:, 1].min()
    span = max(points[:, 0].max() - x0, points[:, 1].max() - y0)
    # A little wider than delta, so that rounding in the cell index never separates two
    # points exactly delta apart by two cells (the answer is such a distance).
    side = max(delta * (1.0 + 2.0**-16), span / _MAX_CELLS)
    if side <= 0.0:
        side = 1.0  # every point at one place
    cols = np.int64((points[:, 0].max() - x0) / side) + 1
    rows = np.int64((points[:, 1].max() - y0) / side) + 1
    return x0, y0, side, cols, rows


@njit(cache=True, nogil=True)
def _cell_key(x, y, geometry, dx, dy):
    """Key of the cell ``(dx, dy)`` steps from the one holding ``(x, y)``. Cells beyond
    the grid get keys that no point has (clamped: nothing there is within ``delta``)."""
    x0, y0, side, cols, rows = geometry
    cx = min(max((x - x0) // side, -2.0), cols + 1.0)
    cy = min(max((y - y0) // side, -2.0), rows + 1.0)
    return (np.int64(cx) + dx + 3) * (rows + 6) + np.int64(cy) + dy + 3


@njit(cache=True, nogil=True)
def _build_grid(points, delta):
    geometry = _cell_geometry(points, delta)
    n = len(points)
    keys = np.empty(n, np.int64)
    for p in range(n):
        keys[p] = _cell_key(points[p, 0], points[p, 1], geometry, 0, 0)
    members = np.argsort(keys, kind="mergesort")
    sorted_keys = keys[members]
    starts = np.flatnonzero(np.concatenate((np.ones(1, np.bool_),
                                            sorted_keys[1:] != sorted_keys[:-1])))
    cell_keys = sorted_keys[starts]
    cell_end = np.empty(len(starts), np.int64)
    cell_end[:-1] = starts[1:]
    cell_end[-1] = n
    cell_of = np.empty(n, np.int64)
    pos = np.empty(n, np.int64)
    for c in range(len(starts)):
        for k in range(starts[c], cell_end[c]):
            cell_of[members[k]] = c
            pos[members[k]] = k
    return geometry, cell_keys, starts.astype(np.int64), cell_end, members, \
        cell_of, pos


@njit(cache=True, nogil=True, inline="always")
def _delete(p, cell_of, pos, members, live_end):
    c = cell_of[p]
    last = live_end[c] - 1
    q = members[last]
    k = pos[p]
    members[k], members[last] = q, p
    pos[q], pos[p] = k, last
    live_end[c] = last


@njit(cache=True, nogil=True)
def _augment(right, u, parent, mate_left, mate_right):
    """Flip the path that reached the free ``right`` point from ``u`` back to its root."""
    while True:
        previous = mate_left[u]
        mate_left[u] = right
        mate_right[right] = u
        if previous < 0:
            return
        right = previous
        u = parent[right]


@njit(cache=True, nogil=True)
def saturate_heavy(left, heavy, right, delta, mate_left, mate_right):
    """Grow ``mate_left``/``mate_right`` to a maximum matching of the heavy ``left`` points
    into ``right`` (pairs at most ``delta`` apart in L∞); return how many heavy points stay
    unmatched. The given matching must already be valid at ``delta``.
    """
    n_left = len(left)
    free = 0
    for u in range(n_left):
        if heavy[u] and mate_left[u] < 0:
            free += 1
    if free == 0 or len(right) == 0:
        return free
    geometry, cell_keys, cell_start, cell_end, members, cell_of, pos = _build_grid(right, delta)
    parent = np.empty(len(right), np.int64)
    root_of = np.empty(n_left, np.int64)
    done = np.zeros(n_left, np.bool_)
    queue = np.empty(n_left, np.int64)
    while free:
        live_end = cell_end.copy()
        tail = 0
        for u in range(n_left):
            if heavy[u] and mate_left[u] < 0:
                queue[tail] = u
                root_of[u] = u
                done[u] = False
                tail += 1
        augmented = 0
        head = 0
        while head < tail:
            u = queue[head]
            head += 1
            root = root_of[u]
            if done[root]:
                continue
            ux, uy = left[u, 0], left[u, 1]
            for dx in (-1, 0, 1):
                for dy in (-1, 0, 1):
                    key = _cell_key(ux, uy, geometry, dx, dy)
                    c = np.searchsorted(cell_keys, key)
                    if c == len(cell_keys) or cell_keys[c] != key:
                        continue
                    k = cell_start[c]
                    while k < live_end[c] and not done[root]:
                        v = members[k]
                        if max(abs(right[v, 0] - ux), abs(right[v, 1] - uy)) > delta:
                            k += 1
                            continue
                        _delete(v, cell_of, pos, members, live_end)  # members[k] is new
                        parent[v] = u
                        w = mate_right[v]
                        if w < 0:
                            _augment(v, u, parent, mate_left, mate_right)
                            done[root] = True
                            augmented += 1
                        else:
                            root_of[w] = root
                            queue[tail] = w
                            tail += 1
        if augmented == 0:
            break
        free -= augmented
    return free


@njit(cache=True, nogil=True)
def merge_matchings(mate_a, mate_b, heavy_b):
    """One matching covering the heavy points of both sides, from ``mate_a`` (covers the
    heavy points of A; ``mate_a[i]`` is a point of B or -1) and ``mate_b`` (covers those of
    B; ``mate_b[j]`` is a point of A or -1). Returns the partner in B of each point of A.

    The union of two matchings is a set of paths and cycles whose edges alternate between
    them. On each path take the edges of ``mate_a`` unless that leaves a heavy end of B
    uncovered; then those of ``mate_b`` cover every heavy point of the path (an end of A
    uncovered by ``mate_a`` is not heavy, and the two ends cannot both fail: the
    Mendelsohn–Dulmage argument). Cycles keep ``mate_a``.
    """
    n, m = len(mate_a), len(mate_b)
    rev_a = np.full(m, -1, np.int64)  # partner in A of each point of B under mate_a
    for i in range(n):
        if mate_a[i] >= 0:
            rev_a[mate_a[i]] = i
    rev_b = np.full(n, -1, np.int64)  # partner in B of each point of A under mate_b
    for j in range(m):
        if mate_b[j] >= 0:
            rev_b[mate_b[j]] = j
    result = mate_a.copy()
    path = np.empty(n, np.int64)
    for end in range(n + m):  # vertices: points of A, then points of B
        in_a = end < n
        first = mate_a[end] if in_a else rev_a[end - n]
        second = rev_b[end] if in_a else mate_b[end - n]
        if (first >= 0) == (second >= 0):
            continue  # not the end of a path
        # Walk the path from this end; each path is walked from both ends, which is
        # harmless: the second walk makes the same choice.
        kind = 1 if first >= 0 else 2
        vertex, count, use_b = end, 0, False
        while True:
            if vertex < n:
                path[count] = vertex
                count += 1
                nxt = mate_a[vertex] if kind == 1 else rev_b[vertex]
                nxt = nxt + n if nxt >= 0 else -1
            else:
                j = vertex - n
                if heavy_b[j] and rev_a[j] < 0:
                    use_b = True
                nxt = rev_a[j] if kind == 1 else mate_b[j]
            if nxt < 0:
                break
            vertex, kind = nxt, 3 - kind
        if use_b:
            for k in range(count):
                result[path[k]] = rev_b[path[k]]
    return result
