"""Detection: at each candidate smoothing, the cavities that pass every test, and the
scale with most of them (:func:`detect`; with texture, the finest nearly as good).

The tests are the image's own evidence (:mod:`cavitas.segment._evidence`), the first
threshold rule of :data:`THRESHOLD_RULES` that applies, the texture rule where the noise is
not white (:mod:`cavitas.segment._texture`) and the size rule; :func:`polarity_check`
runs the same detection with the other polarity.
"""

from __future__ import annotations

import itertools
from collections import deque
from collections.abc import Callable, Sequence
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from typing import Any, NamedTuple

import numpy as np

from .._cores import usable_cores
from ..cubical._tree import OUTSIDE, CavityTree
from . import _noise
from ._cell_sized import cell_sized_splits
from ._discovery import false_discovery_threshold, share_passing
from ._evidence import WHITE_NOISE_DIP, ClassSplit, class_split, eligible_nodes, enough_for_size
from ._gap import find_empty_stretch, find_gap
from ._params import AUTO_SCALES, SegmentParams
from ._polarity import census, polarity_hint
from ._regions import face_slices
from ._scales import ScaleSeeds
from ._select import close_upward, persistence_threshold, select_nodes, split_rule
from ._texture import texture_splits

__all__ = ["QUEUED_VOXELS", "TEXTURED_SCALE_SHARE", "THRESHOLD_RULES", "Detection", "ScanImage",
           "Swept", "chosen_scale", "close_faces", "detect", "on_faces", "polarity_check",
           "statistics_mask", "textured_reach"]


#: Where the noise is not white: the finest scale whose count of cavities passing every
#: test is at least this share of the largest count is the detection scale, among the
#: scales no wider than the noise's correlation width or one voxel (wider smoothing turns
#: texture into blobs: organelles in EM become cavities, and the count grows with the
#: scale). Measured on the EM slices of ``bench/real_scans.py`` (F as they are / a 300²
#: crop / half / double pixel density / added noise), with every scale: 0.878 / 0.721 /
#: 0.805 / 0.850 / 0.814 with the largest count (share 1), 0.896 / 0.767 / 0.830 / 0.861 /
#: 0.805 at 0.9, 0.909 / 0.809 / 0.844 / 0.869 / 0.805 at 0.8 (the embryo keeps 24 of its
#: 25 cells at 0.9 but 21 at 0.8: σ 0.5 instead of 1.5 px); with the scales limited to the
#: grain, at 0.9: 0.909 / 0.894 / 0.844 / 0.861 / 0.805 (the tuned watershed: 0.817 /
#: 0.857 / 0.790 / 0.806 / 0.779), with limits at 0.75 / 1.5 times the grain: crop 0.922 /
#: 0.835 but native 0.850 / 0.905, and the embryo 21 / 24. cells3d and the concrete are
#: unchanged by all of these. With white noise the count is a reliable guide: on the
#: invented hard sheets at noise 0.3 the same rule finds 78-94 % instead of 86-97 %, so
#: it does not apply there.
TEXTURED_SCALE_SHARE = 0.9
#: Images of at most this many voxels (a 512² image) queue every candidate scale at once:
#: a thread that finishes its scale takes the next one while the other is still at work
#: (on a busy machine one of the two often is). They keep every candidate's detection
#: (smoothed image and sweep order: 8 bytes per voxel each, at most 12 MiB for six scales),
#: so the finer scale the texture rule picks is not detected a second time. Larger images
#: start a scale only when the one before it is taken and keep the best one only.
QUEUED_VOXELS = 2**18


