"""The segmentation's whole-image statistics of a chunked volume, exactly.

The automatic mode reads two figures off the whole image before any diagram: the noise
level (:func:`cavitas.segment._noise.noise_level`) and the robust range (the 0.5th to
99.5th percentile, ``numpy.percentile``). Neither is a sum, so neither is a plain reduction
over chunks; both come out equal to the in-memory values here:

* the noise level reads a central crop of at most 4 Mi voxels: :func:`noise_level_in_chunks`
  reads exactly that crop (a crop of it is itself), and nothing else;
* a percentile is a blend of two order statistics: :func:`order_statistics_in_chunks` finds
  any k-th smallest value by counting, 16 bits of an order-preserving key at a time (one
  pass over the chunks for 8- and 16-bit data, two for 32-bit, four for 64-bit), and
  :func:`percentiles_in_chunks` blends them with NumPy's own ``"linear"`` rule.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ._noise import _NOISE_VOXELS, NoiseLevel, _crop_shape, noise_level

__all__ = ["noise_level_in_chunks", "order_statistics_in_chunks", "percentiles_in_chunks"]

#: Key bits counted per pass over the chunks (a histogram of 2**16 counts per rank sought).
_DIGIT_BITS = 16
#: Per-chunk counts added together by one task.
_FAN_IN = 8


def noise_level_in_chunks(image: Any, floor: float = 0.0) -> NoiseLevel:
    """:func:`~cavitas.segment._noise.noise_level` of a Dask array: only the voxels it reads,
    on one worker.

    Examples
    --------
    >>> import dask.array as da
    >>> noisy = np.random.default_rng(0).normal(0, 2.0, (64, 64))
    >>> noise_level_in_chunks(da.from_array(noisy, chunks=16)) == noise_level(noisy)
    True
    """
    import dask

    crop = _crop_shape(tuple(image.shape), _NOISE_VOXELS)
    start = [(s - c) // 2 for s, c in zip(image.shape, crop, strict=True)]
    read = image[tuple(slice(a, a + c) for a, c in zip(start, crop, strict=True))]
    # on a worker: the crop and its wavelet details never reach the client
    return dask.delayed(_noise_of, pure=True)(read, floor).compute()


def _noise_of(crop: np.ndarray, floor: float) -> NoiseLevel:
    return noise_level(np.asarray(crop), floor=floor)


def percentiles_in_chunks(image: Any, percents: Any) -> np.ndarray:
    """``numpy.percentile(image, percents)`` (``"linear"``) of a Dask array, exactly.

    Integer data keep their type until the blend, as NumPy keeps them; float data of any
    width are blended in float64 (pass ``image.astype(np.float64)`` semantics: the order
    statistics are the same values). NaN is not allowed (the segmentation refuses it
    before). A ``-0.0`` counts as ``+0.0`` and comes back as ``+0.0``.

    Examples
    --------
    >>> import dask.array as da
    >>> values = np.random.default_rng(1).integers(0, 4000, (30, 20)).astype(np.uint16)
    >>> got = percentiles_in_chunks(da.from_array(values, chunks=7), [0.5, 99.5])
    >>> bool((got == np.percentile(values, [0.5, 99.5])).all())
    True
    """
    q = np.true_divide(np.asanyarray(percents, np.float64), 100)
    n = int(np.prod(image.shape))
    virtual = (n - 1) * q  # NumPy's "linear" virtual index, and its neighbours
    previous = np.floor(virtual)
    following = previous + 1
    above = virtual >= n - 1
    previous[above] = following[above] = n - 1
    below = virtual < 0
    previous[below] = following[below] = 0
    gamma = np.asanyarray(virtual - np.where(above, -1.0, previous), np.float64)
    ranks = np.concatenate([previous, following]).astype(np.int64)
    found = order_statistics_in_chunks(image, ranks)
    blend_type = image.dtype if image.dtype.kind in "iub" else np.dtype(np.float64)
    a = found[:q.size].astype(blend_type)
    b = found[q.size:].astype(blend_type)
    diff_b_a = b - a  # numpy.lib's _lerp, step for step
    lerp = np.add(a, diff_b_a * gamma)
    np.subtract(b, diff_b_a * (1 - gamma), out=lerp, where=gamma >= 0.5, casting="unsafe",
                dtype=type(lerp.dtype))
    return lerp


def order_statistics_in_chunks(image: Any, ranks: Any) -> np.ndarray:
    """The ``ranks``-th smallest values (from 0) of a Dask array, by counting in chunks.

    Examples
    --------
    >>> import dask.array as da
    >>> values = np.array([[3.5, -1.0, 2.0], [0.0, 9.0, -7.25]], np.float32)
    >>> order_statistics_in_chunks(da.from_array(values, chunks=1), [0, 2, 5]).tolist()
    [-7.25, 0.0, 9.0]
    """
    import dask

    ranks = np.asarray(ranks, np.int64)
    dtype = np.dtype(image.dtype)
    bits = 8 * dtype.itemsize
    blocks = image.to_delayed().ravel()
    prefix = np.zeros(ranks.size, np.uint64)
    remaining = ranks.copy()
    done = 0
    while done < bits:
        width = min(_DIGIT_BITS, bits - done)
        shift = bits - done - width
        counts = np.asarray(dask.compute(_tree_sum([dask.delayed(_digit_counts, pure=True)(
            block, prefix, done, shift, width, bits) for block in blocks]))[0])
        for j in range(ranks.size):
            cumulative = np.cumsum(counts[j])
            digit = int(np.searchsorted(cumulative, remaining[j], side="right"))
            if digit:
                remaining[j] -= cumulative[digit - 1]
            prefix[j] = (int(prefix[j]) << width) | digit
        done += width
    return _from_keys(prefix, dtype)


def _tree_sum(parts: list[Any]) -> Any:
    """The sum of delayed arrays, :data:`_FAN_IN` at a time (no task holds them all)."""
    import dask

    while len(parts) > 1:
        parts = [dask.delayed(_sum, pure=True)(parts[i:i + _FAN_IN])
                 for i in range(0, len(parts), _FAN_IN)]
    return parts[0]


def _sum(parts: list[np.ndarray]) -> np.ndarray:
    total = parts[0].copy()
    for part in parts[1:]:
        total += part
    return total


def _digit_counts(block: np.ndarray, prefix: np.ndarray, done: int, shift: int, width: int,
                  bits: int) -> np.ndarray:
    """Per rank sought: how many of the block's keys start with its ``prefix`` (``done``
    bits), by their next ``width`` bits."""
    keys = _to_keys(np.asarray(block), bits)
    digits = ((keys >> np.uint64(shift)) & np.uint64((1 << width) - 1)).astype(np.int64)
    out = np.zeros((prefix.size, 1 << width), np.int64)
    for j, start in enumerate(prefix.tolist()):
        same = (keys >> np.uint64(bits - done)) == np.uint64(start) if done else slice(None)
        out[j] = np.bincount(digits[same].ravel(), minlength=1 << width)
    return out


def _to_keys(values: np.ndarray, bits: int) -> np.ndarray:
    """Unsigned keys (as uint64) that sort like ``values``; -0.0 keyed as +0.0."""
    kind = values.dtype.kind
    unsigned = np.dtype(f"u{bits // 8}")
    if kind == "b":
        return values.astype(np.uint64)
    if kind == "u":
        return values.astype(np.uint64)
    if kind == "i":
        return (values.view(unsigned) ^ unsigned.type(1 << (bits - 1))).astype(np.uint64)
    raw = (values + values.dtype.type(0)).view(unsigned)  # -0.0 + 0.0 is +0.0
    negative = (raw >> unsigned.type(bits - 1)).astype(bool)
    flipped = np.where(negative, ~raw, raw | unsigned.type(1 << (bits - 1)))
    return flipped.astype(np.uint64)


def _from_keys(keys: np.ndarray, dtype: np.dtype) -> np.ndarray:
    """The values of ``dtype`` whose keys (:func:`_to_keys`) are ``keys``."""
    bits = 8 * dtype.itemsize
    unsigned = np.dtype(f"u{bits // 8}")
    raw = keys.astype(unsigned)
    if dtype.kind in "bu":
        return raw.astype(dtype)
    if dtype.kind == "i":
        return (raw ^ unsigned.type(1 << (bits - 1))).view(dtype)
    top = unsigned.type(1 << (bits - 1))
    positive = (raw & top).astype(bool)
    return np.where(positive, raw & ~top, ~raw).astype(unsigned).view(dtype)
