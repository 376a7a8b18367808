"""A gap in the diagram: where the crowd of noise and texture ends and the cavities begin.

The persistence of the cavities a user calls regions clusters (walls of one stain have
similar contrast), while noise and texture make a crowd that thins out upwards. On a log
scale the two make two modes with a valley between them when the image separates them.
The valley is the image's own threshold: it adapts to texture and correlated noise (which
a white-noise null underrates) and to weak walls that the null's safety factor would cut.

The density is a Gaussian kernel estimate of ``log10(persistence)`` over the candidates,
with Silverman's rule-of-thumb bandwidth (Silverman 1986, sec. 3.4.2, from memory:
``0.9 min(sd, IQR /
1.34) n^(-1/5)``) and at least :data:`BANDWIDTH` decades: few candidates give a smooth
density, so a chance dip among a few dozen cells is not taken for a gap. The upper mode is
the highest local maximum that holds at least :data:`MIN_MODE_SHARE` of the candidates (and
:data:`MIN_MODE_COUNT`); the gap is the lowest point of the density between it and the next
mode below. It counts as a gap only when the density there falls to at most
:data:`MAX_VALLEY_RATIO` of the upper mode's peak; otherwise the diagram shows no gap and
:func:`find_gap` says so (None).

Reference
---------
Silverman, B. W. (1986). Density Estimation for Statistics and Data Analysis. Chapman &
Hall, London (section 3.4.2).
"""

from __future__ import annotations

import numpy as np

__all__ = ["BANDWIDTH", "find_empty_stretch", "find_gap"]

#: Smallest kernel bandwidth of the density of log10(persistence), in decades.
BANDWIDTH = 0.06
#: An upper mode holds at least this share of the candidates, and this many.
MIN_MODE_SHARE = 0.02
MIN_MODE_COUNT = 5
#: The valley's density is at most this fraction of the upper mode's peak.
MAX_VALLEY_RATIO = 0.5


def find_gap(persistence: np.ndarray, floor: float) -> float | None:
    """The persistence at the valley below the upper mode, or None when there is no gap.

    Parameters
    ----------
    persistence : array of float
        Persistence of the candidate cavities.
    floor : float
        Only candidates at or above it are looked at (> 0; e.g. the white-noise null).

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> crowd = np.exp(rng.normal(np.log(0.1), 0.5, 2000))
    >>> cells = np.exp(rng.normal(np.log(1.0), 0.1, 100))
    >>> 0.2 < find_gap(np.r_[crowd, cells], 0.01) < 0.9
    True
    >>> find_gap(crowd, 0.01) is None
    True
    """
    p = np.asarray(persistence, np.float64)
    p = p[np.isfinite(p) & (p >= floor) & (p > 0)]
    if p.size < 2 * MIN_MODE_COUNT:
        return None
    x = np.log10(p)
    q75, q25 = np.percentile(x, [75, 25])
    spread = min(float(np.std(x)), (q75 - q25) / 1.34) or float(np.std(x))
    width = max(BANDWIDTH, 0.9 * spread * x.size ** -0.2)
    grid = np.linspace(x.min() - 3 * width, x.max() + 3 * width, 512)
    hist, edges = np.histogram(x, bins=grid.size, range=(grid[0], grid[-1]))
    centres = 0.5 * (edges[1:] + edges[:-1])
    step = centres[1] - centres[0]
    kernel_x = np.arange(-4 * width, 4 * width + step, step)
    kernel = np.exp(-0.5 * (kernel_x / width) ** 2)
    density = np.convolve(hist, kernel, mode="same")
    peaks = [i for i in range(1, density.size - 1)
             if density[i] > density[i - 1] and density[i] >= density[i + 1]]
    need = max(MIN_MODE_COUNT, MIN_MODE_SHARE * p.size)
    for k in range(len(peaks) - 1, 0, -1):
        top = peaks[k]
        below = peaks[:k]
        # valley: the lowest point between this peak and the highest peak below it
        lower = max(below, key=lambda i: density[i])
        valley = lower + int(np.argmin(density[lower:top + 1]))
        mass = np.count_nonzero(x >= centres[valley])
        if mass < need:
            continue
        if density[valley] <= MAX_VALLEY_RATIO * density[top]:
            return float(10 ** centres[valley])
        return None
    return None


#: An empty stretch of the diagram below the noise null counts when its ends differ by at
#: least this factor ...
EMPTY_FACTOR = 2.5
#: ... its upper end lies at least this fraction of the null ...
EMPTY_LOW = 0.3
#: ... and at most this share of the candidates (and MIN_MODE_COUNT) lies below it.
EMPTY_BELOW_SHARE = 0.05


def find_empty_stretch(persistence: np.ndarray, floor: float, top: float) -> float | None:
    """A threshold below the noise null where the image's diagram is empty, or None.

    Among the candidates (cavities that straddle the image's two intensity classes,
    :mod:`cavitas.segment._evidence`), noise leaves few: the class test removes most of
    its crowd. When the candidates between ``EMPTY_LOW · floor`` and ``top`` (the null
    times the safety factor) form one population whose lower edge is separated from the
    few below by an empty stretch (a factor :data:`EMPTY_FACTOR`), that stretch is the
    image's own threshold: it lies at the stretch's geometric middle. Measured on the
    invented small-cell sheets (400 cells of 10-16 pixels, walls 2 pixels) at noise 0.3 of
    the contrast: 4 candidates under 0.1 of the null, none between 0.1 and 0.5, 286 cells
    from 0.5 up; on the EM slices, the confocal membranes and embryo and the concrete the
    candidates below the null run on without such a stretch (the rule does not apply).

    Examples
    --------
    >>> cells = np.linspace(0.5, 2.0, 200)
    >>> round(find_empty_stretch(np.r_[0.02, 0.05, 0.08, cells], 1.0, 1.25), 2)
    0.2
    >>> find_empty_stretch(np.r_[np.linspace(0.01, 0.5, 40), cells], 1.0, 1.25) is None
    True
    """
    p = np.sort(np.asarray(persistence, np.float64))
    p = p[np.isfinite(p) & (p > 0)]
    above_top = np.count_nonzero(p >= top)
    low, high = p[:-1], p[1:]
    below = np.arange(1, p.size)     # candidates at or below ``low``
    above = p.size - below           # candidates at or above ``high``
    found = ((high >= EMPTY_LOW * floor) & (high >= EMPTY_FACTOR * low)
             & (above - above_top >= MIN_MODE_COUNT) & (below <= EMPTY_BELOW_SHARE * above))
    found &= np.cumsum(high >= top) == 0  # only stretches that end below ``top``
    if not found.any():
        return None
    i = int(np.argmax(found))
    return float(np.sqrt(low[i] * high[i]))