@dataclass
class Detection:
    """The detection scale's smoothed image, sweep, threshold and eligible nodes."""

    sigma: np.ndarray            # Gaussian σ per axis, in voxels
    smoothed: np.ndarray         # the image at that scale, walls high
    order: np.ndarray            # its cavity-sweep order
    tree: CavityTree             # its cavity tree
    threshold: float             # persistence threshold
    gap: float | None            # persistence at the diagram's gap (automatic mode), if any
    eligible: np.ndarray | None  # per node: straddles the class split (automatic mode)
    passing: np.ndarray          # per node: passes every criterion
    face_breach: np.ndarray | None  # per node: breach on the closed faces (keep_border)
    rule: str | None             # what set the automatic threshold (THRESHOLD_RULES)
    texture_joined: int          # significant pieces kept with their region (_texture)
    significant: np.ndarray      # per node: selected (closed upward)
    keep: np.ndarray             # ... less the splits the split rule joins
    seeds: ScaleSeeds            # the chambers this scale makes, as seeds
    textured: bool = False       # the noise is not white (texture, correlated noise)
    cell_sized: int = 0          # nodes promoted as cell-sized splits (_cell_sized)

    @property
    def count(self) -> int:
        """Nodes passing every criterion."""
        return int(np.count_nonzero(self.passing))


class Swept(NamedTuple):
    """One candidate scale swept: what :func:`detect` judges its cavities on.

    In memory the image, its order and tree; on the chunked route
    (:mod:`cavitas.segment._chunked_segment`) the smoothed image is a Dask array, the
    order None (never formed) and the tree merged from the chunks'.
    """

    smoothed: Any        # the image at that scale, walls high
    order: Any           # its cavity-sweep order (None on the chunked route)
    tree: CavityTree
    split: ClassSplit | None  # its two classes (automatic mode only)


def node_sizes(tree: CavityTree) -> np.ndarray:
    """Voxels per node: ``cavity_sweep`` counts them (only a hand-built tree lacks them)."""
    if tree.size is None:
        raise TypeError("the cavity tree carries no node sizes")
    return tree.size


class ScanImage(NamedTuple):
    """The input as read, its polarity and the float type it is smoothed in."""

    data: np.ndarray
    sign: float  # 1 for bright walls, -1 for dark: smoothed images have walls high
    dtype: np.dtype
    closed_border: bool = False  # keep_border: the array's faces act as a wall
    statistics_mask: np.ndarray | None = None  # voxels the class split is taken on

    def smoothed(self, sigma: np.ndarray) -> np.ndarray:
        out = _noise.smooth(self.data, tuple(sigma), dtype=self.dtype, sign=self.sign)
        if self.closed_border:
            close_faces(out)
        return out


def statistics_mask(roi: np.ndarray | None, shape: tuple[int, ...],
                     closed_border: bool) -> np.ndarray | None:
    """The voxels intensity statistics are taken on: the ROI, less the faces if closed."""
    if not closed_border:
        return roi
    inner = np.ones(shape, bool) if roi is None else roi.copy()
    for face in face_slices(inner.ndim):
        inner[face] = False
    return inner


def close_faces(image: np.ndarray) -> None:
    """Raise the outermost voxel layer of ``image`` to its maximum, in place.

    With the faces a wall, a cell cut by the border is enclosed like any other and is
    detected and delineated the same way (``keep_border``); :func:`reopen_faces` gives the
    face voxels back to the regions afterwards.

    Examples
    --------
    >>> img = np.arange(9.0).reshape(3, 3)
    >>> close_faces(img); img.tolist()
    [[8.0, 8.0, 8.0], [8.0, 4.0, 8.0], [8.0, 8.0, 8.0]]
    """
    top = image.max()
    for face in face_slices(image.ndim):
        image[face] = top


def on_faces(flat_index: np.ndarray, shape: tuple[int, ...]) -> np.ndarray:
    """Whether each flat index (-1: none) lies on a face of an array of ``shape``.

    Examples
    --------
    >>> on_faces(np.array([0, 4, 7, -1]), (3, 3)).tolist()
    [True, False, True, False]
    """
    valid = flat_index >= 0
    coords = np.unravel_index(np.where(valid, flat_index, 0), shape)
    face = np.zeros(flat_index.shape, bool)
    for c, n in zip(coords, shape, strict=True):
        face |= (c == 0) | (c == n - 1)
    return face & valid


