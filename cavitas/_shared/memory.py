"""How much memory a segmentation of a volume needs (what ``cavitas info`` prints and batches
budget with), how much the machine has, and the guard that refuses what cannot fit."""

from __future__ import annotations

import contextlib
import contextvars
import math
import os
from collections.abc import Iterator, Sequence

import numpy as np

from .._errors import InputFileError

__all__ = ["PROCESS_BASE_BYTES", "WORK_BYTES_PER_VOXEL", "available_memory", "check_memory",
           "data_memory_bytes", "estimate_memory_bytes", "guarding", "memory_guard",
           "out_of_memory", "reset_memory_guard", "set_memory_guard", "size_text",
           "work_dtype"]

#: Whether readers and runs refuse what cannot fit in the memory available (see
#: :func:`memory_guard`).
_GUARD = contextvars.ContextVar("cavitas_memory_guard", default=True)

#: Peak working memory of a whole ``segment_file`` run per voxel, beyond the input itself,
#: by the float type the image is smoothed in (float32 for data of at most 16 bits and for
#: float32 data, float64 otherwise; :func:`work_dtype`).
WORK_BYTES_PER_VOXEL = {4: 66, 8: 96}
#: Memory of the process before any data: Python, NumPy, SciPy, numba and the compiled
#: kernels, matplotlib and the report (``python -m bench --only memory_guard``: 340 MiB
#: fits the bundled samples' peaks less their data).
PROCESS_BASE_BYTES = 340 << 20
#: Small volumes peak higher per voxel (arrays the allocator keeps after freeing them):
#: this much more per voxel, for up to :data:`SMALL_VOXELS` voxels.
SMALL_EXTRA_BYTES_PER_VOXEL = 40
SMALL_VOXELS = 2**21


def data_memory_bytes(shape: Sequence[int], dtype: np.dtype | str | type) -> int:
    """Peak memory of segmenting a volume beyond the process's own (its data), in bytes.

    ``voxels * (itemsize + work) + 40 * min(voxels, 2**21)``: the input in its own type
    (counted whole, even when memory-mapped, since every voxel is read), the working
    memory :data:`WORK_BYTES_PER_VOXEL`, and what small volumes add per voxel.

    Derivation (``python -m bench --only segment_scale [--large]``: uint16 foams through
    ``segment_file`` in a fresh interpreter, automatic mode, thickness on; peak RSS above
    the interpreter, 2 bytes of it the input)::

        256^3: 43.6 B/voxel    512^3: 44.8 B/voxel (5.8 GiB in all; 138 B/voxel before)
        with a neighbouring scale delineated too (a scale per region) and the walls'
        topology at the end: 256^3: 59.3 B/voxel
        work for float32 smoothing: 57 -> 66 B/voxel, a margin of about 1/6

    The peak is in the region step: the detection image (4), sweep order and ranks (4 + 4),
    the work labels (4), and the nearest-label map of the island filling (an int32 index
    per axis, 12, plus scipy's int64 copy of the wall mask, 8, and the map, 4); the
    segmentation's own steps (six smoothing scales, the sweeps) peak near 27. A
    neighbouring scale's regions are made while the base scale's label maps are held
    (about 10 more). With float64 smoothing (32/64-bit integers, float64 data) the
    smoothed copies and the per-region median sort double (derived, not measured): 96.
    Volumes of 128^3 voxels and below measure 85 to 95 bytes per voxel: the small-volume
    term.

    Examples
    --------
    >>> data_memory_bytes((100, 200, 300), "uint16")  # 6e6 * (2 + 66) + 40 * 2**21
    491886080
    """
    dtype = np.dtype(dtype)
    voxels = math.prod(int(n) for n in shape)
    return (voxels * (dtype.itemsize + WORK_BYTES_PER_VOXEL[work_dtype(dtype).itemsize])
            + SMALL_EXTRA_BYTES_PER_VOXEL * min(voxels, SMALL_VOXELS))


def estimate_memory_bytes(shape: Sequence[int], dtype: np.dtype | str | type) -> int:
    """Estimated peak memory of a process segmenting a volume with ``segment_file``, in bytes.

    :data:`PROCESS_BASE_BYTES` plus :func:`data_memory_bytes`. Measured on the bundled
    samples (``python -m bench --only memory_guard``), the estimate lies a few per cent
    above the peak.

    Examples
    --------
    >>> estimate_memory_bytes((100, 200, 300), "uint16") - data_memory_bytes(
    ...     (100, 200, 300), "uint16") == PROCESS_BASE_BYTES
    True
    """
    return PROCESS_BASE_BYTES + data_memory_bytes(shape, dtype)


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
    ...     check_memory("big.tif", (10**4, 10**4, 10**4), np.uint8, available=1)
    ...     guarding()
    False
    >>> guarding()
    True
    """
    token = set_memory_guard(enabled)
    try:
        yield
    finally:
        reset_memory_guard(token)


def set_memory_guard(enabled: bool) -> contextvars.Token:
    """Turn the memory checks on or off until :func:`reset_memory_guard` (see
    :func:`memory_guard`, the same as a ``with`` block)."""
    return _GUARD.set(bool(enabled))


def reset_memory_guard(token: contextvars.Token) -> None:
    """Put the memory checks back as they were before :func:`set_memory_guard`."""
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


#: What to do about a volume too large for the memory (the end of the guard's sentences).
_ADVICE = ("crop or downsample it first, or run it on a machine with more memory "
           "(skip_memory_check=True tries anyway)")


def check_memory(name: object, shape: Sequence[int], dtype: np.dtype | str | type, *,
                 available: int | None = None) -> None:
    """Refuse, before the computation starts, a volume whose segmentation cannot fit.

    :func:`data_memory_bytes` is compared with the memory available now (``available``,
    by default :func:`available_memory`); the process's own memory is already held. Off
    within ``memory_guard(False)``.

    Raises
    ------
    InputFileError
        One sentence with both figures and what to do.

    Examples
    --------
    >>> check_memory("small.tif", (10, 10), np.uint8, available=2**30)
    >>> try:
    ...     check_memory("big.tif", (1024, 1024, 1024), np.uint16, available=2**30)
    ... except InputFileError as exc:
    ...     print(str(exc)[:75])
    'big.tif' (1024 x 1024 x 1024 uint16) needs about 68.1 GiB of memory to seg
    """
    if not guarding():
        return
    need = data_memory_bytes(shape, dtype)
    available = available_memory() if available is None else available
    if available is not None and need > available:
        raise InputFileError(
            f"'{name}' ({' x '.join(map(str, shape))} {np.dtype(dtype).name}) needs about "
            f"{size_text(need)} of memory to segment, but {size_text(available)} are "
            f"available: {_ADVICE}.", parameters=("skip_memory_check",))


def out_of_memory(name: object) -> InputFileError:
    """The sentence for a run that ran out of memory despite the check (or without it).

    Examples
    --------
    >>> print(out_of_memory("a.tif"))  # doctest: +ELLIPSIS
    Segmenting 'a.tif' ran out of memory: crop or downsample it first, ...
    """
    return InputFileError(f"Segmenting '{name}' ran out of memory: {_ADVICE}.",
                          parameters=("skip_memory_check",))
