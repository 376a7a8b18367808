"""Value statistics streamed over large (memory-mapped) arrays, and the finiteness check.

Arrays are visited in chunks of whole planes along the first axis, so a memory map is
never loaded at once. Percentiles use NumPy's default ('linear') definition:

* exactly, from a count of every value, for integer data whose range is below 2**24;
* exactly, with :func:`numpy.percentile`, when the finite values fit in one chunk;
* otherwise from a 65 536-bin histogram between min and max (error below
  (max - min) / 65 536), and ``exact`` is False.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from typing import Any

import numpy as np

from .. import _checks
from ._volume import Volume

__all__ = ["PERCENTILES", "check_finite", "summarize"]

#: Percentiles reported by ``cavitas info``.
PERCENTILES = (1.0, 50.0, 99.0)
_CHUNK = 1 << 22  # voxels per chunk (16 MiB of float32; 32 MiB as int64 counts)
_BINS = 1 << 16
_EXACT_RANGE = 1 << 24


def _step(shape: tuple[int, ...], chunk_voxels: int) -> int:
    """Planes (along the first axis) per chunk."""
    return max(1, chunk_voxels // max(int(np.prod(shape[1:])), 1))


def _chunks(data: Any, chunk_voxels: int) -> Iterator[np.ndarray]:
    step = _step(tuple(data.shape), chunk_voxels)
    for start in range(0, data.shape[0], step):
        yield np.asarray(data[start:start + step]).ravel()


def _finite(chunk: np.ndarray) -> np.ndarray:
    return chunk[np.isfinite(chunk)] if chunk.dtype.kind == "f" else chunk


def _from_counts(counts: np.ndarray, low: float, width: float, ranks: np.ndarray) -> list[float]:
    """Linear-interpolated order statistics from value counts (bin i = low + i * width)."""
    cumulative = np.cumsum(counts)
    lower = np.floor(ranks).astype(np.int64)
    upper = np.minimum(lower + 1, cumulative[-1] - 1)
    value_low = low + width * np.searchsorted(cumulative, lower, side="right")
    value_up = low + width * np.searchsorted(cumulative, upper, side="right")
    return list(value_low + (ranks - lower) * (value_up - value_low))


def summarize(data: Any, *, chunk_voxels: int = _CHUNK,
              progress: Callable[[Iterator[np.ndarray], int], Iterator[np.ndarray]] | None = None
              ) -> dict[str, Any]:
    """Min, max, percentiles (1, 50, 99) and non-finite count of ``data``, in chunks.

    Parameters
    ----------
    data : array_like
        Any array (a memory map is read chunk by chunk).
    chunk_voxels : int
        Voxels per chunk.
    progress : callable, optional
        Wraps the chunk iterator (``progress(chunks, total)``), e.g. for a progress bar.

    Returns
    -------
    dict
        ``min``, ``max`` (None when no finite value), ``percentiles`` (``{"1": .., "50":
        .., "99": ..}``), ``nonfinite`` (count of NaN/Inf voxels), ``exact`` (bool).

    Examples
    --------
    >>> import numpy as np
    >>> summarize(np.arange(101, dtype=np.uint8).reshape(1, 101))["percentiles"]
    {'1': 1.0, '50': 50.0, '99': 99.0}
    """
    data = data if hasattr(data, "shape") and data.ndim else np.atleast_1d(data)
    if data.dtype == np.bool_:  # a mask: its values as 0 and 1
        data = np.asarray(data).view(np.uint8)
    total = -(-data.shape[0] // _step(tuple(data.shape), chunk_voxels))  # ceiling division

    def passes() -> Iterator[np.ndarray]:
        chunks = _chunks(data, chunk_voxels)
        return progress(chunks, total) if progress is not None else chunks

    low = high = None
    count = nonfinite = 0
    single = None
    for chunk in passes():
        finite = _finite(chunk)
        nonfinite += chunk.size - finite.size
        count += finite.size
        if finite.size:
            lo, hi = finite.min(), finite.max()
            low = lo if low is None else min(low, lo)
            high = hi if high is None else max(high, hi)
        single = finite if total == 1 else None
    keys = [f"{p:g}" for p in PERCENTILES]
    result: dict[str, Any] = {"min": None, "max": None, "percentiles": dict.fromkeys(keys),
                              "nonfinite": int(nonfinite), "exact": True}
    if low is None or high is None:  # no finite value at all
        return result
    result["min"], result["max"] = low.item(), high.item()
    ranks = np.asarray(PERCENTILES) / 100.0 * (count - 1)
    integer = np.dtype(np.asarray(low).dtype).kind in "biu"
    if single is not None:
        values = [float(v) for v in np.percentile(single, PERCENTILES)]
    elif integer and int(high) - int(low) < _EXACT_RANGE:
        counts = np.zeros(int(high) - int(low) + 1, dtype=np.int64)
        for chunk in passes():
            counts += np.bincount((chunk.astype(np.int64) - int(low)), minlength=counts.size)
        values = _from_counts(counts, float(low), 1.0, ranks)
    else:
        edges = (float(low), float(high))
        width = (edges[1] - edges[0]) / _BINS or 1.0
        counts = np.zeros(_BINS, dtype=np.int64)
        for chunk in passes():
            counts += np.histogram(_finite(chunk), bins=_BINS, range=edges)[0]
        values = [v + width / 2 for v in _from_counts(counts, edges[0], width, ranks)]
        values = [min(max(v, edges[0]), edges[1]) for v in values]
        result["exact"] = False
    result["percentiles"] = dict(zip(keys, (float(v) for v in values), strict=True))
    return result


def check_finite(volume: Volume, *, chunk_voxels: int = _CHUNK) -> None:
    """Raise :class:`InputFileError` if ``volume`` holds NaN or infinite values.

    Reading such files works (``cavitas info`` reports the count); the computation stages
    call this before they start.

    Examples
    --------
    >>> import numpy as np
    >>> check_finite(Volume(np.array([[0.0, np.nan]]), source="a.tif"))  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    cavitas._errors.InputFileError: 'a.tif' holds 1 NaN or infinite voxel(s) out of 2; ...
    """
    if volume.dtype.kind != "f":
        return
    bad = sum(int(chunk.size - np.count_nonzero(np.isfinite(chunk)))
              for chunk in _chunks(volume.data, chunk_voxels))
    _checks.refuse_nonfinite(bad, image=f"'{volume.source or '<array>'}'",
                             total=int(np.prod(volume.shape)))
