"""Otsu's two-class split of a sample in three linear passes (numba, private).

:func:`otsu_split` gives exactly what scikit-image's ``threshold_otsu(sample, nbins=1024)``
and the medians of the two classes (``np.median(sample[sample <= t])`` and
``np.median(sample[sample > t])``) give, without their copies and partitions:

* the histogram is NumPy's own equal-width binning (``np.histogram(sample, 1024)``: the
  same float64 arithmetic and the same one-step corrections at the bin edges), and the
  threshold is scikit-image's, computed from that histogram with its operations in their
  order and types (:func:`_otsu_threshold`);
* the lower class (``sample <= t``, compared in the sample's type as NumPy does) is the
  ``n_low`` smallest values, the upper class the rest, so a class median is one or two
  order statistics of the whole sample: the histogram says which bin holds each, and
  only those bins' values are sorted. Two middle values are averaged as ``np.mean``
  averages them (in the sample's type), as ``np.median`` does.

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
def _otsu_threshold(counts, centers):
    """scikit-image's ``threshold_otsu(hist=(counts, centers))``, operation for operation:
    empty ends trimmed, the counts as float32 (as it converts them), the same running sums
    in the same order, the product of the two class weights rounded to float32 (a product
    of two float32 values is exact in float64, so rounding it gives the float32 product),
    and the first largest between-class variance (the first NaN, as ``np.argmax``)."""
    start, end = 0, counts.size
    if counts[0] == 0 or counts[end - 1] == 0:
        while start < end - 1 and counts[start] == 0:
            start += 1
        while end > start + 1 and counts[end - 1] == 0:
            end -= 1
    n = end - start
    weight = np.empty(n, np.float32)
    for i in range(n):
        weight[i] = counts[start + i]
    below = np.empty(n, np.float32)  # weight of the class up to and including each bin
    mean_below = np.empty(n)
    total = np.float32(0.0)
    moment = 0.0
    for i in range(n):
        total = np.float32(np.float64(total) + np.float64(weight[i]))
        moment += np.float64(weight[i]) * centers[start + i]
        below[i] = total
        mean_below[i] = moment / np.float64(total)
    above = np.empty(n, np.float32)  # ... from each bin up
    mean_above = np.empty(n)
    total = np.float32(0.0)
    moment = 0.0
    for i in range(n - 1, -1, -1):
        total = np.float32(np.float64(total) + np.float64(weight[i]))
        moment += np.float64(weight[i]) * centers[start + i]
        above[i] = total
        mean_above[i] = moment / np.float64(total)
    best = 0
    top = 0.0
    for i in range(n - 1):
        product = np.float32(np.float64(below[i]) * np.float64(above[i + 1]))
        gap = mean_below[i] - mean_above[i + 1]
        variance = np.float64(product) * (gap * gap)
        if variance != variance:
            best = i
            break
        if i == 0 or variance > top:
            best = i
            top = variance
    return centers[start + best]


@njit(cache=True, nogil=True)
def _class_medians(sample, bins, counts, t, single):
    """``np.median`` of the values ``<= t`` and of those above (NaN for an empty class),
    ``single``: the sample is float32 (``np.median`` then averages two middle values in
    float32; rounding their float64 sum and half gives the same, as 53 >= 2 * 24 + 2 bits).

    The lower class is the ``n_low`` smallest values, so each median is one or two order
    statistics of the whole sample: the histogram says which bin holds each, and only
    those bins' values are gathered (one pass) and sorted.
    """
    n = sample.size
    n_low = 0
    for i in range(n):
        if sample[i] <= t:
            n_low += 1
    n_bins = counts.size
    starts = np.empty(n_bins + 1, np.int64)
    starts[0] = 0
    for k in range(n_bins):
        starts[k + 1] = starts[k] + counts[k]
    ranks = np.full(4, -1, np.int64)  # the middle ranks of each class
    for c, (first, size) in enumerate(((0, n_low), (n_low, n - n_low))):
        if size > 0:
            ranks[2 * c + 1] = first + size // 2
            if size % 2 == 0:
                ranks[2 * c] = first + size // 2 - 1
    slot = np.full(n_bins, -1, np.int64)  # where each bin's values go, if wanted
    width = 0
    for r in ranks:
        if r >= 0:
            k = np.searchsorted(starts, r, side="right") - 1
            if slot[k] < 0:
                slot[k] = width
                width += counts[k]
    gathered = np.empty(width, sample.dtype)
    filled = slot.copy()
    for i in range(n):
        k = bins[i]
        if slot[k] >= 0:
            gathered[filled[k]] = sample[i]
            filled[k] += 1
    for k in range(n_bins):
        if slot[k] >= 0:
            gathered[slot[k]:slot[k] + counts[k]].sort()
    medians = np.full(2, np.nan)
    for c in range(2):
        if ranks[2 * c + 1] < 0:
            continue
        value = 0.0
        for r in ranks[2 * c:2 * c + 2]:
            if r >= 0:
                k = np.searchsorted(starts, r, side="right") - 1
                value += np.float64(gathered[slot[k] + r - starts[k]])
        if ranks[2 * c] >= 0:  # two middle values: their mean in the sample's type
            if single:
                value = np.float64(np.float32(np.float64(np.float32(value)) / 2.0))
            else:
                value = value / 2.0
        medians[c] = value
    return medians[0], medians[1]


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
    if sample.dtype not in (np.float32, np.float64):
        return otsu_reference(sample)
    first, last = float(sample.min()), float(sample.max())
    edges = np.linspace(first, last, NBINS + 1)
    bins = np.empty(sample.size, np.int16)  # NBINS < 2**15
    counts, ordered = _bin_pass(sample, edges, first, last - first, bins)
    if not ordered:  # bins out of value order (never seen): the general way then
        return otsu_reference(sample)
    centers = (edges[:-1] + edges[1:]) / 2.0
    t = float(_otsu_threshold(counts, centers))
    # ``sample <= t`` compares in the sample's type (a Python float is cast to it)
    t_cast = np.asarray(t).astype(sample.dtype)[()]
    low, high = _class_medians(sample, bins, counts, t_cast, sample.dtype == np.float32)
    return t, float(low), float(high)
