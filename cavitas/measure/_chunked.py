"""The per-region measurements of a chunked label map, chunk by chunk on Dask.

:func:`measure_in_chunks` gives :func:`~cavitas.measure.measure_regions`' table
(``thickness=False``) of a Dask label map without ever holding it whole. Every column is a
sum, an extreme or a count over voxels, so each chunk task adds up its own voxels and the
partial results are merged pairwise:

* voxel counts, coordinate sums and second moments, boxes, intensity minimum, maximum and
  sum: :func:`~cavitas.measure._basic.raw_sums` of the chunk, its coordinates moved to
  the array's;
* the Crofton crossings (``surface_area``, ``sphericity``): a voxel of region a adds one
  along a direction d for each of its neighbours p ± d not in a
  (:func:`~cavitas.measure._surface.core_crossings`), so the chunk needs its neighbours'
  voxels one deep around it (``dask.array.overlap``, label 0 beyond the array's edge, as
  the whole-array kernel reads there);
* the shells (``shell_voxel_count``, ``shell_intensity_mean``): wall voxels of the chunk
  that share a face with a region, found in the framed chunk; a shell voxel may lie in
  another chunk than every voxel of its region, so a task reports the regions of its
  frame too;
* ``touches_border``: the box at the array's edge, or a voxel in or next to (a face) a
  voxel outside the region of interest (``scipy.ndimage.binary_dilation`` of the framed
  chunk, the ROI taken to continue beyond the edge as the whole-array dilation takes it).

Sums of integers (counts, coordinates, integer intensities) are exact in float64 below
2**53, so they equal the whole-array ones; float intensities are summed in another order
(differences of the order of 1e-16 relative). The wall thickness is not made: the local
thickness of a voxel depends on the largest ball inside the walls, which no fixed frame
bounds.

Memory per task: the framed block of the labels (and of the image and ROI) assembled from
its chunks, its renumbered labels, the core copies, the shell and dilation masks: about 35
bytes per block voxel, measured (blocks of whole chunks up to
:data:`cavitas._shared.blocks.BLOCK_VOXELS`). The
partial results hold one row per region met, so the client holds a few rows per region.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, fields, replace
from typing import Any

import numpy as np

from .._shared.blocks import BLOCK_VOXELS, chunk_blocks
from .._table import Table
from ._basic import RawSums, raw_sums, stats_from_sums
from ._checks import as_3d, check_spacing, dense_labels, face_offsets
from ._global import RoiCounts
from ._regions import _columns, box_on_edge, kernel_image, measured_table
from ._shells import shell_means, shell_totals, shell_voxels
from ._surface import core_crossings, surface_from_crossings

__all__ = ["ChunkedMeasurement", "PartialSums", "measure_in_chunks"]

_BIG = np.iinfo(np.int64).max
#: Partial results merged by one task.
_FAN_IN = 8


@dataclass(frozen=True)
class PartialSums:
    """Sums over some chunks, one row per region met there (``labels``, sorted)."""

    labels: np.ndarray        # (k,) int64
    raw: RawSums              # array coordinates
    crossings: np.ndarray     # (k, directions) int64
    shell_count: np.ndarray   # (k,) int64
    shell_isum: np.ndarray    # (k,) float64
    near_outside: np.ndarray  # (k,) bool: a voxel in or next to one outside the ROI
    in_roi: np.ndarray        # (k,) int64: voxels inside the ROI
    roi_voxels: int


@dataclass(frozen=True)
class ChunkedMeasurement:
    """The measurement table and what the global figures count beside it."""

    table: Table             # as measure_regions(..., thickness=False)
    inside_roi: np.ndarray   # per row: the region's voxels inside the ROI
    roi_voxels: int          # voxels of the ROI (the array's without one)

    def roi_counts(self, rows: np.ndarray, roi: Any = None) -> RoiCounts:
        """:func:`~cavitas.measure.global_figures`' counts for the table's ``rows`` (a
        boolean mask), the ROI (a Dask array) read only at their centroid voxels."""
        chosen = self.table.select(rows)
        inside = len(chosen)
        if roi is not None and inside:
            axes = ("z", "y", "x")[3 - roi.ndim:]
            idx = tuple(np.rint(chosen[f"centroid_voxel_{a}"]).astype(np.intp) for a in axes)
            inside = int(np.count_nonzero(roi.vindex[idx].compute()))
        return RoiCounts(self.roi_voxels, int(self.inside_roi[rows].sum()), inside)


def measure_in_chunks(labels: Any, *, spacing: Sequence[float] | None = None,
                      unit: str = "µm", image: Any = None, roi: Any = None,
                      block_voxels: int = BLOCK_VOXELS) -> ChunkedMeasurement:
    """:func:`~cavitas.measure.measure_regions` (``thickness=False``) of a Dask label map.

    Parameters
    ----------
    labels : dask.array.Array of int
        2D or 3D label map, 0 for walls and background, in any chunks.
    spacing, unit
        As for :func:`~cavitas.measure.measure_regions`.
    image : dask.array.Array, optional
        Intensities of the same shape (rechunked like ``labels``).
    roi : dask.array.Array of bool, optional
        Region of interest, as ``measure_regions``' ``roi``.
    block_voxels : int
        Neighbouring chunks are measured together, in blocks of whole chunks of at most
        this many voxels (:func:`cavitas._shared.blocks.chunk_blocks`; a chunk larger than
        that alone): the result does not depend on the blocks, and fewer tasks cost less.
        0: each chunk alone. A task holds about 35 bytes per block voxel (measured: the
        framed blocks assembled from their chunks, the renumbering, the core copies and
        masks), about 150 MiB at the default.

    Returns
    -------
    ChunkedMeasurement
        ``table`` equal to ``measure_regions(labels, ..., thickness=False)`` of the array
        in memory (float sums to rounding), ``inside_roi`` and ``roi_voxels`` for the
        global figures.

    Examples
    --------
    >>> import dask.array as da
    >>> from cavitas.measure import measure_regions
    >>> lab = np.zeros((6, 8), int); lab[1:3, 1:4] = 5; lab[4, 6] = 9
    >>> t = measure_in_chunks(da.from_array(lab, chunks=(4, 3)), spacing=(0.5, 0.5)).table
    >>> t["surface_area"].tolist() == measure_regions(lab, spacing=(0.5, 0.5),
    ...                                               thickness=False)["surface_area"].tolist()
    True
    """
    import dask
    import dask.array as da

    ndim = labels.ndim
    sp = check_spacing(spacing, ndim)
    shape = tuple(int(s) for s in labels.shape)
    blocks = chunk_blocks(labels.chunks, block_voxels)

    def framed(array: Any, beyond: Any) -> Any:
        """The measuring blocks of ``array``, each framed one voxel deep by its
        neighbours' voxels (``beyond`` past the array's edge); None for no array."""
        if array is None:
            return None
        return da.overlap.overlap(array.rechunk(blocks), depth=1,
                                  boundary=beyond).to_delayed()

    labels = labels.rechunk(blocks)
    label_blocks = framed(labels, 0)
    image_blocks = framed(image, 0)
    roi_blocks = framed(None if roi is None else roi.astype(bool), True)
    starts = [np.concatenate([[0], np.cumsum(c)[:-1]]) for c in labels.chunks]
    parts = [dask.delayed(_chunk_sums, pure=True)(
        label_blocks[index], None if image_blocks is None else image_blocks[index],
        None if roi_blocks is None else roi_blocks[index],
        [int(starts[axis][i]) for axis, i in enumerate(index)])
        for index in np.ndindex(*labels.numblocks)]
    while len(parts) > 1:
        parts = [dask.delayed(_merge_all, pure=True)(parts[i:i + _FAN_IN])
                 for i in range(0, len(parts), _FAN_IN)]
    total = parts[0].compute()
    return _measurement(total, shape, sp, unit, image=image is not None,
                        roi=roi is not None)


def _chunk_sums(labels: np.ndarray, image: np.ndarray | None, roi: np.ndarray | None,
                origin: list[int]) -> PartialSums:
    """The sums of one chunk framed one voxel deep by its neighbours' voxels."""
    from scipy.ndimage import binary_dilation

    ndim = labels.ndim
    core = (slice(0, None),) * (3 - ndim) + (slice(1, -1),) * ndim
    halo = np.array([0] * (3 - ndim) + [1] * ndim)
    dense, values = dense_labels(np.asarray(labels))
    dense = as_3d(dense)
    n = len(values)
    img = None if image is None else as_3d(kernel_image(np.asarray(image)))
    inside = None if roi is None else np.asarray(roi, bool)
    inside3 = np.ones(dense.shape, bool) if inside is None else as_3d(inside)
    core_labels = np.ascontiguousarray(dense[core])
    raw = raw_sums(core_labels, n, None if img is None else np.ascontiguousarray(img[core]))
    crossings = core_crossings(dense, n, ndim, halo)
    shell = np.zeros(dense.shape, bool)
    shell[core] = shell_voxels(dense, inside3, face_offsets(ndim))[core]
    shell_count, shell_isum = shell_totals(dense, shell, n, face_offsets(ndim), img)
    near = np.zeros(n, bool)
    in_roi = raw.count
    roi_voxels = core_labels.size
    if inside is not None:
        inside_core = inside3[core]
        roi_voxels = int(np.count_nonzero(inside_core))
        in_roi = np.bincount(core_labels[inside_core], minlength=n + 1)[1:]
        if not inside.all():
            hit = as_3d(binary_dilation(~inside))[core] & (core_labels > 0)
            near[core_labels[hit] - 1] = True
    met = (raw.count > 0) | (shell_count > 0)
    part = PartialSums(values, _moved(raw, origin), crossings, shell_count, shell_isum,
                       near, in_roi, roi_voxels)
    return _rows(part, met)


