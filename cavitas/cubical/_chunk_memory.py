"""What a Dask worker needs for chunked persistence (:func:`worker_need`).

Two kinds of task run on a worker (:mod:`._chunked`): the sweep of one chunk, which holds
the chunk, its sort order and one sweep's union-find (the figures below, per voxel), and a
join, which holds two boxes' boundary trees and the graph it sweeps, both proportional to
the voxels on the boxes' seam sides. The largest join is found by replaying the plan of
joins on the box geometry alone.

The constants were measured with ``bench/chunked.py`` (peak RSS of single tasks on 128^3
chunks of smoothed noise; the bench prints model and measurement side by side).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from ._boundary import Box, SweepPlan

__all__ = ["WorkerNeed", "worker_need"]

#: Bytes per chunk voxel of a chunk sweep beyond the chunk: the order (4), the union-find
#: and its flags (8), the voxel sort's counters and the pairs; 4 more for data of more
#: than 16 bits (the radix sort's second buffer).
SWEEP_BYTES_PER_VOXEL = 18
#: Bytes per seam voxel of one box's boundary trees (both sweeps: node voxel, value and
#: parent, and the face maps).
TREE_BYTES_PER_SEAM_VOXEL = 64
#: Bytes per seam voxel of the two boxes of a join, beyond their trees (the graph: edges,
#: neighbour lists, union-find, order).
JOIN_BYTES_PER_SEAM_VOXEL = 64


@dataclass(frozen=True)
class WorkerNeed:
    """Peak memory of the tasks of a chunked persistence run, in bytes (beyond the program).

    Attributes
    ----------
    chunks : int
        Number of chunk sweeps (there is one join fewer).
    sweep_bytes : int
        The largest chunk's sweep: the chunk itself, the sweep's arrays, its trees.
    join_bytes : int
        The largest join: two boxes' trees, the graph, the joined box's trees.
    """

    chunks: int
    sweep_bytes: int
    join_bytes: int

    @property
    def peak_bytes(self) -> int:
        """What one worker running one task at a time needs at most."""
        return max(self.sweep_bytes, self.join_bytes)


def _seam_voxels(box: Box, plan: SweepPlan) -> int:
    """Voxels on the seam sides of ``box`` (an edge voxel counted once per side)."""
    shape = box.shape
    return sum(int(np.prod(shape)) // shape[side // 2] for side in box.seams(plan))


def worker_need(shape: Sequence[int], chunks: Sequence[Sequence[int]],
                itemsize: int) -> WorkerNeed:
    """The peak memory of the tasks of a chunked run (a model; see the module notes).

    Parameters
    ----------
    shape : tuple of int
        The volume's shape (2D or 3D).
    chunks : sequence of sequences of int
        Chunk sizes per axis, as Dask lists them.
    itemsize : int
        Bytes per voxel of the data.

    Examples
    --------
    Eight chunks of 64^3 uint16 voxels, a 128^3 volume:

    >>> need = worker_need((128, 128, 128), ((64, 64),) * 3, 2)
    >>> need.chunks, need.sweep_bytes // 2**20, need.join_bytes // 2**20
    (8, 5, 5)
    """
    from ._chunked import _boxes, join_in_pairs
    from ._neighbors import grid_shape3

    ndim = len(shape)
    plan = SweepPlan(shape=grid_shape3(tuple(shape)), walls="bright", connectivity=1,
                     ndim=ndim, h0=True, cavities=True)
    boxes = _boxes(chunks, ndim)
    per_voxel = itemsize + SWEEP_BYTES_PER_VOXEL + (4 if itemsize > 2 else 0)
    sweep = max(int(np.prod(box.shape)) * per_voxel
                + _seam_voxels(box, plan) * TREE_BYTES_PER_SEAM_VOXEL for box in boxes.flat)
    largest = 0

    def join(low: Box, high: Box, axis: int) -> Box:
        nonlocal largest
        joined = low.join(high)
        seams_in = _seam_voxels(low, plan) + _seam_voxels(high, plan)
        need = (seams_in * (TREE_BYTES_PER_SEAM_VOXEL + JOIN_BYTES_PER_SEAM_VOXEL)
                + _seam_voxels(joined, plan) * TREE_BYTES_PER_SEAM_VOXEL)
        largest = max(largest, need)
        return joined

    join_in_pairs(boxes, join)
    return WorkerNeed(chunks=boxes.size, sweep_bytes=sweep, join_bytes=largest)
