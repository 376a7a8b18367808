"""The Euler characteristic curve of a chunked image, chunk by chunk on Dask.

:func:`euler_curve_in_chunks` gives ``euler_curve(...).changes()`` of a Dask array without
holding it whole. :func:`~._euler.euler_curve` histograms every cell of the cubical complex
by the level at which it enters (the last of its voxels to enter with face connectivity,
the first with full connectivity), so χ's step at each level is a sum over cells and each
chunk adds up the cells it owns:

* each chunk is framed one voxel deep on every side (``dask.array.overlap``; beyond the
  array's edge a voxel that never enters, as :func:`~._euler._chi_steps` pads with
  full connectivity and as a cell reaching past the edge never enters with face
  connectivity);
* a cell is owned by the chunk holding its lowest voxel (face connectivity: the voxel at
  its lowest corner; full connectivity: along an axis the cell does not span, the voxel
  before it, the array's first corner by the first chunk);
* voxels are compared by an order key, the value (dark walls) or its negative (bright
  walls) in float64, voxels outside the mask never entering, so that "enters later" is
  "larger key" for every chunk alike;
* a chunk returns the keys at which its cells change χ with the change; the parts are
  merged eight at a time on the workers, the changes of one level added up.

A task holds the framed block's keys (8 bytes per voxel) and one cell type's keys with
their sort: about 44 bytes per block voxel, measured. The steps that add up to zero are
dropped, so only the levels where χ changes are found,
and the first level of the filtration (an extreme over the chunks): what ``changes()``
keeps. Data of up to 32-bit integers and floats are keyed exactly in float64.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._shared.blocks import BLOCK_VOXELS, chunk_blocks
from ._euler import EulerCurve
from ._neighbors import check_connectivity

__all__ = ["euler_curve_in_chunks"]

#: Partial results merged by one task.
_FAN_IN = 8


@dataclass(frozen=True)
class LevelSteps:
    """χ's changes at some levels (keys ascending: the filtration's order), and the first
    key met (the smallest; ``inf`` when no voxel enters)."""

    keys: np.ndarray    # float64
    steps: np.ndarray   # int64, none zero
    first: float


def euler_curve_in_chunks(image: Any, *, walls: str = "bright", connectivity: int = 1,
                          mask: Any = None, block_voxels: int = BLOCK_VOXELS) -> EulerCurve:
    """``euler_curve(image, ...).changes()`` of a Dask array, chunk by chunk.

    Parameters
    ----------
    image : dask.array.Array
        2D or 3D image (integers of up to 32 bits, or floats).
    walls, connectivity
        As for :func:`~._euler.euler_curve`.
    mask : dask.array.Array of bool, optional
        Region of interest (rechunked like ``image``).
    block_voxels : int
        Neighbouring chunks are counted together, in blocks of whole chunks of at most
        this many voxels (:func:`cavitas._shared.blocks.chunk_blocks`); the result does not
        depend on the blocks. 0: each chunk alone.

    Returns
    -------
    EulerCurve
        The levels where χ changes (and the first level), in the image's type.

    Examples
    --------
    >>> import dask.array as da
    >>> from cavitas.cubical import euler_curve
    >>> ring = np.ones((5, 5), np.uint8); ring[2, 2] = 0; ring[0, :] = 2
    >>> got = euler_curve_in_chunks(da.from_array(ring, chunks=2))
    >>> want = euler_curve(ring).changes()
    >>> got.levels.tolist() == want.levels.tolist(), got.chi.tolist() == want.chi.tolist()
    (True, True)
    """
    import dask
    import dask.array as da

    connectivity = check_connectivity(image.ndim, connectivity)
    sign = -1.0 if walls == "bright" else 1.0
    blocks = chunk_blocks(image.chunks, block_voxels)
    keys = image.rechunk(blocks).astype(np.float64) * sign
    if mask is not None:
        keys = da.where(mask.rechunk(blocks), keys, np.inf)
    framed = da.overlap.overlap(keys, depth=1, boundary=np.inf).to_delayed()
    full = connectivity == image.ndim
    parts = [dask.delayed(_chunk_steps, pure=True)(
        framed[index], full, [i == 0 for i in index]) for index in np.ndindex(*keys.numblocks)]
    while len(parts) > 1:
        parts = [dask.delayed(_merge, pure=True)(parts[i:i + _FAN_IN])
                 for i in range(0, len(parts), _FAN_IN)]
    total = parts[0].compute()
    at_first = total.keys == total.first  # the first level is kept, changed or not
    levels = np.concatenate([[total.first], total.keys[~at_first]])
    steps = np.concatenate([[total.steps[at_first].sum()], total.steps[~at_first]])
    values = (sign * levels).astype(image.dtype if image.dtype.kind in "iuf" else np.float64)
    return EulerCurve(values, np.cumsum(steps).astype(np.int64), walls, connectivity)


def _chunk_steps(framed: np.ndarray, full: bool, at_start: list[bool]) -> LevelSteps:
    """χ's changes of the cells one chunk owns (the chunk framed one voxel deep)."""
    ndim = framed.ndim
    found_keys, found_steps = [], []
    for spans in itertools.product((False, True), repeat=ndim):
        cells = framed
        owned = []
        for axis, spanned in enumerate(spans):
            if full and not spanned:  # the corner after voxel j of the frame, and the
                cells = _neighbours(cells, axis, np.minimum)  # array's first one
                owned.append(slice(0 if at_start[axis] else 1, None))
            elif not full and spanned:  # pairs from voxel j (the lowest corner)
                cells = _neighbours(cells, axis, np.maximum)
                owned.append(slice(1, None))
            else:  # the voxel itself
                owned.append(slice(1, -1))
        cells = cells[tuple(owned)]
        entered = cells[np.isfinite(cells)]
        level, count = np.unique(entered, return_counts=True)
        found_keys.append(level)
        found_steps.append((-1 if sum(spans) % 2 else 1) * count)
    inner = framed[(slice(1, -1),) * ndim]
    first = float(inner.min()) if inner.size else np.inf
    return _combined(np.concatenate(found_keys), np.concatenate(found_steps), first)


def _neighbours(cells: np.ndarray, axis: int, reduce: Any) -> np.ndarray:
    """``reduce`` of each two neighbours along ``axis``."""
    head = [slice(None)] * cells.ndim
    tail = [slice(None)] * cells.ndim
    head[axis], tail[axis] = slice(None, -1), slice(1, None)
    return reduce(cells[tuple(head)], cells[tuple(tail)])


def _combined(keys: np.ndarray, steps: np.ndarray, first: float) -> LevelSteps:
    """The steps of equal keys added up, the zero sums dropped."""
    level, where = np.unique(keys, return_inverse=True)
    total = np.bincount(where.ravel(), weights=steps, minlength=len(level)).astype(np.int64)
    keep = total != 0
    return LevelSteps(level[keep], total[keep], first)


def _merge(parts: list[LevelSteps]) -> LevelSteps:
    """Several parts' steps as one."""
    return _combined(np.concatenate([p.keys for p in parts]),
                     np.concatenate([p.steps for p in parts]),
                     min(p.first for p in parts))