def _moved(raw: RawSums, origin: list[int]) -> RawSums:
    """Sums of local coordinates made sums of the array's (3D rows; a 2D origin gains 0)."""
    o = np.array([0] * (3 - len(origin)) + list(origin), np.float64)
    n = raw.count.astype(np.float64)
    first = raw.first + n[:, None] * o
    second = raw.second.copy()
    for k, (i, j) in enumerate(((0, 0), (1, 1), (2, 2), (0, 1), (0, 2), (1, 2))):
        second[:, k] += o[j] * raw.first[:, i] + o[i] * raw.first[:, j] + n * o[i] * o[j]
    seen = raw.count[:, None] > 0
    shift = o.astype(np.int64)
    return replace(raw, first=first, second=second,
                   lo=np.where(seen, raw.lo + shift, _BIG),
                   hi=np.where(seen, raw.hi + shift, -1))


def _rows(part: PartialSums, rows: np.ndarray) -> PartialSums:
    """The rows picked of every per-region field."""
    raw = replace(part.raw, **{f.name: getattr(part.raw, f.name)[rows]
                               for f in fields(RawSums)})
    return replace(part, raw=raw, labels=part.labels[rows],
                   **{name: getattr(part, name)[rows] for name in _PART_MERGE})


#: How each field of the sums merges: added, or its minimum, maximum, either.
_ADD: Any = np.add
_MIN: Any = np.minimum
_MAX: Any = np.maximum
_ANY: Any = np.logical_or
_RAW_MERGE = {"count": _ADD, "first": _ADD, "second": _ADD, "lo": _MIN, "hi": _MAX,
              "imin": _MIN, "imax": _MAX, "isum": _ADD}
