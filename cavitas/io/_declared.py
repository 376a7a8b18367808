"""Sizes a file's header declares, checked before anything is allocated."""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from .._errors import InputFileError
from .._shared import memory

__all__ = ["check_declared", "declared_bytes"]


def declared_bytes(path: object, shape: Sequence[int], dtype: np.dtype | str | type) -> int:
    """Bytes of the voxels a header declares, in exact integers (no overflow).

    Raises
    ------
    InputFileError
        When a length is negative or not a whole number (a damaged header).

    Examples
    --------
    >>> declared_bytes("a.nii", (1024, 1024, 1024), "int16")
    2147483648
    """
    try:
        dims = [int(n) for n in shape]
        itemsize = np.dtype(dtype).itemsize
    except (TypeError, ValueError, OverflowError) as exc:
        raise InputFileError(f"'{path}' declares an unusable shape {tuple(shape)!r} or data "
                             "type (a damaged header).") from exc
    if any(n < 0 for n in dims):
        raise InputFileError(f"'{path}' declares a negative length in its shape {tuple(dims)} "
                             "(a damaged header).")
    return math.prod(dims) * itemsize


def check_declared(path: object, shape: Sequence[int], dtype: np.dtype | str | type, *,
                   stored: int | None = None) -> int:
    """Check a declared array against the bytes the file holds and the memory available.

    Called before anything is allocated. ``stored`` is the number of bytes the file holds
    for the voxels (after its header) when they are stored uncompressed; a declaration
    larger than that means a truncated file or a damaged header. Whatever the storage, an
    array larger than the memory available now is refused (a damaged size, or a
    decompression bomb) unless :func:`~cavitas._shared.memory.memory_guard` turned the check
    off. Returns the declared bytes.

    Examples
    --------
    >>> check_declared("a.npy", (4, 4), np.uint16, stored=32)
    32
    >>> try:
    ...     check_declared("a.npy", (400, 4), np.uint16, stored=32)
    ... except InputFileError as exc:
    ...     print(str(exc)[:69])
    'a.npy' declares 400 x 4 uint16 voxels (3200 bytes) but holds only 32
    """
    need = declared_bytes(path, shape, dtype)
    what = f"{' x '.join(str(int(n)) for n in shape)} {np.dtype(dtype).name} voxels"
    if stored is not None and need > stored:
        raise InputFileError(f"'{path}' declares {what} ({need} bytes) but holds only "
                             f"{max(stored, 0)} bytes of voxel data: the file is cut short or "
                             "its header is damaged.")
    available = memory.available_memory() if memory.guarding() else None
    if available is not None and need > available:
        raise InputFileError(
            f"'{path}' declares {what} ({memory.size_text(need)}), more than the "
            f"{memory.size_text(available)} of memory available: the header is damaged, or the "
            "volume must be cropped or read on a machine with more memory (the memory "
            "check can be skipped with skip_memory_check=True).",
            parameters=("skip_memory_check",))
    return need
