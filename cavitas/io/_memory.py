"""How much memory a segmentation of a volume needs (used by ``cavitas info`` and batches)."""

from __future__ import annotations

import contextlib
import contextvars
import math
import os
from collections.abc import Iterator, Sequence

import numpy as np

from .._errors import InputFileError

__all__ = ["WORK_BYTES_PER_VOXEL", "available_memory", "check_declared", "declared_bytes",
           "estimate_memory_bytes", "memory_guard", "work_dtype"]

#: Whether readers and runs refuse what cannot fit in the memory available (see
#: :func:`memory_guard`).
_GUARD = contextvars.ContextVar("cavitas_memory_guard", default=True)

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


def available_memory() -> int | None:
    """Bytes of memory available to new allocations now (``MemAvailable`` on Linux).

    Examples
    --------
    >>> mem = available_memory()
    >>> mem is None or mem > 0
    True
    """
    try:
        with open("/proc/meminfo", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    try:
        return os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")
    except (OSError, ValueError, AttributeError):
        return None


@contextlib.contextmanager
def memory_guard(enabled: bool) -> Iterator[None]:
    """Within the block, the memory checks refuse (``True``) or let everything through.

    Examples
    --------
    >>> with memory_guard(False):
    ...     check_declared("big.npy", (10**6, 10**6), np.uint8)
    """
    token = _GUARD.set(bool(enabled))
    try:
        yield
    finally:
        _GUARD.reset(token)


def guarding() -> bool:
    """Whether the memory checks are on (see :func:`memory_guard`)."""
    return _GUARD.get()


def size_text(count: float) -> str:
    """A byte count in binary units for messages.

    Examples
    --------
    >>> size_text(512), size_text(3 * 2**30)
    ('512 B', '3.0 GiB')
    """
    for unit in ("B", "KiB", "MiB", "GiB", "TiB", "PiB"):
        if abs(count) < 1024 or unit == "PiB":
            return f"{count:.0f} {unit}" if unit == "B" else f"{count:.1f} {unit}"
        count /= 1024
    raise AssertionError("unreachable")  # pragma: no cover


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
    decompression bomb) unless :func:`memory_guard` turned the check off. Returns the
    declared bytes.

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
    available = available_memory() if guarding() else None
    if available is not None and need > available:
        raise InputFileError(
            f"'{path}' declares {what} ({size_text(need)}), more than the "
            f"{size_text(available)} of memory available: the header is damaged, or the "
            "volume must be cropped or read on a machine with more memory (the memory "
            "check can be skipped with skip_memory_check=True).",
            parameters=("skip_memory_check",))
    return need
