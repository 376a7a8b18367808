"""How much memory a segmentation of a volume needs (used by ``cavitas info`` and batches)."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

__all__ = ["WORK_BYTES_PER_VOXEL", "estimate_memory_bytes", "work_dtype"]

#: Peak working memory of a whole ``segment_file`` run per voxel, beyond the input itself,
#: by the float type the image is smoothed in (float32 for data of at most 16 bits and for
#: float32 data, float64 otherwise; :func:`work_dtype`).
WORK_BYTES_PER_VOXEL = {4: 52, 8: 76}


def estimate_memory_bytes(shape: Sequence[int], dtype: np.dtype | str | type) -> int:
    """Estimated peak memory of segmenting a volume with ``segment_file``, in bytes.

    ``voxels * (itemsize + work)``: the input in its own type (counted whole, even when
    memory-mapped, since every voxel is read) and the working memory
    :data:`WORK_BYTES_PER_VOXEL`; the interpreter itself (about 200 MB) is not included.

    Derivation (``python -m bench --only segment_scale [--large]``: uint16 foams through
    ``segment_file`` in a fresh interpreter, automatic mode, thickness on; peak RSS above
    the interpreter, 2 bytes of it the input)::

        256^3: 43.6 B/voxel    512^3: 44.8 B/voxel (5.8 GiB in all; 138 B/voxel before)
        work for float32 smoothing: 43 -> 52 B/voxel, a margin of about 1/5

    Small volumes (128^3 and below) measure higher per voxel (freed arrays kept by the
    allocator), a few hundred MB in all; the batch runner raises its estimates from the
    peaks its workers report.

    The peak is in the region step: the detection image (4), sweep order and ranks (4 + 4),
    the work labels (4), and the nearest-label map of the island filling (an int32 index
    per axis, 12, plus scipy's int64 copy of the wall mask, 8, and the map, 4); the
    segmentation's own steps (six smoothing scales, the sweeps) peak near 27. With float64
    smoothing (32/64-bit integers, float64 data) the smoothed copies and the per-region
    median sort double (derived, not measured): 76.

    Examples
    --------
    >>> estimate_memory_bytes((100, 200, 300), "uint16")  # 6e6 voxels * (2 + 52) bytes
    324000000
    >>> estimate_memory_bytes((100, 200, 300), "float64") // 6_000_000
    84
    """
    dtype = np.dtype(dtype)
    voxels = int(np.prod([int(n) for n in shape], dtype=np.int64))
    return voxels * (dtype.itemsize + WORK_BYTES_PER_VOXEL[work_dtype(dtype).itemsize])


def work_dtype(dtype: np.dtype | str | type) -> np.dtype:
    """The float type images of ``dtype`` are smoothed and swept in by the segmentation.

    float32 for integers of at most 16 bits (every value exact in float32), booleans and
    float16/float32 data; float64 otherwise (32/64-bit integers, float64), so no input
    loses precision before smoothing. float32 halves the memory of every smoothed copy
    and the sort passes of the sweep.

    Examples
    --------
    >>> work_dtype(np.uint16), work_dtype(np.float64)
    (dtype('float32'), dtype('float64'))
    """
    dtype = np.dtype(dtype)
    small = dtype.itemsize <= (2 if dtype.kind in "biu" else 4 if dtype.kind == "f" else 0)
    return np.dtype(np.float32 if small else np.float64)