def detect(image: ScanImage, params: SegmentParams, *, noise: _noise.NoiseLevel,
           robust_range: float, spacing: np.ndarray, connectivity: int,
           roi: np.ndarray | None, tell: Callable[[str], None],
           smoothed_at: tuple[np.ndarray, np.ndarray] | None = None,
           sweep: Callable[[np.ndarray, bool], Swept] | None = None
           ) -> tuple[Detection, list[dict[str, Any]], list[ScaleSeeds]]:
    """Detection scale, its sweep and threshold: the candidate with most significant cavities;
    also what every scale tried found (for run.json), and the seeds of its chambers.

    Candidates are :data:`AUTO_SCALES` (in voxels of the finest axis, the same physical σ on
    every axis) in automatic mode (where the noise is not white, those up to the first one
    wider than :func:`textured_reach`), else the one given (or none). At each, the threshold is
    the strictest criterion given, the automatic one being ``safety · s · P(σ')``
    (:mod:`cavitas.segment._noise`): the image's noise is white noise of amplitude ``s``
    blurred by its own correlation (:class:`_noise.NoiseLevel`), so the null at smoothing
    σ is that of white noise at both blurs combined, σ'. Too little smoothing leaves the
    threshold high, too much erases walls; both lose cavities, so the count peaks at the
    useful scale. Ties go to the finer scale. Where the noise is not white, texture that
    smoothing turns into blobs adds cavities at coarser scales: there the finest scale
    whose count reaches :data:`TEXTURED_SCALE_SHARE` of the largest is chosen (detected a
    second time when it was not kept). With two or more cores, two scales are tried
    at a time in two threads. Memory: the best candidate's smoothed image and order stay,
    plus the one or two being tried (in the work type, :func:`_noise.work_dtype`); on an
    image of at most :data:`QUEUED_VOXELS`, every scale is queued at once and all of them
    are kept.
    ``smoothed_at`` (``(sigma, image)``): the image already smoothed at one scale, taken by
    a candidate at exactly that scale instead of smoothing again. ``sweep(sigma, automatic)``:
    smooths and sweeps a candidate scale (with its class split in automatic mode) in place
    of the in-memory steps (the chunked route's, on Dask workers).
    """
    from .. import cubical

    if params.smooth is not None:
        scales = [params.smooth / spacing]
    elif params.automatic:
        scales = [s * spacing.min() / spacing for s in AUTO_SCALES]
        if not noise.white:  # texture: no scale beyond the grain's next one is ever used
            widest = textured_reach(noise.correlation)
            within = sum(1 for sig in scales if float(np.max(sig)) <= widest)
            scales = scales[:within + 1]
    else:
        scales = [np.zeros(len(spacing))]

    analysed = int(np.count_nonzero(roi)) if roi is not None else image.data.size

    def in_memory(sig: np.ndarray, automatic: bool) -> Swept:
        if smoothed_at is not None and np.array_equal(smoothed_at[0], sig):
            smoothed = smoothed_at[1]
        else:
            smoothed = image.smoothed(sig)
        order, tree = cubical.cavity_sweep(smoothed, walls="bright", connectivity=connectivity,
                                           mask=roi)
        split = class_split(smoothed, image.statistics_mask) if automatic else None
        return Swept(smoothed, order, tree, split)

    def candidate(sig: np.ndarray) -> Detection:
        # the null first: its simulation (first use per shape and scale) then peaks alone
        blurred = noise.null_sigma(tuple(sig))
        null = (_noise.null_distribution(image.data.shape, blurred, connectivity)
                if params.automatic else None)
        smoothed, order, tree, split = (sweep or in_memory)(sig, null is not None)
        pers = tree.persistence
        # a breach on the closed faces: the specimen as a whole, not a cavity
        face_breach = on_faces(tree.breach, smoothed.shape) if image.closed_border else None
        eligible = gap = rule = None
        auto = None
        texture_joined = 0
        promoted = None
        if null is not None:  # automatic mode
            smoothed_noise = _noise.smoothed_noise_sigma(noise.amplitude, blurred)
            assert split is not None  # a sweep in automatic mode gives it
            eligible = eligible_nodes(
                tree, split, smoothed.shape, smoothed_noise,
                breach_dip=WHITE_NOISE_DIP * smoothed_noise if noise.white else 0.0)
            if face_breach is not None:
                eligible &= ~face_breach
            rule, auto = automatic_threshold(pers[eligible], null, noise=noise.amplitude,
                                              voxels=analysed, safety=params.safety,
                                              white_noise=noise.white)
            gap = auto if rule == "gap" else None
        tau = persistence_threshold(auto=auto, absolute=params.min_persistence,
                                    relative=params.relative_persistence,
                                    robust_range=robust_range)
        passing = (pers > 0) & (pers >= tau)
        if eligible is not None:
            passing &= eligible
            if passing.any():
                area = node_sizes(tree).astype(np.float64)
                area[OUTSIDE] = np.inf
                # white noise: a small chamber, shallow by blur, may count by its wall
                eligible &= enough_for_size(tree, area, passing, walls_count=noise.white)
                passing &= eligible
                if not noise.white:  # texture: a split must stand out from its region's
                    texture = texture_splits(tree.parent, pers, passing)
                    texture_joined = int(np.count_nonzero(texture))
                    eligible &= ~texture
                    passing &= ~texture
                elif params.top is None:  # an oversized region: two cells whose wall dips
                    promoted = cell_sized_splits(tree.parent, pers, area, passing, eligible,
                                                 tau)
                    passing |= promoted
        passing[OUTSIDE] = False
        significant = select_nodes(pers, tree.parent, tau, params.top, eligible=eligible)
        if promoted is not None and promoted.any():
            significant = close_upward(significant | promoted, tree.parent)
        keep = split_rule(tree, significant, params.split_fraction, face_breach)
        kept = keep.copy()
        kept[OUTSIDE] = False
        clarity = pers[kept] / tau if tau > 0 else np.full(int(kept.sum()), np.inf)
        return Detection(sig, smoothed, order, tree, tau, gap, eligible, passing, face_breach,
                         rule, texture_joined, significant, keep,
                         ScaleSeeds(sig, tree.core[kept], clarity, node_sizes(tree)[kept]),
                         textured=not noise.white,
                         cell_sized=0 if promoted is None else int(np.count_nonzero(promoted)))

    # Two scales at a time in two threads (smoothing, sort and sweep release the GIL);
    # results are taken in scale order, so the choice is the same as one after the other.
    workers = 2 if len(scales) > 1 and usable_cores() > 1 else 1
    best, tried, seeds = None, [], []
    counts: list[int] = []
    todo = iter(scales)
    tell(f"smoothing scale 1 of {len(scales)}")
    small = image.data.size <= QUEUED_VOXELS
    kept: list[Detection] = []  # a small image's every candidate, for the texture rule
    queued = len(scales) if small else workers
    with ThreadPoolExecutor(max_workers=workers, thread_name_prefix="cavitas-scale") as pool:
        running = deque(pool.submit(candidate, sig) for sig in itertools.islice(todo, queued))
        while running:
            result = running.popleft().result()
            tried.append({"sigma": float((result.sigma * spacing).max()),
                          "threshold": result.threshold, "count": result.count,
                          "gap": result.gap, "rule": result.rule})
            seeds.append(result.seeds)
            counts.append(result.count)
            if best is None or result.count > best.count:
                best = result
            if small:
                kept.append(result)
            del result  # a losing candidate is freed before the next scale starts
            if len(tried) < len(scales):
                tell(f"smoothing scale {len(tried) + 1} of {len(scales)}")
            following = next(todo, None)
            if following is not None:
                running.append(pool.submit(candidate, following))
    assert best is not None  # at least one scale is always tried
    chosen = chosen_scale(counts, [float(np.max(sc)) for sc in scales], white=noise.white,
                          grain=noise.correlation)
    if not np.array_equal(scales[chosen], best.sigma):  # texture: a finer scale than the best
        del best  # memory: one detection at a time
        best = kept[chosen] if kept else candidate(scales[chosen])
    return best, tried, seeds


