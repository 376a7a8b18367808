"""A threshold that bounds the share of noise among the regions, not the chance of any.

The noise null's largest persistence times a safety factor (:mod:`cavitas.segment._noise`)
keeps the chance of even one noise region small: a family-wise bound. An image with
hundreds of small cells whose walls stand only a little above the noise loses most of them
under it, while a tuned watershed finds them with few mistakes. Controlling the false
discovery rate instead (Benjamini & Hochberg 1995) bounds the expected share of noise
among the regions kept: the threshold is the lowest persistence ``t`` at which the
expected number of noise cavities above ``t`` (the null's distribution, scaled to the
image's size) is at most :data:`FALSE_DISCOVERY_RATE` of the candidates above ``t``.

The null counts every noise cavity, while the candidates have also passed the class test
(:mod:`cavitas.segment._evidence`), which most noise cavities fail. The share that passes
is measured on the image itself, at the bottom of its diagram, where every cavity is
noise: the candidates below :data:`THINNING_LEVEL` of the null's largest persistence, over
the null's expected count there (one candidate is added, so an image with none there still
assumes some). The expected noise above ``t`` is multiplied by that share. Deeper noise
pockets pass the class test more easily than shallow ones, so the share is a lower
estimate at higher levels; measured, the false discoveries stay rare (below).

It applies only when the noise is white (its two wavelet levels agree,
:attr:`cavitas.segment._noise.NoiseLevel.white`): with correlated noise or texture
only the null's scaled maximum is a fair bound, its distribution is not (on the EM slices
of ``bench/real_scans.py`` the rule would add 56 spurious regions). Measured on the
invented hard sheets (400 cells of 10-16 pixels, 2-pixel walls, a 0.35-1 gain), dark
walls: 89.9 % found at noise 0.18 and 30.5 % at 0.3 with the family-wise bound; 98.1 %
and 69.2 % with this rule counting every noise cavity (spurious 0.9 % and 13.6 %, mostly
pairs of cells still joined); 100 % and 86.2 % with the share that passes the class test
(spurious 0 % and 6.7 %; bright walls at 0.18: 99.4 %, none spurious). Levels of 0.1 and
0.3 of the null's largest for the share gave the same within 1.6 %. The real scans of the
benchmark are unchanged (their noise is correlated, or their cells stand far above it).

Reference
---------
Benjamini, Y., & Hochberg, Y. (1995). Controlling the false discovery rate: a practical
and powerful approach to multiple testing. J. R. Statist. Soc. B 57(1), 289-300.
"""

from __future__ import annotations

import numpy as np

from ._noise import NullDistribution

__all__ = ["FALSE_DISCOVERY_RATE", "THINNING_LEVEL", "false_discovery_threshold",
           "share_passing"]

#: Expected share of noise among the candidates above the threshold.
FALSE_DISCOVERY_RATE = 0.01
#: Fewest candidates above the threshold for the rule to apply.
MIN_DISCOVERIES = 5
#: Candidates below this fraction of the null's largest persistence are taken for noise
#: when the share of noise cavities passing the class test is measured.
THINNING_LEVEL = 0.2


def share_passing(persistence: np.ndarray, null: NullDistribution, noise: float,
                  voxels: int) -> float:
    """Share of the noise cavities that are candidates, measured at the diagram's bottom.

    Examples
    --------
    >>> null = NullDistribution(np.linspace(0.0, 1.0, 1001)[1:], 1000, 1.0)
    >>> round(share_passing(np.r_[0.05, 0.1, np.linspace(0.9, 3.0, 50)], null, 1.0, 1000), 4)
    0.0151
    """
    low = THINNING_LEVEL * null.largest
    at_bottom = np.count_nonzero(np.asarray(persistence) < low * noise)
    expected = float(null.expected_above(0.0, voxels) - null.expected_above(low, voxels))
    return float(min(1.0, (at_bottom + 1) / max(expected, 1.0)))


def false_discovery_threshold(persistence: np.ndarray, null: NullDistribution, noise: float,
                              voxels: int, top: float, share: float = 1.0) -> float | None:
    """The lowest candidate persistence below ``top`` at which the expected noise share
    above it is at most :data:`FALSE_DISCOVERY_RATE`, or None.

    Parameters
    ----------
    persistence : array of float
        Persistence of the candidate cavities.
    null : NullDistribution
        Noise cavities of unit white noise at this shape and smoothing.
    noise : float
        The image's noise level (the null's unit).
    voxels : int
        Voxels of the image.
    top : float
        The family-wise threshold: the result is always below it.
    share : float, optional
        Share of the noise cavities that can be candidates (:func:`share_passing`).

    Examples
    --------
    >>> null = NullDistribution(np.linspace(0.0, 1.0, 1001)[1:], 1000, 1.0)
    >>> cells = np.linspace(0.9, 3.0, 400)
    >>> t = false_discovery_threshold(cells, null, noise=1.0, voxels=1000, top=1.25)
    >>> round(t, 3)  # noise expected above it: 1 cavity, within 1 % of the 382 candidates
    1.0
    >>> false_discovery_threshold(cells[:4], null, 1.0, 1000, 1.25) is None
    True
    """
    p = np.sort(np.asarray(persistence, np.float64))
    p = p[np.isfinite(p) & (p > 0) & (p < top)]
    above_top = np.count_nonzero(np.asarray(persistence) >= top)
    found = p.size - np.arange(p.size) + above_top  # candidates at or above each level
    expected = null.expected_above(p / noise, voxels) * share
    passes = (found >= MIN_DISCOVERIES) & (expected <= FALSE_DISCOVERY_RATE * found)
    return float(p[np.argmax(passes)]) if passes.any() else None
