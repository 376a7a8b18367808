"""The image's own evidence for a cavity: its wall and its inside against two classes.

A white-noise null (:mod:`cavitas.segment._noise`) says whether a cavity could be noise of
the measured amplitude. Real scans hold more than noise: texture inside cells (vesicles,
mitochondria), a specimen in an empty surround, a material whose grains enclose pockets of
the matrix. There, many cavities pass the null but are not what a user calls a region. The
test here asks the image itself: split the smoothed intensities into two classes (Otsu's
threshold ``T``, Otsu 1979: the split that maximises the between-class variance), the
*wall* class above ``T`` and the *interior* class below it (polarity applied: walls high).
A cavity is a region candidate only when its wall reaches the wall class and its inside
lies in the interior class::

    breach_level >= low + WALL_REACH (T - low)   and   core_level < T

* Noise "walls" around noise "cavities" in an empty surround stay far below ``T``.
* Texture pockets inside a cell are closed by texture, mostly below ``T``.
* Pockets of a bright matrix between brighter grains have their inside above ``T``.

Uneven illumination moves both classes: ``T`` is also computed per block (4 per axis) and
interpolated between blocks, where a block shows both classes clearly; a block that does
not (an empty surround, one material only) takes the whole image's. The inside is judged
against the local threshold at the core, the wall against :data:`WALL_REACH` of the way
from the lower class up to the lower of the local one at the breach and the whole
image's (the breach is the weakest point of the wall: a stain that fades somewhere must
not lose the cell). Each threshold comes from at most :data:`_SAMPLE`
voxels at the detection scale, inside the ROI (a regular subsample keeps the histogram).

A second piece of evidence is size (:func:`small_region_threshold`): a cavity far
smaller than the typical significant one must stand out as much as typical ones do, or,
where the noise is white, have a wall as high as its neighbours' walls
(:func:`walls_like_neighbours`: the blur raises a small chamber's inside, not its wall).

Reference
---------
Otsu, N. (1979). A threshold selection method from gray-level histograms. IEEE Trans.
Syst. Man Cybern. 9(1), 62-66. doi:10.1109/TSMC.1979.4310076
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from scipy import ndimage as ndi

from ._two_class import otsu_split

__all__ = ["MIN_CLASS_SEPARATION", "WALL_REACH", "WHITE_NOISE_DIP", "ClassSplit", "class_split",
           "eligible_nodes", "sample_step", "small_region_threshold",
           "split_blocks", "split_of_samples", "straddles", "typical_size", "enough_for_size",
           "walls_like_neighbours"]

#: Largest number of voxels a two-class threshold is computed from.
_SAMPLE = 1 << 18
#: Blocks per axis of the local thresholds, and their smallest side in voxels.
_BLOCKS = 4
_BLOCK_MIN = 24
#: A block has its own threshold when its two class medians lie at least this fraction of
#: the whole image's apart; otherwise (an empty surround, one material only) the whole
#: image's threshold applies there.
_MIN_SEPARATION = 0.25
#: The two classes must lie at least this many (smoothed) noise standard deviations apart;
#: white noise alone splits into classes about 1.6 apart (the medians of the two halves of a
#: normal law, ±0.674 σ, plus sampling spread).
MIN_CLASS_SEPARATION = 3.0
#: A cavity's breach (the weakest point of its wall) must reach this fraction of the way
#: from the lower class median up to the two-class threshold. Measured on the real scans of
#: ``bench/real_scans.py``: 1 misses a membrane-stained cell whose membrane fades at one
#: point (breach 0.86 of the way); 0.75 finds it; 0.5 lets texture pockets in the EM slices
#: through (F 0.68 / 0.62 / 0.50 at 1 / 0.75 / 0.5); the embryo's empty surround stays
#: empty at all three.
WALL_REACH = 0.75
#: With white noise the breach, the lowest point of a wall, is the least of many noisy
#: values: it may lie this many (smoothed) noise standard deviations below the wall's bar.
#: Measured on the invented hard sheets of ``bench/segment_accuracy.py`` (400 cells of
#: 10-16 pixels, 2-pixel walls, a 0.35-1 gain) at noise 0.3 of the contrast: 83.3 % /
#: 86.2 % found (bright / dark walls, spurious 7.0 % / 6.7 %) without it, 92.1 % / 90.9 %
#: (5.4 % / 4.2 %) at 1, 90.6 % / 89.3 % at 2; at noise 0.18, 99.4-100 % at 0 and
#: 99.7 % at 1. Correlated noise and texture (every real scan of ``bench/real_scans.py``)
#: get no allowance: there the dip is texture, and pockets would pass.
WHITE_NOISE_DIP = 1.0
#: Regions smaller than this fraction of the typical significant region need more evidence.
SMALL_FRACTION = 1 / 16
#: ... and at least this fraction of the typical region's persistence. Measured (median of
#: the ordinary regions = 1): pockets in mitochondria of the EM slices of
#: ``bench/real_scans.py`` mostly below 0.7 (F 0.54 / 0.68 / 0.76 at 0.6 / 0.7 / 0.8);
#: capsules of 35-65 voxels with 2.5-voxel walls (``cavitas.scenes``) 0.55-0.85, so some
#: of them are lost at noise 0.2-0.3 of the contrast.
SMALL_CONTRAST = 0.7
#: ... or, with white noise, a wall this high on the scale from its neighbours' inside (0)
#: to their wall (1) (:func:`walls_like_neighbours`). Measured on the invented scenes of
#: ``bench/segment_accuracy.py``: the small nested capsules of 35-145 voxels missed by the
#: persistence bar stand at 0.91-1.27 (seeds 0-6, noise 0.1-0.3, both polarities); the only
#: other small nodes above 0.7 on the hard sheets (seeds 0-3) were a noise pit and a
#: piece of a cell, at 0.84 and 0.74. Texture (every real scan of ``bench/real_scans.py``)
#: gets no such route: there small pockets closed by membrane-like texture pass it (EM F
#: 0.909 -> 0.890, 12 more small regions on the cells3d slice).
SMALL_WALL_SHARE = 0.9
#: ... and then half the persistence :data:`SMALL_CONTRAST` asks: those capsules stand at
#: 0.48-0.70 of the ordinary median; a one-voxel pit in a foam wall (noise 0.3, a wall as
#: high as its neighbours' around it) at 0.14.
SMALL_WALLED_CONTRAST = 0.35
#: Ordinary candidates a small one is compared with (:func:`walls_like_neighbours`).
NEIGHBOURS = 3


@dataclass(frozen=True)
class ClassSplit:
    """Two-class thresholds over the image: a coarse grid of blocks, and the whole image.

    ``grid`` holds one threshold per block (the block's own where the block shows both
    classes, the whole image's where it does not); :meth:`at` interpolates it linearly.
    """

    grid: np.ndarray
    block: tuple[int, ...]
    whole: float
    low: float   # the whole image's lower class median
    high: float  # the whole image's upper class median

    @property
    def separation(self) -> float:
        """Distance between the whole image's two class medians."""
        return self.high - self.low

    def at(self, flat_index: np.ndarray, shape: tuple[int, ...]) -> np.ndarray:
        """Thresholds at the given voxels (flat indices into an array of ``shape``)."""
        if self.grid.size == 1:
            return np.full(np.shape(flat_index), self.whole)
        coords = np.unravel_index(np.asarray(flat_index, np.int64), shape)
        pos = [(c + 0.5) / b - 0.5 for c, b in zip(coords, self.block, strict=True)]
        return ndi.map_coordinates(self.grid, pos, order=1, mode="nearest")


def class_split(values: np.ndarray, roi: np.ndarray | None = None) -> ClassSplit:
    """Otsu thresholds of the whole image and of each block of it (see the module notes).

    Examples
    --------
    >>> img = np.zeros((64, 64)); img[::8] = 1.0
    >>> split = class_split(img)
    >>> 0 < split.whole < 1
    True
    """
    return split_of_samples(values.shape, lambda part: _subsample(
        values[part], None if roi is None else roi[part]))


def split_blocks(shape: tuple[int, ...]) -> tuple[tuple[int, ...], tuple[int, ...]]:
    """The blocks' side per axis and their count per axis, for an image of ``shape``.

    Examples
    --------
    >>> split_blocks((64, 200))
    ((24, 50), (3, 4))
    """
    block = tuple(max(_BLOCK_MIN, -(-n // _BLOCKS)) for n in shape)
    return block, tuple(-(-n // b) for n, b in zip(shape, block, strict=True))


def sample_step(count: int) -> int:
    """Every how many voxels (of ``count``, in C order) the regular subsample takes one.

    Examples
    --------
    >>> sample_step(1000), sample_step(3 * 2**18 + 5)
    (1, 3)
    """
    return max(1, count // _SAMPLE)


def split_of_samples(shape: tuple[int, ...],
                     sample_of: Callable[[tuple[slice, ...]], np.ndarray]) -> ClassSplit:
    """:func:`class_split` of an image of ``shape`` from the regular subsamples of its parts
    (``sample_of``: of the whole image, and of a block given as its slices), in any
    order (the thresholds and medians do not depend on it). The chunked route gathers the
    subsamples chunk by chunk (:mod:`cavitas.segment._chunked_split`)."""
    whole, low, high = _otsu(sample_of(tuple(slice(None) for _ in shape)))
    block, counts = split_blocks(shape)
    grid = np.full(counts, whole)
    if math.prod(counts) > 1 and high > low:
        for idx in np.ndindex(*counts):
            part = tuple(slice(i * b, (i + 1) * b) for i, b in zip(idx, block, strict=True))
            t, lo, hi = _otsu(sample_of(part))
            if hi - lo >= _MIN_SEPARATION * (high - low):
                grid[idx] = t
    return ClassSplit(grid, block, whole, low, high)


def _subsample(values: np.ndarray, roi: np.ndarray | None) -> np.ndarray:
    """A regular subsample of at most about :data:`_SAMPLE` voxels inside the ROI."""
    flat = values.ravel()
    if roi is not None:
        flat = flat[roi.ravel()]
    return flat[::sample_step(flat.size)]


def _otsu(sample: np.ndarray) -> tuple[float, float, float]:
    """Otsu's threshold and the two class medians of a subsample (skimage's
    ``threshold_otsu`` with 1024 bins and ``np.median`` of each class, computed in a few
    passes by :func:`cavitas.segment._two_class.otsu_split`)."""
    if sample.size == 0:
        return 0.0, 0.0, 0.0
    if sample.min() == sample.max():
        v = float(sample[0])
        return v, v, v
    return otsu_split(sample)


def eligible_nodes(tree, split: ClassSplit, shape: tuple[int, ...], noise: float,
                   breach_dip: float = 0.0) -> np.ndarray:
    """Per node of ``tree``: its inside in the interior class and its wall in the wall class,
    by the :class:`ClassSplit` of the smoothed image (of ``shape``, :func:`class_split`).

    False for the outside (node 0), and for every node when the two classes lie less than
    :data:`MIN_CLASS_SEPARATION` times ``noise`` (the smoothed image's noise level) apart:
    the image shows no structure at this scale. The inside is judged against the local
    two-class threshold at the core; the wall against :data:`WALL_REACH` of the way from
    the lower class up to the lower of the local threshold at the breach and the whole
    image's, so that a dim corner (uneven illumination) keeps its cells while an empty
    surround, which has no local threshold of its own, is judged by the whole image.
    ``breach_dip`` lowers the wall's bar (with white noise, :data:`WHITE_NOISE_DIP`).
    """
    nodes = np.arange(1, tree.n_nodes)
    eligible = np.zeros(tree.n_nodes, bool)
    if split.separation < MIN_CLASS_SEPARATION * noise:
        return eligible
    wall_threshold = np.minimum(split.whole, split.at(tree.breach[nodes], shape))
    wall_threshold = split.low + WALL_REACH * (wall_threshold - split.low) - breach_dip
    eligible[nodes] = straddles(tree.core_level[nodes], tree.breach_level[nodes],
                                split.at(tree.core[nodes], shape), wall_threshold)
    return eligible


def straddles(core_level: np.ndarray, breach_level: np.ndarray,
              core_threshold: np.ndarray | float,
              breach_threshold: np.ndarray | float) -> np.ndarray:
    """Nodes whose inside lies below its threshold and whose wall reaches its own.

    Examples
    --------
    >>> straddles(np.array([0.0, 0.6, 0.1]), np.array([1.0, 0.9, 0.3]), 0.5, 0.5).tolist()
    [True, False, False]
    """
    with np.errstate(invalid="ignore"):
        return (core_level < core_threshold) & (breach_level >= breach_threshold)


def typical_size(sizes: np.ndarray) -> float:
    """The area-weighted median of ``sizes``: the size of the region that holds the median
    voxel, so a crowd of tiny pockets does not make itself typical (NaN for none).

    Examples
    --------
    >>> typical_size(np.array([10.0, 12.0, 1000.0, 1200.0]))
    1200.0
    """
    ordered = np.sort(np.asarray(sizes, np.float64))
    if ordered.size == 0:
        return float("nan")
    weight = np.cumsum(ordered)
    return float(ordered[np.searchsorted(weight, 0.5 * weight[-1])])


def small_region_threshold(area: np.ndarray, persistence: np.ndarray,
                           candidates: np.ndarray) -> np.ndarray:
    """The persistence each node needs for its size (0 for regions of ordinary size).

    A region smaller than :data:`SMALL_FRACTION` of the *typical* candidate region (the
    area-weighted median: the size of the region that holds the median candidate voxel, so
    a crowd of tiny texture pockets does not make itself typical) must stand out as much
    as typical regions do: at least :data:`SMALL_CONTRAST` of the median persistence of the
    candidates of ordinary size. Texture pockets are small and closed by weaker walls than
    the cells around them; a small real cell or pore has walls of the same stain.

    Examples
    --------
    >>> area = np.array([np.inf, 1000.0, 1200.0, 10.0, 12.0])
    >>> pers = np.array([np.inf, 4.0, 6.0, 4.5, 1.0])
    >>> small_region_threshold(area, pers, np.ones(5, bool)).tolist()
    [0.0, 0.0, 0.0, 3.5, 3.5]
    """
    need = np.zeros(area.shape)
    small, ordinary = _size_classes(area, candidates)
    if ordinary.any():
        need[small] = SMALL_CONTRAST * float(np.median(persistence[ordinary]))
    return need


def _size_classes(area: np.ndarray, candidates: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Every node smaller than :data:`SMALL_FRACTION` of the typical candidate region, and
    the candidates of ordinary size (both empty without a candidate of finite size)."""
    finite = candidates & np.isfinite(area)
    if not finite.any():
        return np.zeros(area.shape, bool), finite
    small = area < SMALL_FRACTION * typical_size(area[finite])
    return small, finite & ~small


def enough_for_size(tree, area: np.ndarray, candidates: np.ndarray, *,
                    walls_count: bool) -> np.ndarray:
    """Nodes with evidence enough for their size: ordinary ones, and small ones that stand
    out as ordinary ones do (:func:`small_region_threshold`) or, where ``walls_count`` (white
    noise), whose wall stands as high as their neighbours' (:func:`walls_like_neighbours`)
    with :data:`SMALL_WALLED_CONTRAST` of the ordinary persistence.

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> tree = SimpleNamespace(shape=(1, 40), core=np.array([-1, 2, 12, 22, 32, 36]),
    ...     core_level=np.array([-np.inf, 0.0, 0.0, 0.0, 0.6, 0.9]),
    ...     breach_level=np.array([np.nan, 1.0, 1.0, 1.0, 0.95, 0.95]))
    >>> tree.persistence = tree.breach_level - tree.core_level
    >>> area = np.array([np.inf, 300.0, 300.0, 300.0, 5.0, 5.0])
    >>> enough_for_size(tree, area, np.ones(6, bool), walls_count=True)[1:].tolist()
    [True, True, True, True, False]
    >>> enough_for_size(tree, area, np.ones(6, bool), walls_count=False)[1:].tolist()
    [True, True, True, False, False]
    """
    persistence = tree.persistence
    need = small_region_threshold(area, persistence, candidates)
    enough = persistence >= need
    if walls_count:
        relief = (SMALL_WALLED_CONTRAST / SMALL_CONTRAST) * need
        enough |= (persistence >= relief) & walls_like_neighbours(tree, area, candidates)
    return enough


def walls_like_neighbours(tree, area: np.ndarray, candidates: np.ndarray) -> np.ndarray:
    """Small candidates whose wall stands as high as the walls of the regions around them.

    A small chamber (below :data:`SMALL_FRACTION` of the typical candidate region) may be
    shallow for a reason other than weak evidence: the blur of the optics raises its small
    inside toward its wall, so its persistence stays below what :func:`small_region_threshold`
    asks although its wall is of the same stain as its neighbours'. Such a node counts when
    its breach rises above the inside of its :data:`NEIGHBOURS` nearest candidates of
    ordinary size (the median of their core levels) at least :data:`SMALL_WALL_SHARE` of the
    way up to their walls (the median of their breach levels): the comparison is local, so
    uneven illumination moves both sides alike. A texture pocket or a piece of a cell cut
    off by noise has a lower wall than the cells beside it.

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> tree = SimpleNamespace(shape=(1, 40), core=np.array([-1, 2, 12, 22, 32, 36]),
    ...     core_level=np.array([-np.inf, 0.0, 0.0, 0.0, 0.1, 0.1]),
    ...     breach_level=np.array([np.nan, 1.0, 1.0, 1.0, 0.95, 0.5]))
    >>> area = np.array([np.inf, 300.0, 300.0, 300.0, 5.0, 5.0])
    >>> walls_like_neighbours(tree, area, np.ones(6, bool)).tolist()
    [False, False, False, False, True, False]
    """
    from scipy.spatial import cKDTree

    stands = np.zeros(area.shape, bool)
    small, ordinary_nodes = _size_classes(area, candidates)
    ordinary, small_ids = np.flatnonzero(ordinary_nodes), np.flatnonzero(small & candidates)
    if ordinary.size == 0 or small_ids.size == 0:
        return stands
    count = min(NEIGHBOURS, ordinary.size)
    _, nearest = cKDTree(np.column_stack(np.unravel_index(tree.core[ordinary], tree.shape))
                         ).query(np.column_stack(np.unravel_index(tree.core[small_ids],
                                                                  tree.shape)), k=count)
    nearest = ordinary[np.asarray(nearest).reshape(small_ids.size, count)]
    inside = np.median(tree.core_level[nearest], axis=1)
    wall = np.median(tree.breach_level[nearest], axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        share = (tree.breach_level[small_ids] - inside) / (wall - inside)
    stands[small_ids] = share >= SMALL_WALL_SHARE
    return stands