def chosen_scale(counts: Sequence[int], sigmas: Sequence[float], *, white: bool,
                 grain: float = 0.0) -> int:
    """Index of the detection scale among candidates (finest first) with these counts of
    cavities passing every test and these smoothing widths (voxels): the largest count
    (ties: the finer); where the noise is not ``white``, among the scales no wider than
    the texture's ``grain`` (its correlation width, voxels) or one voxel, whichever is
    wider, the finest whose count reaches :data:`TEXTURED_SCALE_SHARE` of their largest.

    Examples
    --------
    >>> counts, sigmas = [8, 19, 20, 12], [0.0, 0.5, 1.0, 1.5]
    >>> chosen_scale(counts, sigmas, white=True), chosen_scale(counts, sigmas, white=False)
    (2, 1)
    >>> chosen_scale([3, 5, 9, 14], sigmas, white=False, grain=0.7)  # none wider than 1
    2
    """
    if white:
        return int(np.argmax(counts))
    widest = textured_reach(grain)
    reach = max(1, sum(1 for sig in sigmas if sig <= widest))
    top = max(counts[:reach])
    return next(i for i, c in enumerate(counts[:reach]) if c >= TEXTURED_SCALE_SHARE * top)


def textured_reach(grain: float) -> float:
    """The widest detection scale (voxels) chosen where the noise is not white: the noise's
    correlation width ``grain`` or one voxel, whichever is wider. The next wider scale is
    still detected: regions found only there may join (:mod:`cavitas.segment._scales`).

    Examples
    --------
    >>> textured_reach(0.7), textured_reach(1.6)
    (1.0, 1.6)
    """
    return max(1.0, grain)


