"""One chunked volume segmented chunk by chunk on Dask (:func:`segment_in_chunks`).

The modes wired so far: a persistence threshold given by hand (absolute, or relative to the
robust range, :func:`._chunked_statistics.percentiles_in_chunks`), the smoothing given or
none; or the automatic threshold, at the smoothing scale given or chosen as ``segment``
chooses it, without a region of interest; and ``region="component"`` (each chamber the
component below its level that holds its core; no border-cut check and no island filling,
which flood or fill over the whole volume).
Its steps are those of :func:`cavitas.segment.segment` in that mode, each from a block
tested equal to its whole-volume step:

1. NaN and infinite values outside the mask replaced, inside it refused
   (:func:`._chunked_finite.fill_outside_in_chunks`, ``segment``'s ``_fill_outside``);
   smoothing with halos (:func:`._chunked_smooth.smooth_in_chunks`), stored once in a
   Zarr store when the caller gives one (``smoothed_store``), so that the later sweeps
   read it instead of smoothing again;
2. the cavity tree (:func:`cavitas.cubical._chunked_tree.tree_chunks_on_dask`), of every
   scale the detection tries;
3. the threshold, selection (:func:`._select.select_nodes`, ``top``) and the split rule on
   the tree, on the client: :func:`._detect.detect` itself (the scale given, or its
   automatic choice among several), given each scale's merged tree, the noise level
   (:func:`._chunked_statistics.noise_level_in_chunks`) and, in automatic mode, the
   two-class split (:func:`._chunked_split.class_split_in_chunks`) in place of the
   in-memory sweep and statistics; in automatic mode also :func:`._detect.polarity_check`,
   the same detection of the other polarity (one more chunked tree, of the image smoothed
   with the other sign);
4. pruning from the tree alone (:func:`._tree_order.prune_by_levels`);
5. chamber and enclosure labels per chunk (:func:`._chunked_regions.chunked_nested_map`),
   counted per chunk; the volume bounds, numbering and table from those counts
   (:func:`._result.number_regions`); the final labels as a Dask array through the
   numbering's lookup table, to be written chunk by chunk.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from .._errors import ParameterError
from .._table import Table
from ..cubical._neighbors import check_connectivity
from ..cubical._tree import CavityTree
from ..io._staging import write_failure
from . import _noise
from ._chunked_finite import fill_outside_in_chunks
from ._chunked_regions import chunked_nested_map
from ._chunked_smooth import smooth_in_chunks
from ._chunked_split import class_split_in_chunks
from ._chunked_statistics import noise_level_in_chunks, percentiles_in_chunks
from ._detect import ScanImage, Swept, detect, polarity_check
from ._params import SegmentParams
from ._regions import face_slices
from ._result import ChamberValues, EnclosureValues, RegionCounts, number_regions
from ._tree_order import prune_by_levels

__all__ = ["ChunkedSegmentation", "ThresholdChoice", "segment_in_chunks"]


@dataclass(frozen=True)
class ThresholdChoice:
    """What set the persistence threshold, as ``segment()`` records it in run.json."""

    rule: str | None                    # of _detect.THRESHOLD_RULES; None: set by hand
    gap: float | None                   # persistence at the diagram's gap, if that rule
    scales_tried: list[dict[str, Any]]  # every scale tried: its sigma, threshold, count...
    splits_joined: int                  # significant splits the split rule joined
    texture_joined: int                 # significant pieces kept with their region
    cell_sized: int                     # nodes promoted as cell-sized splits
    polarity_hint: str | None           # the other polarity looks clearer (automatic mode)


@dataclass(frozen=True)
class ChunkedSegmentation:
    """The labels (Dask arrays, chunked like the input, not yet computed) and the table."""

    labels: Any                  # chambers 1..K, 0 elsewhere
    enclosure_labels: Any        # innermost enclosure per voxel, or None (no enclosure)
    table: Table
    threshold: float
    robust_range: float | None   # 0.5th to 99.5th percentile (relative threshold only)
    smooth_sigma: float          # physical units
    tree: CavityTree             # of the smoothed image (walls high)
    connectivity: int
    chamber_nodes: np.ndarray    # cavity-tree node of each chamber row
    noise: _noise.NoiseLevel     # as segment() estimates it (noise_sigma: its amplitude)
    choice: ThresholdChoice


def segment_in_chunks(image: Any, *, params: SegmentParams, spacing: np.ndarray, unit: str,
                      mask: Any = None, name: str = "image",
                      smoothed_store: str | os.PathLike | None = None) -> ChunkedSegmentation:
    """:func:`cavitas.segment.segment` of a Dask array in component mode.

    Parameters
    ----------
    image : dask.array.Array
        The 2D or 3D image, in its own chunks (never read whole).
    params : SegmentParams
        ``region="component"``, no ``level_fraction`` or ``keep_border`` (the command
        line refuses the others before calling this). In automatic mode (no
        ``min_persistence`` or ``relative_persistence``) without a ``mask`` only; with no
        ``smooth``, the scale is chosen among the automatic ones as ``segment`` chooses it
        (every candidate scale's tree merged from the chunks).
    spacing, unit
        The voxel size per axis and its unit.
    mask : dask.array.Array of bool, optional
        Region of interest, in any chunks. NaN and infinite values outside it are replaced
        as ``segment`` replaces them (:func:`._chunked_finite.fill_outside_in_chunks`).
    name : str
        The image's file, as messages name it.
    smoothed_store : path, optional
        Where (a Zarr store not yet there, in a folder every worker can write) the smoothed
        image is written once, chunk by chunk, for every later pass to read instead of
        smoothing each chunk again (the given scale's before the tree; with the scale
        chosen automatically, the chosen one's after the choice). It must stay until the
        returned label maps are written; the caller removes it then. Not made when nothing
        is smoothed or the chunks are irregular (Zarr's chunks are regular). None: every
        pass smooths again.

    Returns
    -------
    ChunkedSegmentation
        ``labels`` equal, voxel for voxel, to ``segment(...).labels`` of the image in
        memory with the same parameters, and ``table`` row for row its ``regions``. Computing
        the table sweeps every chunk three times (tree, sizes, counts); each label map
        written sweeps it once more. Each sweep smooths the chunk again unless the smoothed
        image is stored (``smoothed_store``).

    Examples
    --------
    >>> import dask.array as da
    >>> img = np.zeros((15, 15)); img[3:12, 3] = img[3:12, 11] = 1
    >>> img[3, 3:12] = img[11, 3:12] = img[3:12, 7] = 1
    >>> params = SegmentParams(min_persistence=0.5, region="component")
    >>> seg = segment_in_chunks(da.from_array(img, chunks=4), params=params,
    ...                         spacing=np.ones(2), unit="voxel")
    >>> int(seg.labels.max().compute()), seg.table["own_voxels"].tolist()
    (2, [21, 21])
    """
    import dask
    import dask.array as da

    if params.automatic and mask is not None:
        raise ParameterError(
            f"The automatic threshold of '{name}' chunk by chunk needs no region of interest "
            f"(mask).", parameters=("mask",))
    floor = _noise.QUANTISATION_SIGMA if np.issubdtype(image.dtype, np.integer) else 0.0
    if image.dtype == np.bool_:
        image = image.astype(np.uint8)
    elif image.dtype == np.float16:
        image = image.astype(np.float32)
    image = fill_outside_in_chunks(image, mask, name, walls=params.walls)
    ndim = image.ndim
    connectivity = check_connectivity(ndim, params.connectivity or 1)
    sign = 1.0 if params.walls == "bright" else -1.0
    work = _noise.work_dtype(image.dtype)
    sweeps = _ChunkedSweeps(image, work, sign, mask, connectivity)
    if params.smooth is not None:  # one scale: smoothed once, into the store if given
        sweeps.store(np.asarray(params.smooth, float) / spacing, smoothed_store)
    noise = noise_level_in_chunks(image, floor=floor)  # as segment() estimates it
    robust_range = None
    if params.relative_persistence is not None:  # as segment(): 0.5th to 99.5th percentile
        low, high = percentiles_in_chunks(image, [0.5, 99.5])
        robust_range = float(high - low)
    scan = ScanImage(image, sign, work)
    # segment()'s own detection (one scale given, or its automatic choice among several),
    # each scale's tree merged from the chunks
    det, tried, _ = detect(scan, params, noise=noise, robust_range=robust_range or 0.0,
                           spacing=spacing, connectivity=connectivity, roi=None,
                           tell=lambda text: None, sweep=sweeps)
    sigma = det.sigma
    hint = None
    if params.automatic:  # as segment(): the other polarity at this scale, its own tree
        hint = polarity_check(det, scan, params, noise=noise,
                              robust_range=robust_range or 0.0, spacing=spacing,
                              connectivity=connectivity, roi=None,
                              sweep=_ChunkedSweeps(image, work, -sign, mask, connectivity))
    if params.smooth is None:  # the chosen scale, stored for the label passes
        sweeps.store(sigma, smoothed_store)
    tau, keep = det.threshold, det.keep
    choice = ThresholdChoice(det.rule, det.gap, tried,
                             int(np.count_nonzero(det.significant & ~keep)),
                             det.texture_joined, det.cell_sized, hint)
    del det
    chunked = sweeps.merged(sigma)
    tree = chunked.tree
    pruned = prune_by_levels(tree, keep, tau)
    hier = pruned.hier
    n_ch, n_enc = hier.n_chambers, hier.n_enclosures
    ids = np.arange(1, n_ch + n_enc + 1)
    chambers = chunked_nested_map(chunked, hier.node[:n_ch], pruned.close_level[:n_ch],
                                  ids[:n_ch])
    enclosures = (chunked_nested_map(chunked, hier.node[n_ch:], pruned.close_level[n_ch:],
                                     ids[n_ch:]) if n_enc else None)
    maps = [chambers] if enclosures is None else [chambers, enclosures]
    counted = [[dask.delayed(_counts)(block, n_ch + n_enc + 1)
                for block in labels.to_delayed().ravel()] for labels in maps]
    faces = [da.unique(chambers[face]) for face in face_slices(ndim)]
    counts, on_faces = dask.compute(counted, faces)
    work = np.sum(counts[0], axis=0)[:n_ch + 1]
    enclosure = (np.sum(counts[1], axis=0)[n_ch + 1:] if enclosures is not None
                 else np.zeros(0, np.int64))
    scale = float((sigma * spacing).max())
    nodes = hier.node[:n_ch]
    close = hier.close_rank[n_ch:]
    numbered = number_regions(
        RegionCounts(work, enclosure, np.unique(np.concatenate(on_faces))),
        unit=unit, ndim=ndim, voxel_volume=float(np.prod(spacing)), sign=sign,
        chambers=ChamberValues(birth=tree.breach_level[nodes], death=tree.core_level[nodes],
                               breach_voxel=tree.breach[nodes], core_voxel=tree.core[nodes],
                               threshold=np.full(n_ch, tau), scale=np.full(n_ch, scale),
                               node=nodes),
        enclosures=EnclosureValues(birth=pruned.close_level[n_ch:],
                                   death=pruned.formed_level[n_ch:],
                                   breach_voxel=pruned.voxel[close],
                                   core_voxel=tree.core[hier.node[n_ch:]]),
        hier=hier, n_cut=0, nested={}, dropped=np.zeros(n_ch, bool),
        level=pruned.close_level[:n_ch], tau=tau, scale=scale, params=params)
    dtype = numbered.dtype
    lut = numbered.lut.astype(dtype)
    labels = chambers.map_blocks(_renumber, lut, dtype=dtype)
    enclosure_labels = None
    if enclosures is not None:
        enclosure_lut = np.zeros(n_ch + n_enc + 1, dtype)
        enclosure_lut[n_ch + 1:] = numbered.enclosure_ids
        enclosure_labels = enclosures.map_blocks(_renumber, enclosure_lut, dtype=dtype)
    return ChunkedSegmentation(labels, enclosure_labels, numbered.table, tau, robust_range,
                               scale, tree, connectivity, numbered.chamber_nodes, noise, choice)


class _ChunkedSweeps:
    """Each smoothing scale's sweep on Dask, as :func:`._detect.detect` asks for it
    (:class:`._detect.Swept`): the image smoothed lazily at that scale (or read from the
    store made for it), its merged tree kept for the label passes."""

    def __init__(self, image: Any, dtype: np.dtype, sign: float, mask: Any,
                 connectivity: int) -> None:
        self.image, self.dtype, self.sign = image, dtype, sign
        self.mask, self.connectivity = mask, connectivity
        self.stored: dict[bytes, Any] = {}   # scale -> the smoothed image in a Zarr store
        self.trees: dict[bytes, Any] = {}    # scale -> its ChunkedTree

    def smoothed(self, sigma: np.ndarray) -> Any:
        """The image smoothed at ``sigma`` (voxels per axis), a Dask array."""
        key = _key(sigma)
        if key in self.stored:
            return self.stored[key]
        return smooth_in_chunks(self.image, tuple(sigma), dtype=self.dtype, sign=self.sign)

    def store(self, sigma: np.ndarray, path: str | os.PathLike | None) -> None:
        """Write the image smoothed at ``sigma`` to the Zarr store ``path`` once, for every
        later pass to read (nothing without a path, smoothing or regular chunks). A tree
        already swept at that scale reads the store from then on."""
        import dataclasses

        import dask.array as da

        smoothed = self.smoothed(sigma)
        if path is None or not np.any(sigma) or not _regular(smoothed.chunks):
            return
        try:
            smoothed.to_zarr(os.fspath(path))
        except OSError as exc:  # raised on a worker
            failure = write_failure(exc, Path(path), "the smoothed image")
            if failure is None:
                raise
            raise failure from exc
        stored = da.from_zarr(os.fspath(path))
        self.stored[_key(sigma)] = stored
        tree = self.trees.get(_key(sigma))
        if tree is not None:
            self.trees[_key(sigma)] = dataclasses.replace(
                tree, blocks=tuple(stored.to_delayed().reshape(-1)))

    def __call__(self, sigma: np.ndarray, automatic: bool) -> Swept:
        from ..cubical._chunked_tree import tree_chunks_on_dask

        smoothed = self.smoothed(sigma)
        chunked = tree_chunks_on_dask(smoothed, walls="bright", connectivity=self.connectivity,
                                      mask=self.mask)
        self.trees[_key(sigma)] = chunked
        split = class_split_in_chunks(smoothed) if automatic else None
        return Swept(smoothed, None, chunked.tree, split)

    def merged(self, sigma: np.ndarray) -> Any:
        """The chunked tree at ``sigma`` (:class:`cavitas.cubical._chunked_tree.ChunkedTree`)."""
        return self.trees[_key(sigma)]


def _key(sigma: np.ndarray) -> bytes:
    """A scale as a dictionary key (its float64 bytes)."""
    return np.asarray(sigma, np.float64).tobytes()


def _regular(chunks: tuple[tuple[int, ...], ...]) -> bool:
    """Whether Dask chunks are a Zarr array's: equal along each axis but the last one,
    which may be smaller.

    Examples
    --------
    >>> _regular(((4, 4, 2), (5,))), _regular(((4, 2, 4),))
    (True, False)
    """
    return all(len(set(sizes[:-1])) <= 1 and sizes[-1] <= sizes[0] for sizes in chunks)


def _counts(block: np.ndarray, length: int) -> np.ndarray:
    """Voxels per label of one block of a label map."""
    return np.bincount(block.ravel(), minlength=length)


def _renumber(block: np.ndarray, lut: np.ndarray) -> np.ndarray:
    """One block of a label map through the numbering's lookup table."""
    return lut[block]
