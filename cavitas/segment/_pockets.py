"""Texture pockets: small chambers whose inside is barely darker than their wall.

Where the noise is not white (texture, correlated noise: every real scan of
``bench/real_scans.py``), organelles, grains and folds close small pockets whose walls are
as strong as a cell's: they pass the significance tests. What they lack is depth. A cell's
inside lies well below its wall; a pocket is wall material with a slightly darker middle.
Depth is measured per chamber from what the delineation already has (its basin's inside
value and meeting-line median, :class:`cavitas.segment._regions.BasinLevels`), against the
image's lower class (the two-class split of :mod:`cavitas.segment._evidence`)::

    depth = (wall - inside) / (wall - low)

A chamber smaller than :data:`POCKET_SIZE` of the typical one (the area-weighted median
size, :func:`cavitas.segment._evidence.typical_size`) whose depth is below
:data:`POCKET_DEPTH` of the typical depth (the median over the chambers of ordinary size)
is a pocket: its voxels go back to the walls (and a pocket
wholly inside one region goes to that region with the rest of its walls).

Measured on the public EM slices of ``bench/real_scans.py`` (dark membranes, 228 reference
cells; found / spurious / F; with the largest count choosing the scale, before
:data:`cavitas.segment._detect.TEXTURED_SCALE_SHARE`): 209 / 53 / 0.853 without the rule,
209 / 39 / 0.878 with it; POCKET_DEPTH 0.4 keeps 12 of those pockets, 0.6 drops 4 more
and a cell (208 / 35); POCKET_SIZE 1/8 keeps 2 more pockets, 1/2 gives the same as 1/4. On
the same slices at half and double the pixel density, with added noise and cropped, F rises
by 0.003 to 0.036. The cells3d slice loses one 15-pixel pocket in a wall junction; the
embryo and the concrete voids are unchanged (1 of 289 concrete regions goes).
With white noise (the invented scenes) the rule does not apply: there is no texture to
close pockets, and small capsules blurred by the optics are shallow and real.
"""

from __future__ import annotations

import numpy as np

from ._evidence import typical_size
from ._regions import BasinLevels

__all__ = ["POCKET_DEPTH", "POCKET_SIZE", "shallow_pockets"]

#: Chambers smaller than this fraction of the typical chamber may be pockets.
POCKET_SIZE = 0.25
#: ... and are, when their depth is below this fraction of the typical depth.
POCKET_DEPTH = 0.5


def shallow_pockets(sizes: np.ndarray, levels: BasinLevels, low: float) -> np.ndarray:
    """Per chamber (``sizes``: its voxels; ``levels``: its basin's, same order): a pocket.

    Examples
    --------
    >>> sizes = np.array([900, 1000, 1100, 40, 50])
    >>> inside = np.array([0.1, 0.1, 0.1, 0.7, 0.2])
    >>> levels = BasinLevels(inside, np.ones(5), inside + 0.6 * (1 - inside))
    >>> shallow_pockets(sizes, levels, low=0.0).tolist()
    [False, False, False, True, False]
    """
    sizes = np.asarray(sizes, np.float64)
    pockets = np.zeros(sizes.shape, bool)
    with np.errstate(invalid="ignore", divide="ignore"):
        depth = (levels.wall - levels.inside) / (levels.wall - low)
    known = (sizes > 0) & np.isfinite(depth)
    if not known.any():
        return pockets
    small = known & (sizes < POCKET_SIZE * typical_size(sizes[known]))
    ordinary = known & ~small
    if not ordinary.any():
        return pockets
    return small & (depth < POCKET_DEPTH * float(np.median(depth[ordinary])))