#: What sets the automatic threshold, in the order tried: the valley between two populations
#: above the noise null (:func:`find_gap`), an empty stretch below it
#: (:func:`find_empty_stretch`), the false discovery rate (white noise only,
#: :mod:`cavitas.segment._discovery`), else the null times the safety factor.
THRESHOLD_RULES = ("gap", "empty stretch", "false discovery rate", "noise null")


def automatic_threshold(candidates: np.ndarray, null: _noise.NullDistribution, *,
                         noise: float, voxels: int, safety: float,
                         white_noise: bool) -> tuple[str, float]:
    """The rule of :data:`THRESHOLD_RULES` that applies to ``candidates``, and its threshold."""
    floor = noise * null.largest
    top = safety * floor
    found = find_gap(candidates, floor)
    if found is not None:
        return "gap", found
    found = find_empty_stretch(candidates, floor, top)
    if found is not None:
        return "empty stretch", found
    if white_noise:
        found = false_discovery_threshold(candidates, null, noise, voxels, top,
                                          share_passing(candidates, null, noise, voxels))
        if found is not None:
            return "false discovery rate", found
    return "noise null", top


def polarity_check(det: Detection, image: ScanImage, params: SegmentParams, *,
                    spacing: np.ndarray, **detect_options: Any) -> str | None:
    """:func:`polarity_hint` of the detection against the other polarity at its scale."""
    other_walls = "dark" if params.walls == "bright" else "bright"
    flipped = image._replace(sign=-image.sign)
    # the other polarity's image is this one negated (the smoothing commutes with negation
    # exactly, _noise.smooth); closed faces are raised to each image's own maximum
    negated = None if image.closed_border else (det.sigma, np.negative(det.smoothed))
    other, _, _ = detect(flipped, params.replace(walls=other_walls,
                                               smooth=float((det.sigma * spacing).max())),
                       spacing=spacing, tell=lambda text: None, smoothed_at=negated,
                       **detect_options)
    n = int(np.prod(image.data.shape))
    return polarity_hint(census(det.tree.parent, node_sizes(det.tree), det.passing, n),
                         census(other.tree.parent, node_sizes(other.tree), other.passing, n),
                         other_walls, "pixels" if image.data.ndim == 2 else "voxels")
