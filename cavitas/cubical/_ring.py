"""The 8 pixels around a pixel of a 2D image, and what they say about a sweep locally.

A sweep adds pixels one at a time. When pixel ``p`` arrives, the neighbours that arrived
before it (its *earlier* neighbours) lie in some components of the swept set. Pixels of the
ring around ``p`` that are earlier and touch each other are in one component already, so the
ring alone tells, for most pixels, what ``p`` does:

* no earlier neighbour: ``p`` starts a component (a *minimum* of the sweep);
* all its earlier neighbours in one connected piece of the earlier ring: ``p`` joins that
  component and nothing else happens (a *regular* pixel);
* two pieces or more: ``p`` may merge components; only a union-find can tell.

The ring is numbered clockwise from the pixel above: N, NE, E, SE, S, SW, W, NW
(:data:`RING`). A ring state is an 8-bit code, bit ``k`` set when ring pixel ``k`` is earlier.
:func:`ring_tables` lists, for each of the 256 codes, the number of pieces that hold a
neighbour of ``p`` and one neighbour in each piece.

Examples
--------
>>> count, reps = ring_tables(1)
>>> int(count[0b0000_0101])  # N and E earlier, NE not: two pieces under faces adjacency
2
>>> int(count[0b0000_0111])  # N, NE and E: one piece
1
>>> int(ring_tables(2)[0][0b0000_0101])  # under full adjacency N and E touch
1
"""

from __future__ import annotations

import functools

import numpy as np

__all__ = ["RING", "RING_DX", "RING_DY", "ring_tables"]

#: ``(dy, dx)`` of the ring pixels, clockwise from the one above.
RING = ((-1, 0), (-1, 1), (0, 1), (1, 1), (1, 0), (1, -1), (0, -1), (-1, -1))
RING_DY = np.array([d[0] for d in RING], np.int64)
RING_DX = np.array([d[1] for d in RING], np.int64)

# Representatives are chosen in this order: pixels before ``p`` in raster order first, so
# that a regular pixel points to a pixel whose own pointer is already known.
_PREFERENCE = (0, 6, 7, 1, 2, 4, 5, 3)


def _touch(a: int, b: int, connectivity: int) -> bool:
    dy = abs(RING[a][0] - RING[b][0])
    dx = abs(RING[a][1] - RING[b][1])
    return max(dy, dx) == 1 and dy + dx <= connectivity


@functools.cache
def ring_tables(connectivity: int) -> tuple[np.ndarray, np.ndarray]:
    """Pieces of the earlier ring under ``connectivity`` (1 = faces, 2 = full).

    Returns
    -------
    count : (256,) uint8
        Number of pieces (connected under ``connectivity``) of the set ring pixels that
        hold at least one neighbour of the centre (the four face neighbours for
        connectivity 1, all eight for 2). At most 4.
    reps : (256, 4) uint8
        Ring position of one neighbour of the centre in each of those pieces (the first
        ``count`` entries), the first one preferring pixels that precede the centre in
        raster order.
    """
    count = np.zeros(256, np.uint8)
    reps = np.zeros((256, 4), np.uint8)
    for code in range(256):
        piece = list(range(8))

        def find(k, piece=piece):
            while piece[k] != k:
                k = piece[k]
            return k

        on = [k for k in range(8) if code >> k & 1]
        for a in on:
            for b in on:
                if a < b and _touch(a, b, connectivity):
                    piece[find(a)] = find(b)
        seen: list[int] = []
        for k in _PREFERENCE:
            if code >> k & 1 and (connectivity == 2 or k % 2 == 0) and find(k) not in seen:
                reps[code, len(seen)] = k
                seen.append(find(k))
        count[code] = len(seen)
    return count, reps
