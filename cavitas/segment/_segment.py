"""The :func:`segment` entry point: noise, scale, selection, regions, table."""

from __future__ import annotations

import itertools
import logging
import math
import os
import time
from collections import deque
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from typing import Any, NamedTuple

import numpy as np

from .. import _checks
from .._cores import usable_cores
from .._errors import ParameterError
from ..cubical._neighbors import check_connectivity
from ..cubical._sort import engine_array
from ..cubical._tree import OUTSIDE, CavityTree
from ..io._volume import Volume
from . import _noise
from ._discovery import false_discovery_threshold, share_passing
from ._evidence import (
    SMALL_FRACTION,
    WHITE_NOISE_DIP,
    class_split,
    eligible_nodes,
    small_region_threshold,
)
from ._gap import find_empty_stretch, find_gap
from ._params import AUTO_SCALES, SegmentParams
from ._perforation import perforated_splits
from ._polarity import census, polarity_hint
from ._regions import (
    Sweep,
    basin_map,
    below_levels,
    cut_pieces,
    face_slices,
    fill_islands,
    interior_levels,
    label_counts,
    medium_at_faces,
    nested_map,
    open_to_border,
    remove_walls,
    reopen_faces,
)
from ._result import ChamberValues, EnclosureValues, Segmentation, build_table
from ._scales import Contribution, ScaleSeeds, merge, plan
from ._select import persistence_threshold, select_nodes, split_rule
from ._texture import texture_splits
from ._tree import Hierarchy, prune

__all__ = ["segment"]

#: Gaussian σ (voxels of the finest axis) of the image the basin walls are cut on.
DELINEATION_SIGMA = 0.5

log = logging.getLogger("cavitas.segment")


