"""Blocks of whole chunks: fewer, larger tasks for a pass whose result does not depend on
how the array is cut (the chunked measurements, the Euler characteristic curve)."""

from __future__ import annotations

import numpy as np

__all__ = ["BLOCK_VOXELS", "chunk_blocks"]

#: Voxels of a block by default (the bound of the noise level's crop).
BLOCK_VOXELS = 1 << 22


def chunk_blocks(chunks: tuple[tuple[int, ...], ...],
                 most: int) -> tuple[tuple[int, ...], ...]:
    """Blocks of whole chunks (Dask chunks of regular arrays: all but the last equal per
    axis) of at most ``most`` voxels, grown by doubling along the last axes first; the
    chunks themselves when they are irregular or already larger.

    Examples
    --------
    >>> chunk_blocks(((2, 2, 1), (3, 3, 3)), 12)
    ((2, 2, 1), (6, 3))
    >>> chunk_blocks(((2, 2, 1), (3, 3, 3)), 0)
    ((2, 2, 1), (3, 3, 3))
    """
    if any(len(set(sizes[:-1])) > 1 or sizes[-1] > sizes[0] for sizes in chunks):
        return chunks
    size = [sizes[0] for sizes in chunks]
    total = [sum(sizes) for sizes in chunks]
    grown = True
    while grown:
        grown = False
        for axis in reversed(range(len(size))):
            wider = min(2 * size[axis], total[axis])
            if wider > size[axis] and np.prod(size) // size[axis] * wider <= most:
                size[axis], grown = wider, True
    if size == [sizes[0] for sizes in chunks]:
        return chunks
    return tuple(tuple([s] * (t // s) + ([t % s] if t % s else []))
                 for s, t in zip(size, total, strict=True))
