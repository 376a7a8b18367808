"""The regions of one detection scale: selection, split rule, pruning and delineation.

:func:`regions_at` turns a :class:`~cavitas.segment._detect.Detection` into chambers and
enclosures (:mod:`cavitas.segment._select`, :mod:`cavitas.segment._tree`), delineates them
(:func:`delineate`: basins cut at the walls of the fine image, or breach regions;
border-cut pieces, islands, enclosures) and joins splits through perforated walls
(:mod:`cavitas.segment._perforation`); :meth:`ScaleRegions.settle` keeps what the table
needs and lets the per-voxel sweep go.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

from ._detect import Detection, ScanImage
from ._evidence import class_split
from ._params import SegmentParams
from ._perforation import perforated_splits
from ._pockets import shallow_pockets
from ._regions import (
    BasinLevels,
    FaceValues,
    Sweep,
    basin_map,
    below_levels,
    border_voxels,
    cut_pieces,
    fill_islands,
    interior_levels,
    label_counts,
    medium_at_faces,
    nested_map,
    open_to_border,
    remove_walls,
    reopen_faces,
)
from ._result import ChamberValues, EnclosureValues
from ._tree import Hierarchy, prune

__all__ = ["DELINEATION_SIGMA", "Delineation", "Geometry", "ScaleRegions", "Settled",
           "delineate", "regions_at"]

#: Gaussian σ (voxels of the finest axis) of the image the basin walls are cut on.
DELINEATION_SIGMA = 0.5


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
    pockets: int = 0                 # chambers given back to the walls (_pockets)


class Geometry(NamedTuple):
    """What the regions of every scale share: the image, ROI, connectivity and voxel size."""

    image: ScanImage
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


def regions_at(det: Detection, params: SegmentParams, geometry: Geometry,
                tell: Callable[[str], None], *, enclosures: bool = True) -> ScaleRegions:
    """Selection, split rule, pruning and delineation on one detection scale
    (``enclosures=False``: without the enclosures' label map, see :func:`delineate`)."""
    image, outside, connectivity, voxel_volume, spacing = geometry
    tree, tau = det.tree, det.threshold
    sweep = Sweep(det.smoothed, det.order, tree, connectivity, outside)
    significant, keep = det.significant, det.keep.copy()  # keep loses perforated splits
    hier = prune(tree, keep, sweep.rank, sweep.level_of_rank, tau)
    # never delineate on an image smoother than the one the regions were detected on
    fine_sigma = np.minimum(DELINEATION_SIGMA * spacing.min() / spacing, det.sigma)
    regions = delineate(params, sweep, hier, image, fine_sigma, outside, connectivity,
                         voxel_volume, det.textured, enclosures=enclosures)
    perforated = np.zeros(len(keep), bool)
    if params.split_fraction > 0 and params.region == "basin" and hier.n_chambers > 1:
        # Walls with a hole that the detection smoothing closed. The delineation image is
        # smoothed again rather than kept from delineate: one filter pass costs less than
        # holding 4 more bytes per voxel through the region steps, where memory peaks.
        perforated = perforated_splits(regions.labels, image.smoothed(fine_sigma),
                                       regions.level, hier.node[:hier.n_chambers],
                                       tree.parent, keep)
    if perforated.any():
        tell("regions, joined through perforated walls")
        keep &= ~perforated
        hier = prune(tree, keep, sweep.rank, sweep.level_of_rank, tau)
        del regions
        regions = delineate(params, sweep, hier, image, fine_sigma, outside, connectivity,
                             voxel_volume, det.textured, enclosures=enclosures)
    return ScaleRegions(det, sweep, significant, keep, hier, regions, perforated, fine_sigma)


def delineate(params: SegmentParams, sweep: Sweep, hier: Hierarchy, image: ScanImage,
               fine_sigma: np.ndarray, outside: np.ndarray | None, connectivity: int,
               voxel_volume: float, textured: bool = False, *,
               enclosures: bool = True) -> Delineation:
    """Chamber regions (basin, breach or component), border-cut pieces, islands and
    enclosures.

    ``textured`` (the noise is not white): small shallow chambers are texture pockets and
    go back to the walls (:mod:`cavitas.segment._pockets`). ``enclosures=False`` leaves the
    enclosures' label map out (``None``): a pass over the sweep that nothing else depends
    on, skipped where only the chambers are wanted.
    """
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
    if params.region == "component":
        return _components(sweep, hier, close_rank, enclosure_rank, ids, image.closed_border,
                           enclosures=enclosures)
    cores = tree.core[hier.node[:n_ch]]
    fine = image.smoothed(fine_sigma)
    basins = basin_map(sweep, cores, n_ch + 1)
    interior = split = None
    n_pockets = 0
    if params.region == "basin":
        # Each chamber's inside, from its breach region (its basin below its close level at
        # the detection scale; a pore in a matrix: the part of it in the interior class, see
        # wall_levels).
        split = class_split(fine, image.statistics_mask)
        interior = interior_levels(
            below_levels(basins, sweep.values.reshape(basins.shape),
                         sweep.level_of_rank(close_rank)), fine, n_ch,
            split.at(cores, fine.shape))
    cleared, basin_levels = remove_walls(basins, fine, n_ch + 1, connectivity, cores=cores,
                                         interior=interior)
    faces = None
    if params.region == "basin":  # the levels are at this scale: the border judged by them
        at_border = border_voxels(fine.shape, outside)
        faces = FaceValues(at_border, fine.ravel()[at_border], basins.ravel()[at_border])
    del fine, basins  # memory: full-size arrays are dropped as soon as they are used up
    if params.region == "basin":
        labels = np.where(cleared <= n_ch, cleared, 0)
        used_level = basin_levels.level[:n_ch]
        if textured and split is not None and n_ch:  # texture pockets go back to the walls
            own = label_counts(labels, n_ch + 1)[1:]
            pockets = shallow_pockets(own, BasinLevels(basin_levels.inside[:n_ch],
                                                       basin_levels.wall[:n_ch],
                                                       used_level), split.low)
            if pockets.any():
                labels[np.r_[False, pockets][labels]] = 0  # a lookup, not a search
                n_pockets = int(np.count_nonzero(pockets))
    else:
        labels = nested_map(sweep, hier.node[:n_ch], level_rank, ids[:n_ch])
        used_level = sweep.level_of_rank(level_rank)

    # Border-cut: pieces of the outside basin, and chambers with no wall between them and
    # the border.
    in_outside = cleared == n_ch + 1
    del cleared
    open_cut = open_to_border(labels, in_outside, n_ch, outside, faces, used_level)
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
    if hier.n_enclosures and enclosures:
        enclosure_map = nested_map(sweep, hier.node[n_ch:], enclosure_rank, ids[n_ch:])
    if image.closed_border:
        reopen_faces(work)
        reopen_faces(outside_basin)
        if enclosure_map is not None:
            reopen_faces(enclosure_map)
        open_cut |= medium_at_faces(work, n_ch)
    return Delineation(work, n_cut, open_cut, nested, used_level, enclosure_map, outside_basin,
                       n_pockets)


def _components(sweep: Sweep, hier: Hierarchy, close_rank: np.ndarray,
                enclosure_rank: np.ndarray, ids: np.ndarray, closed_border: bool, *,
                enclosures: bool) -> Delineation:
    """``region="component"``: each chamber is its breach region as defined (the component
    of ``{f < level}`` holding its core), no border-cut piece, no island filled; the
    enclosures as in :func:`delineate`. The chunked route computes exactly this
    (:mod:`cavitas.segment._chunked_segment`)."""
    n_ch = hier.n_chambers
    labels = nested_map(sweep, hier.node[:n_ch], close_rank, ids[:n_ch])
    enclosure_map = None
    if hier.n_enclosures and enclosures:
        enclosure_map = nested_map(sweep, hier.node[n_ch:], enclosure_rank, ids[n_ch:])
    open_cut = np.zeros(n_ch, bool)
    if closed_border:
        reopen_faces(labels)
        if enclosure_map is not None:
            reopen_faces(enclosure_map)
        open_cut |= medium_at_faces(labels, n_ch)
    return Delineation(labels, 0, open_cut, {}, sweep.level_of_rank(close_rank), enclosure_map,
                       np.zeros(labels.shape, bool))