def segment(volume: Any, *, spacing: Any = None, params: SegmentParams | None = None,
            mask: Any = None, stage: Callable[[str], None] | None = None,
            **options: Any) -> Segmentation:
    """Segment the enclosed regions of a 2D image or 3D volume.

    Parameters
    ----------
    volume : Volume or array_like
        The image. An array takes its geometry from ``spacing``.
    spacing : sequence of float, optional
        Voxel size per axis (arrays only; a ``Volume`` carries its own).
    params : SegmentParams, optional
        All parameters at once; ``options`` override single fields.
    mask : array_like of bool, optional
        Region of interest: voxels outside it count as outside the scan, and may hold NaN
        (the workflow reads the mask file named by its options and passes it here).
    stage : callable, optional
        Called with a few words on each stage as it starts (``"smoothing scale 2 of 6"``,
        ``"regions"`` ...), for a progress display.
    **options
        Any field of :class:`SegmentParams` (``walls``, ``auto``, ``min_persistence``,
        ``top``, ``region`` ...).

    Returns
    -------
    Segmentation
        ``.labels`` (chambers, walls 0), ``.regions`` (hierarchy table), ``.diagram``,
        ``.params`` (every parameter and every value chosen automatically).

    Notes
    -----
    Steps: (1) noise level and empirical null (:mod:`cavitas.segment._noise`); (2) at each
    candidate smoothing, the image's own evidence: cavities whose inside lies in the
    image's interior class and whose wall reaches its wall class, large enough for their
    persistence (:mod:`cavitas.segment._evidence`), above the threshold of the first rule of
    :data:`THRESHOLD_RULES` that applies (the diagram's gap or an empty stretch under the
    null, :mod:`cavitas.segment._gap`; with white noise the false discovery rate,
    :mod:`cavitas.segment._discovery`; else the null times ``safety``); where the noise
    is not white, a piece that splits off a region must also stand out from the texture
    inside it (:mod:`cavitas.segment._texture`); the detection scale is the candidate
    with most such cavities (:func:`_detect`); (3)
    selection on the cavity tree of that scale, then the split rule (an inner wall must
    close at least ``split_fraction`` of the way up the local wall contrast,
    :mod:`cavitas.segment._select`), pruned into chambers and enclosures
    (:mod:`cavitas.segment._tree`); (4) regions in one pass over the sweep order
    (:mod:`cavitas.segment._regions`); (5) in basin mode, splits whose two chambers touch
    through a hole at the delineation scale are joined and the regions redone
    (:mod:`cavitas.segment._perforation`). Detection needs the scale where noise falls
    below significance; delineation the finest scale that keeps walls two voxels thick
    intact, so basin walls are cut on the image smoothed by :data:`DELINEATION_SIGMA`
    (0.5 voxel), or by the detection scale when that is finer. Measured on the bench
    scenes (sheets, foams, capsules; noise 0.1 and 0.3): σ = 0.5 gave the best median Dice
    overall among 0, 0.5, 0.75 and 1 voxel (1 voxel, or the detection scale, widens walls;
    0 leaves them ragged).

    Levels in the table and the diagram are values of the image at the detection scale
    (the input itself when no smoothing was chosen), in the input's units. Data of at most
    16 bits and float32 data are smoothed in float32 (:func:`cavitas._shared.memory.work_dtype`,
    others in float64): levels are exact for that float32 image, and within about 1e-7
    (relative) of smoothing in float64.

    Cost: one sort and one union-find pass per candidate smoothing scale (six in automatic
    mode), one labelling pass, and for basins a few linear passes; near-linear overall. A
    neighbouring scale with regions to offer (:mod:`cavitas.segment._scales`) costs one
    more detection and delineation. The noise null is looked up in a shipped table.
    Memory: about 60 bytes per voxel at the peak for uint16 input (the image is read in
    place; the smoothed copies, sweep order and ranks and the label maps are
    float32/int32; :func:`cavitas.io.estimate_memory_bytes`).

    Examples
    --------
    >>> import numpy as np
    >>> img = np.zeros((15, 15)); img[3:12, 3] = img[3:12, 11] = 1
    >>> img[3, 3:12] = img[11, 3:12] = img[3:12, 7] = 1
    >>> seg = segment(img, min_persistence=0.5, region="breach")
    >>> int(seg.labels.max()), seg.regions["own_voxels"].tolist()[:2]
    (2, [21, 21])
    >>> seg.regions["kind"].tolist()  # the medium around the frame is cut by the border
    ['chamber', 'chamber', 'cut']
    """
    started = time.perf_counter()
    params = (params or SegmentParams()).replace(**options) if options else (
        params or SegmentParams())
    vol = volume if isinstance(volume, Volume) else Volume(np.asarray(volume), spacing=spacing)
    if isinstance(volume, Volume) and spacing is not None:
        raise ParameterError("spacing= is for arrays; a Volume carries its own spacing.")
    params.check_image(vol)
    ndim = vol.ndim
    connectivity = check_connectivity(ndim, params.connectivity or 1)
    # Memory: the input is read in place (a memory map stays one); every smoothed copy is
    # in the work type (float32 for <= 16-bit data) and only one or two live at a time.
    raw = engine_array(np.asarray(vol.data), f"'{vol.name}'")
    if raw.dtype == np.bool_:
        raw = raw.view(np.uint8)
    if isinstance(mask, (str, os.PathLike)):
        raise ParameterError(f"mask must be an array; got the file name {str(mask)!r} (read "
                             "it with cavitas.read).", parameters=("mask",))
    roi = None if mask is None else np.asarray(mask, bool)
    if roi is not None and roi.shape != raw.shape:
        raise ParameterError(f"mask has shape {roi.shape}; the image has {raw.shape}.",
                             parameters=("mask",))
    if raw.dtype.kind == "f":
        raw = _fill_outside(raw, roi, vol.name, walls=params.walls)
    image = _Image(raw, 1.0 if params.walls == "bright" else -1.0,
                   _noise.work_dtype(raw.dtype), closed_border=params.keep_border,
                   statistics_mask=_statistics_mask(roi, raw.shape, params.keep_border))
    outside = None if roi is None else ~roi
    timings: dict[str, float] = {}
    tell = stage or (lambda text: None)

    tell("noise level")
    # integers: quantisation noise at least (uniform, 1 step); correlated noise or
    # texture: the null scales with the noise one wavelet level up
    levels = _noise.noise_level(raw, floor=_noise.QUANTISATION_SIGMA if np.issubdtype(
        vol.dtype, np.integer) else 0.0)
    noise = levels.effective
    # integers: the same figures as in float64, without a float64 copy of the image
    lo, hi = np.percentile(raw if raw.dtype.kind in "iu" else raw.astype(np.float64),
                           [0.5, 99.5])
    robust_range = float(hi - lo)
    spacing_arr = np.asarray(vol.spacing, float)
    white_noise = _noise.correlation_factor(levels.ratio) == 1.0
    det, tried, seeds = _detect(
        image, params, noise=noise, robust_range=robust_range, spacing=spacing_arr,
        connectivity=connectivity, roi=roi, tell=tell, white_noise=white_noise)
    sig, tree, tau = det.sigma, det.tree, det.threshold
    hint = None
    if params.automatic:
        tell("polarity check")
        hint = _polarity_check(det, image, params, noise=noise, robust_range=robust_range,
                               spacing=spacing_arr, connectivity=connectivity, roi=roi,
                               white_noise=white_noise)
    timings["detect"] = time.perf_counter() - started
    log.info("%s: noise σ %.4g, detection σ %.3g %s, persistence threshold %.4g (%s)",
             vol.name, noise, float((sig * spacing_arr).max()), vol.unit, tau,
             det.rule or "given")
    t0 = time.perf_counter()
    tell("regions")
    geometry = _Geometry(image, outside, connectivity, vol.voxel_volume, spacing_arr)
    base = _regions_at(det, params, geometry, tell).settle(image.sign, spacing_arr)
    gap, rule, texture_joined = det.gap, det.rule, det.texture_joined
    del det  # memory: the detection image and its sweep order are no longer needed
    hier, regions, chambers = base.hier, base.regions, base.chambers
    refined = None
    if params.automatic and params.smooth is None and params.region == "basin":
        refined = _refine_across_scales(base, seeds, params, geometry, tell, noise=noise,
                                        robust_range=robust_range, roi=roi,
                                        white_noise=white_noise)
    if refined is not None:
        hier, regions, chambers = refined.hier, refined.regions, refined.chambers
    timings["regions"] = time.perf_counter() - t0

    seg = build_table(vol=vol, sign=image.sign, chambers=chambers,
                      enclosures=base.enclosures, hier=hier, outside=base.outside,
                      regions=regions, tau=tau, scale=float((sig * spacing_arr).max()),
                      params=params)
    timings["total"] = time.perf_counter() - started
    chosen = {
        "noise_sigma": noise,
        "noise_pixel_sigma": levels.pixel,
        "noise_level_ratio": levels.ratio,
        "threshold": tau,
        "robust_range": robust_range,
        "smooth_sigma": float((sig * spacing_arr).max()),
        # what set the detection scale: "given" (smooth), "data" (automatic), "none"
        "scale_basis": ("given" if params.smooth is not None else
                        "data" if params.automatic else "none"),
        "delineation_sigma": float((base.fine_sigma * spacing_arr).max()),
        "scales_tried": tried,
        "gap": gap,
        "threshold_rule": rule,
        "polarity_hint": hint,
        "splits_joined": base.splits_joined,
        "texture_pieces_joined": texture_joined,
        "perforated_walls": base.perforated,
        "regions_from_other_scales": (refined.summary if refined is not None
                                      else {"split": 0, "pieces": 0, "added": 0}),
        "automatic": params.automatic,
        "connectivity": connectivity,
        "unit": vol.unit,
        "timings_s": timings,
    }
    return Segmentation.assemble(seg, volume=vol, params=params, chosen=chosen, tree=tree)


