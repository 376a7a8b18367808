"""Otsu's two-class split of a sample in three linear passes (numba, private).

:func:`otsu_split` gives exactly what scikit-image's ``threshold_otsu(sample, nbins=1024)``
and the medians of the two classes (``np.median(sample[sample <= t])`` and
``np.median(sample[sample > t])``) give, without their copies and partitions:

* the histogram is NumPy's own equal-width binning (``np.histogram(sample, 1024)``: the
  same float64 arithmetic and the same one-step corrections at the bin edges), and the
  threshold is scikit-image's, computed from that histogram;
* the lower class (``sample <= t``, compared in the sample's type as NumPy does) is the
  ``n_low`` smallest values, the upper class the rest, so a class median is one or two
  order statistics of the whole sample: the histogram says which bin holds each, and
  only that bin's values are sorted. The two middle values are averaged by ``np.mean``,
  as ``np.median`` does.

Otsu, N. (1979). A threshold selection method from gray-level histograms. IEEE Trans.
Syst. Man Cybern. 9(1), 62-66. doi:10.1109/TSMC.1979.4310076
"""

from __future__ import annotations

import numpy as np
from numba import njit

__all__ = ["NBINS", "otsu_reference", "otsu_split"]

#: Histogram bins of the threshold (scikit-image's ``nbins``).
NBINS = 1024


@njit(cache=True, nogil=True)
def _bin_pass(sample, edges, first, denom, bins):
    """Bin of every value, as ``np.histogram`` computes it (``first`` and ``first + denom``
    being the sample's smallest and largest values); the counts per bin, and whether every
    bin's values lie at or above those of the bins before it.

    Two loops: the bins first, then the counts and each bin's extremes (one loop doing both
    took a third longer).
    """
    n_bins = edges.size - 1
    last = n_bins - 1
    for i in range(sample.size):
        x = np.float64(sample[i])
        # first <= x <= the largest value, so the position is at most n_bins, and a value
        # moved down one bin is below that bin's upper edge
        k = min(np.intp(((x - first) / denom) * n_bins), last)
        if x < edges[k]:
            k -= 1
        elif x >= edges[k + 1] and k != last:
            k += 1
        bins[i] = k
    counts = np.zeros(n_bins, np.int64)
    top = np.full(n_bins, -np.inf)
    bottom = np.full(n_bins, np.inf)
    for i in range(sample.size):
        x = np.float64(sample[i])
        k = bins[i]
        counts[k] += 1
        top[k] = max(top[k], x)
        bottom[k] = min(bottom[k], x)
    highest = -np.inf
    for k in range(n_bins):
        if bottom[k] < highest:
            return counts, False
        highest = max(highest, top[k])
    return counts, True


@njit(cache=True, nogil=True)
def _count_at_most(sample, t):
    """Values ``<= t``."""
    n = 0
    for i in range(sample.size):
        if sample[i] <= t:
            n += 1
    return n


@njit(cache=True, nogil=True)
def _in_bin(sample, bins, k, size):
    """The ``size`` values of bin ``k``, sorted."""
    out = np.empty(size, sample.dtype)
    j = 0
    for i in range(sample.size):
        if bins[i] == k:
            out[j] = sample[i]
            j += 1
    out.sort()
    return out


def _order_statistic(sample: np.ndarray, bins: np.ndarray, counts: np.ndarray,
                     starts: np.ndarray, rank: int, sorted_bins: dict) -> np.generic:
    """The value of ``rank`` (0-based) in the sorted sample."""
    k = int(np.searchsorted(starts, rank, side="right")) - 1
    if k not in sorted_bins:
        sorted_bins[k] = _in_bin(sample, bins, k, int(counts[k]))
    return sorted_bins[k][rank - starts[k]]


def _median_of_ranks(sample, bins, counts, starts, first: int, size: int,
                     sorted_bins: dict) -> float:
    """``np.median`` of the values of ranks ``first .. first + size - 1``."""
    if size == 0:
        return float(np.median(sample[:0]))
    middle = first + size // 2
    ranks = [middle] if size % 2 else [middle - 1, middle]
    values = np.array([_order_statistic(sample, bins, counts, starts, r, sorted_bins)
                       for r in ranks], sample.dtype)
    return float(np.mean(values))


def otsu_reference(sample: np.ndarray) -> tuple[float, float, float]:
    """What :func:`otsu_split` computes, the general way (scikit-image and NumPy)."""
    from skimage.filters import threshold_otsu

    t = float(threshold_otsu(sample.astype(np.float64), nbins=NBINS))
    return t, float(np.median(sample[sample <= t])), float(np.median(sample[sample > t]))


def otsu_split(sample: np.ndarray) -> tuple[float, float, float]:
    """Otsu's threshold of a 1D sample and the medians of its two classes.

    The sample must hold at least two distinct finite values. Equal to
    :func:`otsu_reference`.

    Examples
    --------
    >>> sample = np.array([0.0, 0.1, 0.3, 1.0, 1.1, 1.3])
    >>> otsu_split(sample) == otsu_reference(sample)
    True
    >>> [round(v, 3) for v in otsu_split(sample)]
    [0.3, 0.1, 1.1]
    """
    from skimage.filters import threshold_otsu

    if sample.dtype not in (np.float32, np.float64):
        return otsu_reference(sample)
    first, last = float(sample.min()), float(sample.max())
    edges = np.linspace(first, last, NBINS + 1)
    bins = np.empty(sample.size, np.int16)  # NBINS < 2**15
    counts, ordered = _bin_pass(sample, edges, first, last - first, bins)
    if not ordered:  # bins out of value order (never seen): the general way then
        return otsu_reference(sample)
    centers = (edges[:-1] + edges[1:]) / 2.0
    t = float(threshold_otsu(hist=(counts, centers)))
    # ``sample <= t`` compares in the sample's type (a Python float is cast to it)
    t_cast = np.asarray(t).astype(sample.dtype)[()]
    n_low = int(_count_at_most(sample, t_cast))
    starts = np.r_[0, np.cumsum(counts)[:-1]]
    sorted_bins: dict = {}
    low = _median_of_ranks(sample, bins, counts, starts, 0, n_low, sorted_bins)
    high = _median_of_ranks(sample, bins, counts, starts, n_low, sample.size - n_low,
                            sorted_bins)
    return t, low, high