_PART_MERGE = {"crossings": _ADD, "shell_count": _ADD, "shell_isum": _ADD,
               "near_outside": _ANY, "in_roi": _ADD}


def _merge_all(parts: list[PartialSums]) -> PartialSums:
    """Several partial sums as one (their regions united)."""
    labels = np.unique(np.concatenate([p.labels for p in parts]))
    empty = _empty(parts[0], len(labels))
    merged_raw = {name: getattr(empty.raw, name) for name in _RAW_MERGE}
    merged = {name: getattr(empty, name) for name in _PART_MERGE}
    for part in parts:
        at = np.searchsorted(labels, part.labels)
        for name, merge in _RAW_MERGE.items():
            merged_raw[name][at] = merge(merged_raw[name][at], getattr(part.raw, name))
        for name, merge in _PART_MERGE.items():
            merged[name][at] = merge(merged[name][at], getattr(part, name))
    return PartialSums(labels, RawSums(**merged_raw), roi_voxels=sum(p.roi_voxels
                                                                     for p in parts),
                       **merged)


def _empty(like: PartialSums, k: int) -> PartialSums:
    """Sums of no voxel for ``k`` regions, each field's neutral element, shaped as
    ``like``'s."""
    def blank(value: np.ndarray, merge: Any) -> np.ndarray:
        whole = value.dtype.kind in "iu"  # boxes: -1 and the largest int64, as raw_sums
        start = {_ADD: 0, _ANY: False, _MIN: _BIG if whole else np.inf,
                 _MAX: -1 if whole else -np.inf}[merge]
        return np.full((k,) + value.shape[1:], start, value.dtype)

    raw = RawSums(**{name: blank(getattr(like.raw, name), merge)
                     for name, merge in _RAW_MERGE.items()})
    return PartialSums(np.zeros(k, np.int64), raw, roi_voxels=0,
                       **{name: blank(getattr(like, name), merge)
                          for name, merge in _PART_MERGE.items()})


def _measurement(total: PartialSums, shape: tuple[int, ...], sp: tuple[float, ...],
                 unit: str, *, image: bool, roi: bool) -> ChunkedMeasurement:
    """The table of the merged sums, as :func:`measure_regions` builds it."""
    rows = total.raw.count > 0  # measure_regions has a row per label present
    part = _rows(total, rows)
    n = int(rows.sum())
    stats = stats_from_sums(part.raw, image=image)
    volume = stats["count"] * float(np.prod(sp))
    area = surface_from_crossings(part.crossings, sp, volume) if n else np.zeros(0)
    border = box_on_edge(stats, shape) | (part.near_outside if roi else False)
    sums = shell_means(part.shell_count, part.shell_isum if image else None)
    cols = _columns(part.labels, stats, volume, area, sums, border, sp, n, image=image,
                    thickness=False)
    return ChunkedMeasurement(measured_table(cols, sp, unit), part.in_roi, total.roi_voxels)
