"""Input checks shared by the measurement functions, and the 3D view every kernel uses.

Kernels work on 3D arrays only: a 2D input ``(y, x)`` is viewed as ``(1, y, x)`` with a
spacing of 1 on the added axis, and neighbour offsets are built for the true number of
axes, so no voxel ever looks along the added axis.
"""

from __future__ import annotations

import itertools
from collections.abc import Sequence
from typing import Any

import numpy as np

from .. import _checks
from .._errors import ParameterError

__all__ = [
    "as_3d",
    "check_labels",
    "check_mask",
    "check_spacing",
    "dense_labels",
    "face_offsets",
    "half_offsets",
    "full_offsets",
]


def check_labels(labels: Any) -> np.ndarray:
    """Return ``labels`` as an integer array after checking its shape and type."""
    arr = np.asarray(labels)
    if arr.ndim not in (2, 3):
        raise ParameterError(
            f"labels must be a 2D or 3D array; got {arr.ndim} dimension(s), shape {arr.shape}."
        )
    if arr.dtype == bool:
        return arr.astype(np.uint8)
    if not np.issubdtype(arr.dtype, np.integer):
        raise ParameterError(f"labels must hold integers (0 = background); got dtype {arr.dtype}.")
    if arr.size and np.issubdtype(arr.dtype, np.signedinteger) and arr.min() < 0:
        raise ParameterError(f"labels must be >= 0 (0 = background); found {arr.min()}.")
    return arr


def check_spacing(spacing: Sequence[float] | float | None, ndim: int) -> tuple[float, ...]:
    """Return ``spacing`` as ``ndim`` positive finite floats (``None`` means 1 per axis, one
    number is used on every axis), checked by the shared :func:`cavitas._checks.spacing`."""
    if spacing is None:
        return (1.0,) * ndim
    return _checks.spacing((spacing,) * ndim if np.ndim(spacing) == 0 else spacing, ndim)


def check_mask(mask: Any, shape: tuple[int, ...], name: str) -> np.ndarray | None:
    """Return ``mask`` as a boolean array of ``shape`` (or ``None`` when not given)."""
    if mask is None:
        return None
    arr = np.asarray(mask)
    if arr.shape != shape:
        raise ParameterError(f"{name} must have the shape of labels {shape}; got {arr.shape}.")
    return arr.astype(bool, copy=False)


def dense_labels(labels: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Renumber the labels present as 1..K (0 stays 0).

    Returns the renumbered ``int32`` array and the original label of each row
    (sorted). A lookup table is used when the largest label is small enough,
    otherwise a sort.
    """
    if labels.size == 0:
        return np.zeros(labels.shape, np.int32), np.zeros(0, np.int64)
    top = int(labels.max())
    if top <= max(4 * labels.size, 1 << 20):
        counts = np.bincount(labels.ravel().astype(np.intp, copy=False), minlength=1)
        present = np.flatnonzero(counts[1:]) + 1
        lut = np.zeros(top + 1, np.int32)
        lut[present] = np.arange(1, present.size + 1, dtype=np.int32)
        return lut[labels], present.astype(np.int64)
    values, inverse = np.unique(labels, return_inverse=True)
    if values[0] != 0:
        inverse = inverse + 1
    else:
        values = values[1:]
    return inverse.reshape(labels.shape).astype(np.int32), values.astype(np.int64)


def as_3d(array: np.ndarray) -> np.ndarray:
    """View a 2D array as ``(1, y, x)``; 3D arrays are returned unchanged (C order)."""
    array = np.ascontiguousarray(array)
    return array[np.newaxis] if array.ndim == 2 else array


def _embed(offsets: list[tuple[int, ...]], ndim: int) -> np.ndarray:
    arr = np.asarray(offsets, dtype=np.int64).reshape(-1, ndim)
    if ndim == 2:
        arr = np.concatenate([np.zeros((len(arr), 1), np.int64), arr], axis=1)
    return np.ascontiguousarray(arr)


def full_offsets(ndim: int) -> np.ndarray:
    """All ``3**ndim - 1`` neighbour offsets, as 3D ``(dz, dy, dx)`` rows."""
    return _embed([d for d in itertools.product((-1, 0, 1), repeat=ndim) if any(d)], ndim)


def half_offsets(ndim: int) -> np.ndarray:
    """One offset per line direction (``d`` and ``-d`` counted once): 4 in 2D, 13 in 3D."""
    offs = [d for d in itertools.product((-1, 0, 1), repeat=ndim)
            if any(d) and next(x for x in d if x) > 0]
    return _embed(offs, ndim)


def face_offsets(ndim: int) -> np.ndarray:
    """The ``2 * ndim`` face neighbours, as 3D ``(dz, dy, dx)`` rows."""
    offs = []
    for axis in range(ndim):
        for step in (-1, 1):
            d = [0] * ndim
            d[axis] = step
            offs.append(tuple(d))
    return _embed(offs, ndim)