def _fill_outside(image: np.ndarray, roi: np.ndarray | None, name: str, *,
                  walls: str) -> np.ndarray:
    """``image`` with NaN and infinite values outside the ROI replaced, as ``persistence``
    accepts them there; inside the ROI (or with no ROI) they are an error.

    The replacement is the finite extreme on the regions' side (the minimum for bright
    walls): the smoothing spreads no wall from beyond the ROI into it. A copy is made only
    when there is something to replace.
    """
    finite = np.isfinite(image)
    if finite.all():
        return image
    looked_at = finite if roi is None else finite[roi]
    _checks.refuse_nonfinite(looked_at.size - np.count_nonzero(looked_at), image=f"'{name}'",
                             masked=roi is not None)
    inside = image[roi]
    fill = (inside.min() if walls == "bright" else inside.max()) if inside.size else 0
    return np.where(finite, image, fill).astype(image.dtype, copy=False)


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
    face_breach: np.ndarray | None = None  # per node: breach on the closed faces (keep_border)
    rule: str | None = None      # what set the automatic threshold (THRESHOLD_RULES)
    texture_joined: int = 0      # significant pieces kept with their region (_texture)
    seeds: ScaleSeeds | None = None  # the chambers this scale makes, as seeds

    @property
    def count(self) -> int:
        """Nodes passing every criterion."""
        return int(np.count_nonzero(self.passing))


