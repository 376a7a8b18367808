"""The :func:`segment` entry point: noise, scale, selection, regions, table."""

from __future__ import annotations

import functools
import logging
import os
import time
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from typing import Any

import numpy as np

from .. import _checks
from .._cores import usable_cores
from .._errors import ParameterError
from ..cubical._neighbors import check_connectivity
from ..cubical._sort import engine_array
from ..io._volume import Volume
from . import _noise
from ._delineate import Delineation, Geometry, Settled, regions_at
from ._detect import ScanImage, detect, polarity_check, statistics_mask
from ._evidence import SMALL_FRACTION
from ._params import SegmentParams
from ._regions import label_counts
from ._result import ChamberValues, Segmentation, build_table
from ._scales import Contribution, ScaleSeeds, merge, plan
from ._tree import Hierarchy

__all__ = ["OVERLAP_VOXELS", "segment"]

#: Images of at most this many voxels (a 512² image) run the polarity check beside their
#: regions: its detection image, sweep and tree (about 12 bytes per voxel) are then held at
#: once with the regions' arrays, at most 3 MiB more.
OVERLAP_VOXELS = 2**18

log = logging.getLogger("cavitas.segment")


def segment(volume: Any, *, spacing: Any = None, params: SegmentParams | None = None,
            mask: Any = None, stage: Callable[[str], None] | None = None,
            **options: Any) -> Segmentation:
    """Segment the enclosed regions of a 2D image or 3D volume.

    Parameters
    ----------
    volume : Volume or array_like
        The image. An array takes its geometry from ``spacing``. A Dask, Zarr or HDF5
        array is read whole: the segmentation is not computed chunk by chunk yet (the
        diagram is, :func:`cavitas.persistence`).
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
    with most such cavities (:func:`cavitas.segment._detect.detect`); (3)
    selection on the cavity tree of that scale, then the split rule (an inner wall must
    close at least ``split_fraction`` of the way up the local wall contrast,
    :mod:`cavitas.segment._select`), pruned into chambers and enclosures
    (:mod:`cavitas.segment._tree`); (4) regions in one pass over the sweep order
    (:mod:`cavitas.segment._regions`); (5) in basin mode, splits whose two chambers touch
    through a hole at the delineation scale are joined and the regions redone
    (:mod:`cavitas.segment._perforation`). Detection needs the scale where noise falls
    below significance; delineation the finest scale that keeps walls two voxels thick
    intact, so basin walls are cut on the image smoothed by
    :data:`cavitas.segment._delineate.DELINEATION_SIGMA`
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
    more detection and delineation. The noise null is looked up in a shipped table. With
    two cores, an image of at most :data:`OVERLAP_VOXELS` runs the polarity check (one more
    detection) beside its regions.
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
    image = ScanImage(raw, 1.0 if params.walls == "bright" else -1.0,
                   _noise.work_dtype(raw.dtype), closed_border=params.keep_border,
                   statistics_mask=statistics_mask(roi, raw.shape, params.keep_border))
    outside = None if roi is None else ~roi
    timings: dict[str, float] = {}
    tell = stage or (lambda text: None)

    tell("noise level")
    # integers: quantisation noise at least (uniform, 1 step); correlated noise or
    # texture: the null is that of white noise blurred as much as the two wavelet levels say
    levels = _noise.noise_level(raw, floor=_noise.QUANTISATION_SIGMA if np.issubdtype(
        vol.dtype, np.integer) else 0.0)
    noise = levels.amplitude  # what the threshold is scaled by
    # integers: the same figures as in float64, without a float64 copy of the image
    lo, hi = np.percentile(raw if raw.dtype.kind in "iu" else raw.astype(np.float64),
                           [0.5, 99.5])
    robust_range = float(hi - lo)
    spacing_arr = np.asarray(vol.spacing, float)
    det, tried, seeds = detect(image, params, noise=levels, robust_range=robust_range,
                               spacing=spacing_arr, connectivity=connectivity, roi=roi,
                               tell=tell)
    sig, tree, tau = det.sigma, det.tree, det.threshold
    check = None if not params.automatic else functools.partial(
        polarity_check, det, image, params, noise=levels, robust_range=robust_range,
        spacing=spacing_arr, connectivity=connectivity, roi=roi)
    # A small image's polarity check runs beside its regions (another detection image and
    # sweep held meanwhile, OVERLAP_VOXELS); a larger one's before them, where memory
    # peaks. Both read the detection only.
    beside = check is not None and raw.size <= OVERLAP_VOXELS and usable_cores() > 1
    hint = None
    if check is not None:
        tell("polarity check")
    if check is not None and not beside:
        hint = check()
    timings["detect"] = time.perf_counter() - started
    log.info("%s: noise σ %.4g, detection σ %.3g %s, persistence threshold %.4g (%s)",
             vol.name, noise, float((sig * spacing_arr).max()), vol.unit, tau,
             det.rule or "given")
    t0 = time.perf_counter()
    tell("regions")
    geometry = Geometry(image, outside, connectivity, vol.voxel_volume, spacing_arr)
    with ThreadPoolExecutor(max_workers=1, thread_name_prefix="cavitas-polarity") as pool:
        polarity = pool.submit(check) if beside and check is not None else None
        base = regions_at(det, params, geometry, tell).settle(image.sign, spacing_arr)
        if polarity is not None:
            hint = polarity.result()
    gap, rule, texture_joined, cell_sized = det.gap, det.rule, det.texture_joined, det.cell_sized
    del det  # memory: the detection image and its sweep order are no longer needed
    hier, regions, chambers = base.hier, base.regions, base.chambers
    refined = None
    if params.automatic and params.smooth is None and params.region == "basin":
        refined = _refine_across_scales(base, seeds, params, geometry, tell, noise=levels,
                                        robust_range=robust_range, roi=roi)
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
        "noise_correlation": levels.correlation,
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
        "cell_sized_splits": cell_sized,
        "texture_pockets": base.regions.pockets,
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
class Refined:
    """The base scale's regions with those of other scales put in (:mod:`._scales`)."""

    hier: Hierarchy
    regions: Delineation
    chambers: ChamberValues
    summary: dict[str, int]


def _refine_across_scales(base: Settled, seeds: list[ScaleSeeds],
                          params: SegmentParams, geometry: Geometry,
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
        other, _, _ = detect(image, params.replace(smooth=smooth), spacing=spacing,
                              connectivity=geometry.connectivity, tell=lambda text: None,
                              **detect_options)
        # its chambers only: the merge takes the base's enclosures
        at = regions_at(other, params, geometry, lambda text: None,
                        enclosures=False).settle(image.sign, spacing)
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
        outside_basin=regions.outside_basin & ~merged.added, pockets=regions.pockets)
    none = np.full(n_extra, -1, hier.node.dtype)
    zero = np.zeros(n_extra, hier.close_rank.dtype)
    new_hier = Hierarchy(
        node=np.r_[hier.node[:n_ch], none, hier.node[n_ch:]],
        close_rank=np.r_[hier.close_rank[:n_ch], zero, hier.close_rank[n_ch:]],
        formed_rank=np.r_[hier.formed_rank[:n_ch], zero, hier.formed_rank[n_ch:]],
        parent=np.r_[merged.parent, moved(hier.parent[n_ch:])],
        n_chambers=n_ch + n_extra)
    return Refined(new_hier, new_regions, merged.chambers, merged.summary)


