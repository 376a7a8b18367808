"""The voxel sort shared by both sweeps: a stable LSD radix sort on order-preserving keys.

Every supported dtype is read through an unsigned view of the same width (no copy) and
mapped to an order-preserving unsigned key inside the kernel: unsigned integers as they are,
signed integers with the sign bit flipped, IEEE floats with the usual sign trick (all bits
flipped for negatives, the sign bit set for positives; ``-0.0`` is read as ``+0.0`` so it
ties with it). Keys are sorted in 8- or 16-bit digits, least significant first, each pass a
stable counting sort; a digit that is the same for every voxel is skipped. So 8/16-bit data
take one counting pass (O(n), no extra buffer), 32-bit data two passes and 64-bit data up to
four, with one index buffer in addition to the result. Arrays of fewer than 131,072 values
(the critical pixels of a 2D sweep, small images) are sorted in 8-bit digits, twice as many
passes over far fewer counters.

The result is the **cavity-sweep order**: increasing value (decreasing with
``descending=True``), ties by increasing flat index, so it is fully deterministic. Only
voxels inside the mask are sorted. The same pass counts non-finite values (NaN, +-inf) among
the sorted voxels so the caller can reject them.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from .._errors import InputFileError, ParameterError

__all__ = ["EXACT_LIMIT", "engine_array", "index_dtype", "sort_voxels", "supported"]

#: Levels (births, deaths, thresholds) are float64, exact for integers up to this
#: magnitude (IEEE 754 double: a 53-bit significand).
EXACT_LIMIT = 2**53

# dtype -> (unsigned view, key mode: 0 unsigned, 1 signed integer, 2 IEEE float)
_VIEWS = {
    np.dtype(np.bool_): (np.uint8, 0),
    np.dtype(np.uint8): (np.uint8, 0),
    np.dtype(np.int8): (np.uint8, 1),
    np.dtype(np.uint16): (np.uint16, 0),
    np.dtype(np.int16): (np.uint16, 1),
    np.dtype(np.uint32): (np.uint32, 0),
    np.dtype(np.int32): (np.uint32, 1),
    np.dtype(np.float32): (np.uint32, 2),
    np.dtype(np.uint64): (np.uint64, 0),
    np.dtype(np.int64): (np.uint64, 1),
    np.dtype(np.float64): (np.uint64, 2),
}


#: Array size from which keys are sorted in 16-bit digits rather than 8-bit ones.
_WIDE_DIGITS_FROM = 1 << 17


def index_dtype(size: int) -> type:
    """Voxel index type for an image of ``size`` voxels: int32 below 2**31, else int64."""
    return np.int32 if size < 2**31 - 1 else np.int64


def supported(dtype: np.dtype) -> bool:
    """Whether :func:`sort_voxels` reads ``dtype`` without conversion."""
    return np.dtype(dtype) in _VIEWS


def engine_array(arr: np.ndarray, name: str = "image") -> np.ndarray:
    """``arr`` in a type every stage reads: itself when possible, else one converted copy.

    Non-native byte order becomes native, float16 becomes float32 (exactly) and wider
    floats (long double) become float64, rounded to its 53-bit precision. Anything else
    that is not an integer or float type is refused with a :class:`ParameterError`;
    64-bit integers beyond :data:`EXACT_LIMIT` in magnitude, which float64 levels would
    merge, with an :class:`InputFileError` (``name`` should then name the file).

    Examples
    --------
    >>> engine_array(np.ones(2, np.float16)).dtype, engine_array(np.ones(2, np.longdouble)).dtype
    (dtype('float32'), dtype('float64'))
    """
    if arr.dtype.kind == "f" and arr.dtype.itemsize > 8:
        return arr.astype(np.float64)
    if arr.dtype == np.float16:
        return arr.astype(np.float32)
    if not arr.dtype.isnative:  # e.g. big-endian data from a file
        arr = arr.astype(arr.dtype.newbyteorder("="))
    if not supported(arr.dtype):
        raise ParameterError(f"{name} must have an integer or float dtype; got {arr.dtype}.")
    if arr.dtype.kind in "iu" and arr.dtype.itemsize == 8 and arr.size:
        peak = max(abs(int(arr.min())), abs(int(arr.max())))
        if peak > EXACT_LIMIT:
            raise InputFileError(
                f"{name} holds integers up to {peak} in magnitude, beyond 2**53, where the "
                "float64 levels of the diagram no longer tell neighbouring values apart; "
                "subtract an offset or rescale the values to within 2**53 first.")
    return arr


@njit(cache=True, inline="always")
def _key(u, mode, descending, signbit, allbits):
    k = np.uint64(u)
    if mode == 1:
        k = k ^ signbit
    elif mode == 2:
        if k == signbit:  # -0.0 ties with +0.0
            k = np.uint64(0)
        if k & signbit:
            k = k ^ allbits
        else:
            k = k | signbit
    if descending:
        k = k ^ allbits
    return k


@njit(cache=True, nogil=True)
def _histograms(bits, mask, use_mask, mode, descending, width, dbits, ndig, expmask):
    """Counts of every digit in one pass, the number of sorted voxels and of non-finite ones."""
    signbit = np.uint64(1) << np.uint64(width - 1)
    allbits = (signbit - np.uint64(1)) | signbit
    dmask = np.uint64((1 << dbits) - 1)
    hist = np.zeros((ndig, 1 << dbits), np.int64)
    m = 0
    nonfinite = 0
    for i in range(bits.shape[0]):
        if use_mask and not mask[i]:
            continue
        u = bits[i]
        if mode == 2 and (np.uint64(u) & expmask) == expmask:
            nonfinite += 1
        k = _key(u, mode, descending, signbit, allbits)
        for d in range(ndig):
            hist[d, np.int64((k >> np.uint64(d * dbits)) & dmask)] += 1
        m += 1
    return hist, m, nonfinite


@njit(cache=True, nogil=True)
def _scatter_pass(bits, src, from_identity, mask, use_mask, dst, starts, shift, mode,
                  descending, width, dbits):
    """One stable counting-sort pass on digit ``shift`` (src -> dst)."""
    signbit = np.uint64(1) << np.uint64(width - 1)
    allbits = (signbit - np.uint64(1)) | signbit
    dmask = np.uint64((1 << dbits) - 1)
    sh = np.uint64(shift)
    pos = starts.copy()
    if from_identity:
        for i in range(bits.shape[0]):
            if use_mask and not mask[i]:
                continue
            k = _key(bits[i], mode, descending, signbit, allbits)
            d = np.int64((k >> sh) & dmask)
            dst[pos[d]] = i
            pos[d] += 1
    else:
        for j in range(src.shape[0]):
            i = src[j]
            k = _key(bits[i], mode, descending, signbit, allbits)
            d = np.int64((k >> sh) & dmask)
            dst[pos[d]] = i
            pos[d] += 1


@njit(cache=True, nogil=True)
def _masked_identity(mask, use_mask, dst):
    j = 0
    for i in range(mask.shape[0] if use_mask else dst.shape[0]):
        if use_mask and not mask[i]:
            continue
        dst[j] = i
        j += 1


def sort_voxels(
    flat: np.ndarray, mask: np.ndarray | None = None, *, descending: bool = False
) -> tuple[np.ndarray, int]:
    """Stable sort of the voxels of ``flat`` (inside ``mask``) by value.

    Parameters
    ----------
    flat : (n,) ndarray
        The image, raveled in C order, of a dtype listed in ``_VIEWS``.
    mask : (n,) bool ndarray, optional
        Only voxels where ``mask`` is true are sorted.
    descending : bool
        Sort by decreasing value (ties still by increasing index).

    Returns
    -------
    order : (m,) int32 or int64
        Flat indices in sorted order (int32 when ``n < 2**31 - 1``).
    nonfinite : int
        Number of sorted voxels holding NaN or +-inf (always 0 for integer data).

    Examples
    --------
    >>> import numpy as np
    >>> order, bad = sort_voxels(np.array([3, 1, 2, 1], np.uint8))
    >>> order.tolist(), bad
    ([1, 3, 2, 0], 0)
    >>> sort_voxels(np.array([-0.5, 2.0, -0.0, 0.0], np.float32), descending=True)[0].tolist()
    [1, 2, 3, 0]
    """
    dtype = np.dtype(flat.dtype)
    if dtype not in _VIEWS:
        raise ParameterError(f"image dtype must be an integer or float type; got {dtype}.")
    view_type, mode = _VIEWS[dtype]
    bits = flat.view(view_type)
    width = 8 * bits.dtype.itemsize
    # 16-bit digits pay off once the array is larger than their 65,536 counters.
    dbits = 8 if width == 8 or flat.shape[0] < _WIDE_DIGITS_FROM else 16
    ndig = width // dbits
    expmask = 0
    if mode == 2:
        expmask = 0x7F800000 if width == 32 else 0x7FF0000000000000
    use_mask = mask is not None
    mask_u8 = mask.view(np.uint8) if mask is not None else np.zeros(1, np.uint8)
    hist, m, nonfinite = _histograms(
        bits, mask_u8, use_mask, mode, descending, width, dbits, ndig, np.uint64(expmask)
    )
    itype = index_dtype(flat.shape[0])
    passes = [d for d in range(ndig) if hist[d].max() < m]
    out = np.empty(m, itype)
    if not passes:
        _masked_identity(mask_u8, use_mask, out)
        return out, int(nonfinite)
    # Ping-pong between two buffers so that the last pass writes into ``out``.
    other = np.empty(m, itype) if len(passes) > 1 else out
    bufs = [other, out] if len(passes) % 2 == 0 else [out, other]
    src: np.ndarray = np.empty(0, itype)
    for p, d in enumerate(passes):
        dst = bufs[p % 2] if len(passes) > 1 else out
        starts = np.concatenate(([0], np.cumsum(hist[d])[:-1]))
        _scatter_pass(bits, src, p == 0, mask_u8, use_mask, dst, starts, d * dbits, mode,
                      descending, width, dbits)
        src = dst
    del other, bufs, src
    return out, int(nonfinite)