def _node_sizes(tree: CavityTree) -> np.ndarray:
    """Voxels per node: ``cavity_sweep`` counts them (only a hand-built tree lacks them)."""
    if tree.size is None:
        raise TypeError("the cavity tree carries no node sizes")
    return tree.size


class _Image(NamedTuple):
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


def _statistics_mask(roi: np.ndarray | None, shape: tuple[int, ...],
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


def _detect(image: _Image, params: SegmentParams, *, noise: float, robust_range: float,
            spacing: np.ndarray, connectivity: int, roi: np.ndarray | None,
            tell: Callable[[str], None], white_noise: bool = False
            ) -> tuple[Detection, list[dict[str, Any]], list[ScaleSeeds]]:
    """Detection scale, its sweep and threshold: the candidate with most significant cavities;
    also what every scale tried found (for run.json), and the seeds of its chambers.

    Candidates are :data:`AUTO_SCALES` (in voxels of the finest axis, the same physical σ on
    every axis) in automatic mode, else the one given (or none). At each, the threshold is
    the strictest criterion given, the automatic one being ``safety · noise · P(σ)``
    (:mod:`cavitas.segment._noise`). Too little smoothing leaves the threshold high, too
    much erases walls; both lose cavities, so the count peaks at the useful scale. Ties go
    to the finer scale. With two or more cores, two scales are tried at a time in two
    threads. Memory: the best candidate's smoothed image and order stay, plus the one or
    two being tried (in the work type, :func:`_noise.work_dtype`).
    """
    from .. import cubical

    if params.smooth is not None:
        scales = [params.smooth / spacing]
    elif params.automatic:
        scales = [s * spacing.min() / spacing for s in AUTO_SCALES]
    else:
        scales = [np.zeros(len(spacing))]

    analysed = int(np.count_nonzero(roi)) if roi is not None else image.data.size

    def candidate(sig: np.ndarray) -> Detection:
        # the null first: its simulation (first use per shape and scale) then peaks alone
        null = (_noise.null_distribution(image.data.shape, tuple(sig), connectivity)
                if params.automatic else None)
        smoothed = image.smoothed(sig)
        order, tree = cubical.cavity_sweep(smoothed, walls="bright", connectivity=connectivity,
                                           mask=roi)
        pers = tree.persistence
        # a breach on the closed faces: the specimen as a whole, not a cavity
        face_breach = on_faces(tree.breach, smoothed.shape) if image.closed_border else None
        eligible = gap = rule = None
        auto = None
        texture_joined = 0
        if null is not None:  # automatic mode
            smoothed_noise = _noise.smoothed_noise_sigma(noise, tuple(sig))
            eligible = eligible_nodes(
                tree, smoothed, image.statistics_mask, smoothed_noise,
                breach_dip=WHITE_NOISE_DIP * smoothed_noise if white_noise else 0.0)
            if face_breach is not None:
                eligible &= ~face_breach
            rule, auto = _automatic_threshold(pers[eligible], null, noise=noise,
                                              voxels=analysed, safety=params.safety,
                                              white_noise=white_noise)
            gap = auto if rule == "gap" else None
        tau = persistence_threshold(auto=auto, absolute=params.min_persistence,
                                    relative=params.relative_persistence,
                                    robust_range=robust_range)
        passing = (pers > 0) & (pers >= tau)
        if eligible is not None:
            passing &= eligible
            if passing.any():
                area = _node_sizes(tree).astype(np.float64)
                area[OUTSIDE] = np.inf
                eligible &= pers >= small_region_threshold(area, pers, passing)
                passing &= eligible
                if not white_noise:  # texture: a split must stand out from its region's
                    texture = texture_splits(tree.parent, pers, passing)
                    texture_joined = int(np.count_nonzero(texture))
                    eligible &= ~texture
                    passing &= ~texture
        passing[OUTSIDE] = False
        kept = split_rule(tree, select_nodes(pers, tree.parent, tau, params.top,
                                             eligible=eligible),
                          params.split_fraction, face_breach)
        kept[OUTSIDE] = False
        clarity = pers[kept] / tau if tau > 0 else np.full(int(kept.sum()), np.inf)
        return Detection(sig, smoothed, order, tree, tau, gap, eligible, passing, face_breach,
                         rule, texture_joined, ScaleSeeds(sig, tree.core[kept], clarity,
                                                          _node_sizes(tree)[kept]))

    # Two scales at a time in two threads (smoothing, sort and sweep release the GIL);
    # results are taken in scale order, so the choice is the same as one after the other.
    workers = 2 if len(scales) > 1 and usable_cores() > 1 else 1
    best, tried, seeds = None, [], []
    todo = iter(scales)
    tell(f"smoothing scale 1 of {len(scales)}")
    with ThreadPoolExecutor(max_workers=workers, thread_name_prefix="cavitas-scale") as pool:
        running = deque(pool.submit(candidate, sig) for sig in itertools.islice(todo, workers))
        while running:
            result = running.popleft().result()
            tried.append({"sigma": float((result.sigma * spacing).max()),
                          "threshold": result.threshold, "count": result.count,
                          "gap": result.gap, "rule": result.rule})
            if result.seeds is not None:
                seeds.append(result.seeds)
            if best is None or result.count > best.count:
                best = result
            del result  # a losing candidate is freed before the next scale starts
            if len(tried) < len(scales):
                tell(f"smoothing scale {len(tried) + 1} of {len(scales)}")
            following = next(todo, None)
            if following is not None:
                running.append(pool.submit(candidate, following))
    assert best is not None  # at least one scale is always tried
    return best, tried, seeds


@dataclass
class Delineation:
    """The regions of one pruned tree, before the volume bounds and the final numbering."""

    labels: np.ndarray               # chambers 1..n, border-cut pieces n+1..n+n_cut, walls 0
    n_cut: int                       # border-cut pieces
    open_to_border: np.ndarray       # per chamber: no wall between it and the border
    nested: dict[int, int]           # {chamber: the chamber around it}
    level: np.ndarray                # per chamber: the level its region was cut at (walls high)
    enclosures: np.ndarray | None    # innermost enclosure per voxel (ids n+1...), if any
    outside_basin: np.ndarray        # voxels of the outside basin below its walls


class _Geometry(NamedTuple):
    """What the regions of every scale share: the image, ROI, connectivity and voxel size."""

    image: _Image
    outside: np.ndarray | None
    connectivity: int
    voxel_volume: float
    spacing: np.ndarray


@dataclass
class ScaleRegions:
    """The regions of one detection scale: its selection, pruned tree and delineation."""

    det: Detection
    sweep: Sweep
    significant: np.ndarray      # per node: passes every criterion (closed upward)
    keep: np.ndarray             # ... less the splits the split rule and holes joined
    hier: Hierarchy
    regions: Delineation
    perforated: np.ndarray       # per node: a split joined through a hole in its wall
    fine_sigma: np.ndarray       # Gaussian sigma per axis of the delineation image

    def settle(self, sign: float, spacing: np.ndarray) -> Settled:
        """What the table and the other scales need, without the per-voxel sweep."""
        nodes = self.hier.node[:self.hier.n_chambers]
        tree, n = self.det.tree, nodes.size
        chambers = ChamberValues(
            birth=tree.breach_level[nodes], death=tree.core_level[nodes],
            breach_voxel=tree.breach[nodes], core_voxel=tree.core[nodes],
            threshold=np.full(n, self.det.threshold),
            scale=np.full(n, float((self.det.sigma * spacing).max())), node=nodes)
        return Settled(self.det.sigma, self.hier, self.regions, chambers,
                       EnclosureValues.of(self.sweep, self.hier), self.sweep.outside,
                       self.fine_sigma,
                       int(np.count_nonzero(self.significant & ~self.keep)),
                       int(np.count_nonzero(self.perforated)))


@dataclass
class Settled:
    """One scale's regions and table values, its per-voxel sweep let go."""

    sigma: np.ndarray            # detection scale, Gaussian sigma per axis in voxels
    hier: Hierarchy
    regions: Delineation
    chambers: ChamberValues
    enclosures: EnclosureValues
    outside: np.ndarray          # flat: beyond the ROI
    fine_sigma: np.ndarray       # Gaussian sigma per axis of the delineation image
    splits_joined: int           # significant splits the split rule and holes joined
    perforated: int              # of those, joined through a hole in their wall


def _regions_at(det: Detection, params: SegmentParams, geometry: _Geometry,
                tell: Callable[[str], None]) -> ScaleRegions:
    """Selection, split rule, pruning and delineation on one detection scale."""
    image, outside, connectivity, voxel_volume, spacing = geometry
    tree, tau = det.tree, det.threshold
    sweep = Sweep(det.smoothed, det.order, tree, connectivity, outside)
    significant = select_nodes(tree.persistence, tree.parent, tau, params.top,
                               eligible=det.eligible)
    keep = split_rule(tree, significant, params.split_fraction, det.face_breach)
    hier = prune(tree, keep, sweep.rank, sweep.level_of_rank, tau)
    # never delineate on an image smoother than the one the regions were detected on
    fine_sigma = np.minimum(DELINEATION_SIGMA * spacing.min() / spacing, det.sigma)
    regions = _delineate(params, sweep, hier, image, fine_sigma, outside, connectivity,
                         voxel_volume)
    perforated = np.zeros(len(keep), bool)
    if params.split_fraction > 0 and params.region == "basin" and hier.n_chambers > 1:
        # Walls with a hole that the detection smoothing closed. The delineation image is
        # smoothed again rather than kept from _delineate: one filter pass costs less than
        # holding 4 more bytes per voxel through the region steps, where memory peaks.
        perforated = perforated_splits(regions.labels, image.smoothed(fine_sigma),
                                       regions.level, hier.node[:hier.n_chambers],
                                       tree.parent, keep)
    if perforated.any():
        tell("regions, joined through perforated walls")
        keep &= ~perforated
        hier = prune(tree, keep, sweep.rank, sweep.level_of_rank, tau)
        del regions
        regions = _delineate(params, sweep, hier, image, fine_sigma, outside, connectivity,
                             voxel_volume)
    return ScaleRegions(det, sweep, significant, keep, hier, regions, perforated, fine_sigma)


@dataclass
class Refined:
    """The base scale's regions with those of other scales put in (:mod:`._scales`)."""

    hier: Hierarchy
    regions: Delineation
    chambers: ChamberValues
    summary: dict[str, int]


def _refine_across_scales(base: Settled, seeds: list[ScaleSeeds],
                          params: SegmentParams, geometry: _Geometry,
                          tell: Callable[[str], None], **detect_options: Any) -> Refined | None:
    """Regions that another candidate scale separates or finds alone (:mod:`._scales`)."""
    n_ch = base.hier.n_chambers
    regions, hier = base.regions, base.hier
    # a region far smaller than the base's typical one is no region (as at every scale)
    sizes = label_counts(regions.labels, n_ch + 1)[1:]
    typical = float(np.median(sizes[sizes > 0])) if np.any(sizes > 0) else 0.0
    min_voxels = SMALL_FRACTION * typical
    plans = plan(regions.labels, n_ch, base.sigma, seeds, min_voxels)
    if not plans:
        return None
    image, spacing = geometry.image, geometry.spacing
    contributions = []
    for step in plans:
        smooth = float((step.sigma * spacing).max())
        tell(f"regions at smoothing {smooth:.3g}")
        other, _, _ = _detect(image, params.replace(smooth=smooth), spacing=spacing,
                              connectivity=geometry.connectivity, tell=lambda text: None,
                              **detect_options)
        at = _regions_at(other, params, geometry, lambda text: None).settle(image.sign, spacing)
        del other
        n_other = at.hier.n_chambers
        labels = np.where(at.regions.labels <= n_other, at.regions.labels, 0)
        contributions.append(Contribution(step, labels, at.chambers, at.regions.level))
        del at
    merged = merge(regions.labels, base.chambers, regions.level,
                   hier.parent[:n_ch], regions.enclosures, contributions,
                   min_voxels=min_voxels)
    if not any(merged.summary.values()):
        return None
    shift = merged.shift
    n_extra = shift

    def moved(ids: np.ndarray) -> np.ndarray:
        return np.where(ids > n_ch, ids + shift, ids)

    enclosures = None if regions.enclosures is None else moved(regions.enclosures)
    new_regions = Delineation(
        labels=merged.labels, n_cut=regions.n_cut,
        open_to_border=np.r_[regions.open_to_border, np.zeros(n_extra, bool)],
        nested={int(moved(np.array(k))): int(moved(np.array(v)))
                for k, v in regions.nested.items()},
        level=merged.level, enclosures=enclosures,
        outside_basin=regions.outside_basin & ~merged.added)
    none = np.full(n_extra, -1, hier.node.dtype)
    zero = np.zeros(n_extra, hier.close_rank.dtype)
    new_hier = Hierarchy(
        node=np.r_[hier.node[:n_ch], none, hier.node[n_ch:]],
        close_rank=np.r_[hier.close_rank[:n_ch], zero, hier.close_rank[n_ch:]],
        formed_rank=np.r_[hier.formed_rank[:n_ch], zero, hier.formed_rank[n_ch:]],
        parent=np.r_[merged.parent, moved(hier.parent[n_ch:])],
        n_chambers=n_ch + n_extra)
    return Refined(new_hier, new_regions, merged.chambers, merged.summary)


#: What sets the automatic threshold, in the order tried: the valley between two populations
#: above the noise null (:func:`find_gap`), an empty stretch below it
#: (:func:`find_empty_stretch`), the false discovery rate (white noise only,
#: :mod:`cavitas.segment._discovery`), else the null times the safety factor.
THRESHOLD_RULES = ("gap", "empty stretch", "false discovery rate", "noise null")


def _automatic_threshold(candidates: np.ndarray, null: _noise.NullDistribution, *,
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


def _polarity_check(det: Detection, image: _Image, params: SegmentParams, *,
                    spacing: np.ndarray, **detect_options: Any) -> str | None:
    """:func:`polarity_hint` of the detection against the other polarity at its scale."""
    other_walls = "dark" if params.walls == "bright" else "bright"
    flipped = image._replace(sign=-image.sign)
    other, _, _ = _detect(flipped, params.replace(walls=other_walls,
                                               smooth=float((det.sigma * spacing).max())),
                       spacing=spacing, tell=lambda text: None, **detect_options)
    n = int(np.prod(image.data.shape))
    return polarity_hint(census(det.tree.parent, _node_sizes(det.tree), det.passing, n),
                         census(other.tree.parent, _node_sizes(other.tree), other.passing, n),
                         other_walls, "pixels" if image.data.ndim == 2 else "voxels")


def _delineate(params: SegmentParams, sweep: Sweep, hier, image: _Image,
               fine_sigma: np.ndarray, outside: np.ndarray | None, connectivity: int,
               voxel_volume: float) -> Delineation:
    """Chamber regions (basin or breach), border-cut pieces, islands and enclosures."""
    tree = sweep.tree
    n_ch = hier.n_chambers
    ids = np.arange(1, len(hier.node) + 1)
    # Regions are components of {f < level}: plateaus at the level itself stay out.
    close_rank = sweep.rank_of_level(sweep.level_of_rank(hier.close_rank))
    enclosure_rank = close_rank[n_ch:]
    close_rank = close_rank[:n_ch]
    level_rank = close_rank
    if params.region == "breach" and params.level_fraction not in (None, 1.0):
        core_level = sweep.values[tree.core[hier.node[:n_ch]]]
        top_level = sweep.level_of_rank(close_rank)
        cut = core_level + params.level_fraction * (top_level - core_level)
        level_rank = np.minimum(sweep.rank_of_level(cut), close_rank)
    cores = tree.core[hier.node[:n_ch]]
    fine = image.smoothed(fine_sigma)
    basins = basin_map(sweep, cores, n_ch + 1)
    interior = None
    if params.region == "basin":
        # Each chamber's inside, from its breach region (its basin below its close level at
        # the detection scale; a pore in a matrix: the part of it in the interior class, see
        # wall_levels).
        interior = interior_levels(
            below_levels(basins, sweep.values.reshape(basins.shape),
                         sweep.level_of_rank(close_rank)), fine, n_ch,
            class_split(fine, image.statistics_mask).at(cores, fine.shape))
    cleared, basin_levels = remove_walls(basins, fine, n_ch + 1, connectivity, cores=cores,
                                         interior=interior)
    del fine, basins  # memory: full-size arrays are dropped as soon as they are used up
    if params.region == "basin":
        labels = np.where(cleared <= n_ch, cleared, 0)
        used_level = basin_levels[:n_ch]
    else:
        labels = nested_map(sweep, hier.node[:n_ch], level_rank, ids[:n_ch])
        used_level = sweep.level_of_rank(level_rank)

    # Border-cut: pieces of the outside basin, and chambers with no wall between them and
    # the border.
    in_outside = cleared == n_ch + 1
    del cleared
    open_cut = open_to_border(labels, in_outside, n_ch, outside)
    own = label_counts(labels, n_ch + 1)[1:]
    min_cut = max(8, int(0.1 * np.median(own))) if n_ch else 8
    if params.min_volume is not None:
        min_cut = max(min_cut, math.ceil(params.min_volume / voxel_volume))
    cut = cut_pieces(in_outside, connectivity, min_cut, beyond_roi=outside)
    cut_ids = np.flatnonzero(open_cut) + 1
    if cut_ids.size:
        lut = np.zeros(n_ch + 1, labels.dtype)
        lut[cut_ids] = np.arange(1, cut_ids.size + 1) + int(cut.max())
        cut = np.where(cut > 0, cut, lut[labels])
        labels = np.where(lut[labels] > 0, 0, labels)
    n_cut = int(cut.max())
    work = np.where(cut > 0, cut + n_ch, labels)
    out_label = n_ch + n_cut + 1
    work[in_outside & (cut == 0)] = out_label
    del cut, labels, in_outside
    work, nested = fill_islands(work, connectivity, exclude=n_ch + 1)
    outside_basin = work == out_label
    work[outside_basin] = 0

    enclosure_map = None
    if hier.n_enclosures:
        enclosure_map = nested_map(sweep, hier.node[n_ch:], enclosure_rank, ids[n_ch:])
    if image.closed_border:
        reopen_faces(work)
        reopen_faces(outside_basin)
        if enclosure_map is not None:
            reopen_faces(enclosure_map)
        open_cut |= medium_at_faces(work, n_ch)
    return Delineation(work, n_cut, open_cut, nested, used_level, enclosure_map, outside_basin)
