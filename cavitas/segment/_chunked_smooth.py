"""The segmentation's smoothing of a chunked volume, chunk by chunk (:func:`smooth_in_chunks`).

Each chunk is filtered with a halo as deep as the Gaussian's support on every smoothed axis
(scipy's radius: ``int(truncate * sigma + 0.5)``, ``truncate`` 4), so every voxel kept reads
exactly the input values the whole-volume filter reads, in the same order: the result
equals :func:`cavitas.segment._noise.smooth` bit for bit. Why the axis passes compose: after
the pass along axis ``k`` a voxel is right wherever its coordinates on the axes ``0..k`` lie
in the chunk (its neighbours along ``k`` are, by the same argument for the pass before, right
and inside the halo); after the last pass that is every voxel of the chunk. At the
volume's faces no halo is added: the block ends where the volume ends, and the filter's
``"nearest"`` border is the same as in memory.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ._noise import smooth

__all__ = ["gaussian_radius", "smooth_in_chunks"]

#: scipy.ndimage.gaussian_filter's default support, in standard deviations.
TRUNCATE = 4.0


def gaussian_radius(sigma: float) -> int:
    """Half-width in voxels of scipy's Gaussian kernel of ``sigma`` (0 when not smoothed).

    Examples
    --------
    >>> [gaussian_radius(s) for s in (0.0, 0.5, 1.0, 1.5)]
    [0, 2, 4, 6]
    """
    return int(TRUNCATE * float(sigma) + 0.5) if sigma > 1e-15 else 0


def smooth_in_chunks(image: Any, sigma_voxels: tuple[float, ...], *, dtype: np.dtype,
                     sign: float = 1.0, closed_border: bool = False) -> Any:
    """:func:`cavitas.segment._noise.smooth` of a Dask array, lazily, chunk by chunk.

    Parameters
    ----------
    image : dask.array.Array
        The input, in its own type; its chunks are the output's.
    sigma_voxels, dtype, sign
        As for :func:`~cavitas.segment._noise.smooth`.
    closed_border : bool
        Raise the outermost voxel layer to the smoothed maximum afterwards
        (:func:`cavitas.segment._detect.close_faces`, the ``keep_border`` option).

    Returns
    -------
    dask.array.Array
        Equal, bit for bit, to the in-memory smoothing of ``image.compute()``.

    Examples
    --------
    >>> import dask.array as da
    >>> img = np.zeros((9, 9), np.uint16); img[4, 4] = 100
    >>> lazy = smooth_in_chunks(da.from_array(img, chunks=2), (1.0, 1.0), dtype=np.float32)
    >>> bool((lazy.compute() == smooth(img, (1.0, 1.0), dtype=np.float32)).all())
    True
    """
    dtype = np.dtype(dtype)
    # a halo reaching both faces of an axis holds all of it: never more is needed
    depth = {axis: min(gaussian_radius(s), size - 1)
             for axis, (s, size) in enumerate(zip(sigma_voxels, image.shape, strict=True))}
    if not any(s > 0 for s in sigma_voxels):  # as in memory: a converted copy
        out = -image.astype(dtype) if sign < 0 else image.astype(dtype)
    else:
        out = image.map_overlap(_smooth_block, depth=depth, boundary="none", trim=True,
                                dtype=dtype, meta=np.empty((0,) * image.ndim, dtype),
                                sigma=tuple(float(s) for s in sigma_voxels), out_dtype=dtype,
                                sign=sign).rechunk(image.chunks)
    if closed_border:
        top = out.max()
        out = out.map_blocks(_close_block_faces, top, shape=image.shape, dtype=dtype,
                             meta=np.empty((0,) * image.ndim, dtype))
    return out


def _smooth_block(block: np.ndarray, *, sigma: tuple[float, ...], out_dtype: np.dtype,
                  sign: float) -> np.ndarray:
    """One chunk with its halo, smoothed as in memory (the halo is trimmed by Dask)."""
    return smooth(block, sigma, dtype=out_dtype, sign=sign)


def _close_block_faces(block: np.ndarray, top: Any, *, shape: tuple[int, ...],
                       block_info: dict | None = None) -> np.ndarray:
    """The part of the volume's outermost layer that lies in ``block``, set to ``top``."""
    assert block_info is not None  # Dask passes it to every block
    where = block_info[0]["array-location"]
    out = block.copy()
    for axis, (start, stop) in enumerate(where):
        index: list[Any] = [slice(None)] * block.ndim
        if start == 0:
            index[axis] = 0
            out[tuple(index)] = top
        if stop == shape[axis]:
            index[axis] = -1
            out[tuple(index)] = top
    return out

