"""How much memory a segmentation of a volume needs (used by ``cavitas info`` and batches)."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

__all__ = ["ENGINE_BYTES_PER_VOXEL", "LABEL_BYTES_PER_VOXEL", "estimate_memory_bytes"]

#: Working memory of the persistence engine beyond the input (the target in DEVELOPERS.md).
ENGINE_BYTES_PER_VOXEL = 12
#: One int32 label per voxel.
LABEL_BYTES_PER_VOXEL = 4


def estimate_memory_bytes(shape: Sequence[int], dtype: np.dtype | str | type) -> int:
    """Estimated peak memory of a segmentation: input + 12 B/voxel engine + 4 B/voxel labels.

    ``voxels * (itemsize + 12 + 4)``: the input in its own type (counted whole, even when
    memory-mapped, since every voxel is visited), the engine's working arrays (sort order,
    union-find parents) and the int32 label map. It is an estimate for planning, not a
    measurement; ``bench/`` measures the real figure.

    Examples
    --------
    >>> estimate_memory_bytes((100, 200, 300), "uint16")  # 6e6 voxels * 18 bytes
    108000000
    """
    voxels = int(np.prod([int(n) for n in shape], dtype=np.int64))
    return voxels * (np.dtype(dtype).itemsize + ENGINE_BYTES_PER_VOXEL + LABEL_BYTES_PER_VOXEL)
