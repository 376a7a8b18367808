"""Label maps from a pruned tree: *breach* and *basin* regions, border-cut pieces, islands.

Region definitions (both from one pass over the sweep ``order``, no per-feature work):

* **breach** -- a chamber is the component of ``{f < level}`` holding its core, at the
  level where it closes (it joins its parent, or its first kept child joins it), or at
  ``core + fraction · (level - core)``. Exact and strict; but under noise the weakest wall
  point lies well below the typical wall, so voxels near the wall drop out, and at a
  coarse detection scale the whole region shrinks (bench: 10 % of foam cells found).
* **basin** (the default; bench: 100 % of cells found on every scene, median Dice
  0.90-0.98) -- flooding from the kept cores partitions the volume; everything that
  reaches the scan or ROI border first is the basin *outside*, so a cell cut by the border
  never spills into its neighbour. In each basin the voxels at or above the basin's own
  wall level are walls (label 0); one level per basin, so uneven illumination does not
  matter. The level lies :data:`WALL_FRACTION` (0.6) of the way from the basin's typical
  interior (median of its values) to its typical wall (median of its values on the lines
  where it meets another basin). Reason: the edge of a thick wall is at half height
  (common practice), but a wall 2-3 voxels thick blurred to σ ≈ 1.1 voxel in all (optics
  plus the 0.5-voxel delineation smoothing) keeps only 64-83 % of its contrast at its
  ridge while its true edge keeps 47-50 %, i.e. 60-73 % of the observed ridge (a Gaussian-
  blurred bar, erf model; our derivation); 0.6 is the end of that range that stays safe
  for thick walls. Measured on the bench scenes, 0.6 instead of 0.5 raises the median Dice
  of the 2D sheets by about 0.008 and lowers that of the 3D foams by about 0.01. Of what
  is left, each basin keeps its largest connected piece.

**Border-cut regions** are the pieces of the outside basin (its walls removed the same way)
that touch the scan or ROI border, of at least 8 voxels and a tenth of the median chamber.

Then wall components that touch no border and lie around or inside one region only are
given to it (:func:`fill_islands`: noise specks; the wall of a capsule inside a capsule,
which belongs to the outer chamber, the inner one keeping its own label).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import ndimage as ndi

from ..cubical._kernels import worth_prefetching
from ..cubical._neighbors import dual_connectivity, grid_shape3, neighbor_offsets
from ._label_kernels import (
    basin_pass,
    continuation,
    keep_largest_pieces,
    owner_pass,
    resolve_regions,
)
from ._nearest import nearest_feature
from ._result import label_dtype

#: Where a basin's wall level sits between its interior and its wall (see module notes).
WALL_FRACTION = 0.6
#: A chamber whose breach region has its median within this fraction of the way from its
#: wall down to its core is a pore in a matrix: the breach region is mostly the matrix
#: around the pore, up to where the pore opens (:func:`wall_levels`). Measured, (wall -
#: breach median) / (wall - core): dark voids in the concrete micro-CT of
#: ``bench/real_scans.py`` 0.08-0.11; cells of the EM slices 0.27 and up; capsules of
#: ``cavitas.scenes`` (down to 44 voxels) 0.41 and up; foam cells 0.7 and up.
PORE_RATIO = 0.2
#: Planes per slab of the full-size comparisons (bounds their temporaries).
_SLAB = 16
#: Voxels per chunk of the flat passes of :func:`_label_quantile_f32`.
_CHUNK = 1 << 22

__all__ = ["BasinLevels", "FaceValues", "Interior", "Sweep", "basin_map", "below_levels",
           "border_voxels", "cut_pieces", "face_labels", "face_slices", "fill_islands",
           "interior_levels", "label_counts", "medium_at_faces", "nested_map", "remove_walls",
           "reopen_faces"]


class Sweep:
    """One cavity sweep and what every labelling pass needs from it."""

    def __init__(self, values: np.ndarray, order: np.ndarray, tree, connectivity: int,
                 outside: np.ndarray | None) -> None:
        self.shape = values.shape
        self.values = values.ravel()          # polarity applied: walls are high
        self.order = order
        self.tree = tree
        self.connectivity = connectivity
        self.rank = np.full(values.size, -1, order.dtype)  # int32 below 2**31 voxels
        self.rank[order] = np.arange(order.size, dtype=order.dtype)
        self.outside = (np.zeros(values.size, np.bool_) if outside is None
                        else np.ascontiguousarray(outside.ravel(), np.bool_))
        dual = dual_connectivity(len(self.shape), connectivity)
        self.offsets, self.offsets_zyx = neighbor_offsets(self.shape, dual)
        self.grid = (*grid_shape3(self.shape), 1 if len(self.shape) == 3 else 0)

    def level_of_rank(self, ranks: np.ndarray) -> np.ndarray:
        """Sweep value (walls high) at positions of ``order``."""
        return self.values[self.order[np.minimum(ranks, self.order.size - 1)]]

    def rank_of_level(self, levels: np.ndarray) -> np.ndarray:
        """First rank whose value is >= each level."""
        return np.searchsorted(self.values[self.order], levels, side="left")


def nested_map(sweep: Sweep, node: np.ndarray, close_rank: np.ndarray,
               ids: np.ndarray) -> np.ndarray:
    """Innermost region per voxel (region ``k``: rooted at ``node[k]``, closing at
    ``close_rank[k]``)."""
    tree = sweep.tree
    n_nodes = tree.n_nodes
    order_k = np.lexsort((close_rank, node))
    reg_start = np.zeros(n_nodes + 1, np.int64)
    np.add.at(reg_start, node + 1, 1)
    reg_start = np.cumsum(reg_start)
    reg_rank = np.ascontiguousarray(close_rank[order_k], np.int64)
    reg_label = np.ascontiguousarray(ids[order_k], np.int64)
    merge_rank = np.zeros(n_nodes, np.int64)
    has = tree.breach >= 0
    merge_rank[has] = sweep.rank[tree.breach[has]]
    cont = continuation(tree.parent.astype(np.int64), merge_rank, reg_start, reg_rank, reg_label)
    # owners (tree nodes) and then region labels share one array: wide enough for both
    index = np.int32 if n_nodes < 2**31 else np.int64
    out = np.full(sweep.values.size, -1, np.promote_types(label_dtype(int(ids.max(initial=0))),
                                                           index))
    out[tree.core[1:]] = np.arange(1, n_nodes)
    bad = owner_pass(sweep.order, sweep.outside, True, *sweep.grid, sweep.offsets,
                     sweep.offsets_zyx, out)
    if bad >= 0:
        raise RuntimeError(f"cavity tree and sweep order disagree at voxel {bad}")
    resolve_regions(sweep.order, reg_start, reg_rank, reg_label, cont, out)
    return out.reshape(sweep.shape)


def basin_map(sweep: Sweep, cores: np.ndarray, outside_label: int) -> np.ndarray:
    """Flooding partition from ``cores`` (labels ``1..len(cores)``; the outside
    ``outside_label``)."""
    dtype = label_dtype(outside_label)
    label_of_core = np.zeros(sweep.values.size, dtype)
    label_of_core[cores] = np.arange(1, len(cores) + 1)
    out = np.zeros(sweep.values.size, dtype)
    basin_pass(sweep.order, sweep.rank, label_of_core, sweep.outside, *sweep.grid,
               sweep.offsets, sweep.offsets_zyx, outside_label, out, worth_prefetching(sweep.shape))
    return out.reshape(sweep.shape)


def _meeting_lines(basins: np.ndarray) -> np.ndarray:
    """Voxels with a face neighbour in another basin."""
    line = np.zeros(basins.shape, bool)
    for a, b in _shift_pairs(basins.ndim):
        differ = basins[a] != basins[b]
        line[a] |= differ
        line[b] |= differ
    return line


@dataclass(frozen=True)
class BasinLevels:
    """Per basin: its inside value, its meeting-line median (its wall) and the level it is
    cut at, :data:`WALL_FRACTION` of the way from the first to the second."""

    inside: np.ndarray
    wall: np.ndarray
    level: np.ndarray


def remove_walls(basins: np.ndarray, image: np.ndarray, n_labels: int, connectivity: int,
                 cores: np.ndarray | None = None,
                 interior: Interior | None = None) -> tuple[np.ndarray, BasinLevels]:
    """Cut each basin at its own wall level; keep one piece of it. Returns the labels and
    each basin's :class:`BasinLevels`.

    Label ``n_labels`` is the outside basin: all its pieces are kept (they are the regions
    cut by the border). ``cores`` (flat index per basin ``1..n_labels - 1``) picks the piece
    kept: the one holding the core, else the largest. ``interior`` (optional) gives the
    chambers' inside values (see :func:`wall_levels`).
    """
    if n_labels == 0:
        none = np.full(0, np.inf)
        return np.zeros_like(basins), BasinLevels(none, none, none)
    levels = wall_levels(basins, image, n_labels, interior, cores)
    lut = np.concatenate([[-np.inf], levels.level])
    labels = np.zeros_like(basins)
    for z in range(0, basins.shape[0], _SLAB):  # slabs: no full-size float64 temporary
        part = slice(z, z + _SLAB)
        below = image[part] < lut[basins[part]]
        labels[part][below] = basins[part][below]
    outside = labels == n_labels  # the outside basin holds many pieces: keep them all
    kept = largest_pieces(np.where(outside, 0, labels), n_labels - 1, connectivity, cores)
    kept[outside] = n_labels
    return kept, levels


def wall_levels(basins: np.ndarray, image: np.ndarray, n_labels: int,
                interior: Interior | None = None, cores: np.ndarray | None = None
                ) -> BasinLevels:
    """Each basin's wall level: :data:`WALL_FRACTION` of the way from its inside value to its
    meeting-line median.

    The inside value is the median of the whole basin by default. With ``interior`` (and
    the chambers' ``cores``) it is the chamber's breach-region median, or, for a pore in a
    matrix (:data:`PORE_RATIO`), the median of its interior-class part: a small pore in a
    large basin of matrix would otherwise take the matrix as its inside.
    """
    levels = np.full(n_labels, np.inf)
    line = _meeting_lines(basins)
    wall = _label_quantile(image, np.where(line, basins, 0), n_labels, 0.5)
    inside = _label_quantile(image, basins, n_labels, 0.5)
    if interior is not None and cores is not None:
        n = min(len(cores), n_labels)
        own = interior.breach[:n].copy()
        core = image.ravel()[cores[:n]]
        with np.errstate(invalid="ignore", divide="ignore"):
            pore = (wall[:n] - own) < PORE_RATIO * (wall[:n] - core)
        pore &= np.isfinite(interior.pore[:n])
        own[pore] = interior.pore[:n][pore]
        known = np.isfinite(own)
        inside[:n][known] = own[known]
    ok = np.isfinite(wall) & np.isfinite(inside)
    levels[ok] = inside[ok] + WALL_FRACTION * (wall[ok] - inside[ok])
    return BasinLevels(inside, wall, levels)


@dataclass(frozen=True)
class Interior:
    """Two estimates of each chamber's inside value (NaN where empty).

    ``breach``: the median of its breach region; ``pore``: the median of the part of it in
    the interior class (see :func:`wall_levels` for which one applies).
    """

    breach: np.ndarray
    pore: np.ndarray


def below_levels(labels: np.ndarray, image: np.ndarray, levels: np.ndarray) -> np.ndarray:
    """``labels`` where ``image`` lies under its label's level (``levels[label - 1]``; labels
    beyond ``levels`` and 0 give 0), by slabs.

    Examples
    --------
    >>> below_levels(np.array([[1, 1, 2]]), np.array([[0.0, 5.0, 1.0]]), np.array([2.0, 3.0]))
    array([[1, 0, 2]])
    """
    lut = np.full(int(labels.max(initial=0)) + 1, -np.inf)
    lut[1:1 + len(levels)] = np.asarray(levels, np.float64)[:lut.size - 1]
    out = np.zeros_like(labels)
    for z in range(0, labels.shape[0], _SLAB):
        part = slice(z, z + _SLAB)
        under = image[part] < lut[labels[part]]
        out[part][under] = labels[part][under]
    return out


def interior_levels(regions: np.ndarray, image: np.ndarray, n_labels: int,
                    below: np.ndarray) -> Interior:
    """:class:`Interior` of each region ``1..n_labels`` of ``regions`` (breach regions),
    ``below`` being each region's two-class threshold (one sort for both medians)."""
    breach, pore = _label_quantile(image, regions, n_labels, 0.5, below=below)
    return Interior(breach, pore)


def _label_quantile(image: np.ndarray, labels: np.ndarray, n_labels: int, q: float,
                    below: np.ndarray | None = None):
    """The ``q`` quantile of ``image`` over each label ``1..n_labels`` (NaN where empty).

    The lower ``q`` quantile: the value at rank ``floor(q * (count - 1))`` among the label's
    values in increasing order. With ``below`` (a level per label), also the quantile over
    the label's values under its level, from the same sort: returns both then.
    """
    if image.dtype == np.float32 and n_labels < 2**31:
        return _label_quantile_f32(image, labels, n_labels, q, below)
    lab = labels.ravel()
    keep = lab > 0
    lab, val = lab[keep], image.ravel()[keep]
    order = np.lexsort((val, lab))
    lab, val = lab[order], val[order]
    start = np.searchsorted(lab, np.arange(1, n_labels + 1), side="left")
    stop = np.searchsorted(lab, np.arange(1, n_labels + 1), side="right")
    if below is None:
        return _pick(val, start, stop, q)
    under = np.bincount(lab[val < np.asarray(below, np.float64)[lab - 1]],
                        minlength=n_labels + 1)[1:]
    return _pick(val, start, stop, q), _pick(val, start, start + under, q)


def _pick(values: np.ndarray, start: np.ndarray, stop: np.ndarray, q: float) -> np.ndarray:
    """The lower ``q`` quantile of each sorted run ``values[start:stop]`` (NaN if empty)."""
    out = np.full(start.shape, np.nan)
    has = stop > start
    pick = start[has] + np.floor(q * (stop[has] - start[has] - 1)).astype(np.int64)
    out[has] = values[pick]
    return out


def _label_quantile_f32(image: np.ndarray, labels: np.ndarray, n_labels: int, q: float,
                        below: np.ndarray | None = None):
    """:func:`_label_quantile` of a float32 image with one sort of 8-byte keys.

    Key = label in the high 32 bits, the value's order-preserving bit pattern in the low 32
    (IEEE sign trick), so one in-place sort orders by (label, value): 8 bytes per labelled
    voxel instead of the 24 of a two-key lexsort, and the value read back from the key is
    the image value itself.
    """
    lab, val = labels.ravel(), image.ravel()
    total = 0
    for a in range(0, lab.size, _CHUNK):
        total += int(np.count_nonzero(lab[a:a + _CHUNK] > 0))
    key = np.empty(total, np.uint64)
    filled = 0
    for a in range(0, lab.size, _CHUNK):
        keep = lab[a:a + _CHUNK] > 0
        bits = val[a:a + _CHUNK][keep].view(np.uint32)
        bits ^= (bits >> np.uint32(31)) * np.uint32(0x7FFFFFFF) | np.uint32(0x80000000)
        part = key[filled:filled + bits.size]
        part[:] = lab[a:a + _CHUNK][keep]
        part <<= np.uint64(32)
        part |= bits
        filled += bits.size
    key.sort()
    ids = np.arange(1, n_labels + 1, dtype=np.uint64) << np.uint64(32)
    start = np.searchsorted(key, ids, side="left")
    stop = np.searchsorted(key, ids + np.uint64(1 << 32), side="left")
    if below is None:
        return _pick_keys(key, start, stop, q)
    # the first key of each label at or above its level: the values before it are under it
    level = np.asarray(below, np.float32).copy().view(np.uint32)
    level ^= (level >> np.uint32(31)) * np.uint32(0x7FFFFFFF) | np.uint32(0x80000000)
    under = np.searchsorted(key, ids | level.astype(np.uint64), side="left")
    return _pick_keys(key, start, stop, q), _pick_keys(key, start, under, q)


def _pick_keys(key: np.ndarray, start: np.ndarray, stop: np.ndarray, q: float) -> np.ndarray:
    """:func:`_pick` on the sorted keys of :func:`_label_quantile_f32` (values decoded)."""
    out = np.full(start.shape, np.nan)
    has = stop > start
    pick = start[has] + np.floor(q * (stop[has] - start[has] - 1)).astype(np.int64)
    bits = (key[pick] & np.uint64(0xFFFFFFFF)).astype(np.uint32)
    bits ^= (1 - (bits >> np.uint32(31))) * np.uint32(0x7FFFFFFF) | np.uint32(0x80000000)
    out[has] = bits.view(np.float32)
    return out


def largest_pieces(labels: np.ndarray, n_labels: int, connectivity: int,
                   cores: np.ndarray | None = None) -> np.ndarray:
    """Keep, for each label, one connected piece (complement connectivity).

    The piece holding ``cores[label - 1]`` (a flat index) when that voxel carries the
    label, else the largest. Pieces are numbered as :func:`skimage.measure.label` numbers
    them; of equal largest pieces the one numbered last is kept. One compiled pass, 4 bytes
    per voxel.
    """
    dual = dual_connectivity(labels.ndim, connectivity)
    prefer = np.full(n_labels + 1, -1, np.int64)
    if cores is not None:
        prefer[1:1 + len(cores)] = cores[:n_labels]
    kept = keep_largest_pieces(labels.reshape(grid_shape3(labels.shape)),
                               _backward_offsets(labels.ndim, dual), n_labels, prefer)
    return kept.reshape(labels.shape).astype(labels.dtype, copy=False)


def face_slices(ndim: int, depth: int = 0):
    """Index of each face of an ``ndim``-dimensional array (first and last plane per axis),
    or of the plane ``depth`` layers inside it.

    Examples
    --------
    >>> list(face_slices(1)), list(face_slices(1, depth=1))
    ([(0,), (-1,)], [(1,), (-2,)])
    """
    for axis in range(ndim):
        for end in (depth, -1 - depth):
            index: list[int | slice] = [slice(None)] * ndim
            index[axis] = end
            yield tuple(index)


def face_labels(labels: np.ndarray) -> np.ndarray:
    """Distinct labels on the faces of the array (0 included when present).

    Examples
    --------
    >>> face_labels(np.array([[0, 0, 0], [0, 3, 4], [0, 0, 4]])).tolist()
    [0, 4]
    """
    return np.unique(np.concatenate([np.unique(labels[f]) for f in face_slices(labels.ndim)]))


def reopen_faces(labels: np.ndarray) -> None:
    """Give each face voxel the label of its neighbour one layer in, in place.

    The label map's side of closing the faces (``keep_border``, where the faces were a
    wall): regions reach the faces again; edges and corners follow from one axis after
    another.

    Examples
    --------
    >>> lab = np.array([[0, 0, 0, 0], [0, 1, 2, 0], [0, 1, 2, 0], [0, 0, 0, 0]])
    >>> reopen_faces(lab); lab.tolist()
    [[1, 1, 2, 2], [1, 1, 2, 2], [1, 1, 2, 2], [1, 1, 2, 2]]
    """
    if min(labels.shape) < 3:
        return
    for face, near in zip(face_slices(labels.ndim), face_slices(labels.ndim, depth=1),
                          strict=True):
        labels[face] = labels[near]


#: Share of its boundary voxels on the faces above which a region larger than every whole
#: chamber is medium, not a cell (:func:`medium_at_faces`).
MEDIUM_FACE_SHARE = 0.25
#: The same share when no whole chamber gives a size to compare with.
MEDIUM_FACE_SHARE_ALONE = 0.5


def medium_at_faces(labels: np.ndarray, n_chambers: int) -> np.ndarray:
    """Chambers on the closed faces that are the medium around the specimen, not cells.

    With the faces closed (``keep_border``), the medium around a specimen (the empty
    surround of an embryo, the liquid around a foam) is enclosed by the faces too. A cell
    cut by the border is part of a cell, so at most about as large as a whole one, and
    most of its boundary is wall (a cell cut in half: about 0.4 on the faces, a corner
    piece about 0.5); the medium is larger and lines the faces. Its share of the faces is
    the larger of two: of its boundary voxels, and of all face voxels (wall specks in a
    noisy surround inflate the boundary; on the confocal embryo the surround holds 0.54 of
    the face voxels but 0.2 of its boundary). Medium: larger than every whole chamber with
    a share above :data:`MEDIUM_FACE_SHARE`; with no whole chamber, a share above
    :data:`MEDIUM_FACE_SHARE_ALONE`.

    Examples
    --------
    >>> lab = np.zeros((12, 12), int); lab[:, 9:] = 5  # 5 lines the right face
    >>> for i, (y, x) in enumerate([(1, 1), (1, 5), (5, 1), (5, 5)]):
    ...     lab[y:y + 3, x:x + 3] = i + 1  # whole cells
    >>> lab[10:, 1:5] = 6  # a cell cut by the bottom face
    >>> medium_at_faces(lab, 6).tolist()
    [False, False, False, False, True, False]
    """
    n = n_chambers + 1
    counts = label_counts(labels, n)[1:n]
    face = np.zeros(labels.shape, bool)
    for f in face_slices(labels.ndim):
        face[f] = True
    edge = _meeting_lines(labels)
    edge &= ~face
    n_face = np.bincount(labels[face], minlength=n)[1:n]
    n_edge = np.bincount(labels[edge], minlength=n)[1:n]
    touching = n_face > 0
    # the larger of two shares: of the region's boundary, and of all the face voxels (in a
    # noisy surround, wall specks inside the medium inflate its boundary)
    share = np.maximum(n_face / np.maximum(n_face + n_edge, 1),
                       n_face / np.count_nonzero(face))
    whole = counts[~touching & (counts > 0)]
    if whole.size == 0:
        return touching & (share > MEDIUM_FACE_SHARE_ALONE)
    return touching & (counts > whole.max()) & (share > MEDIUM_FACE_SHARE)


def label_counts(labels: np.ndarray, minlength: int = 0) -> np.ndarray:
    """``np.bincount(labels.ravel(), minlength)`` by chunks: bincount converts int32 labels
    to a full int64 copy first; chunks bound that copy."""
    flat = labels.ravel()
    counts = np.zeros(max(minlength, int(flat.max(initial=0)) + 1), np.int64)
    for a in range(0, flat.size, _CHUNK):
        part = np.bincount(flat[a:a + _CHUNK])
        counts[:part.size] += part
    return counts


def _backward_offsets(ndim: int, connectivity: int) -> np.ndarray:
    """``(dz, dy, dx)`` of the neighbours within ``connectivity`` orthogonal hops that come
    earlier in raster order (scikit-image's meaning of connectivity)."""
    steps = [d for d in np.ndindex(*(3,) * ndim)
             if 0 < sum(abs(v - 1) for v in d) <= connectivity]
    back = [tuple(v - 1 for v in d) for d in steps if tuple(v - 1 for v in d) < (0,) * ndim]
    return np.array([(0,) * (3 - ndim) + b for b in back], np.int64).reshape(-1, 3)


def cut_pieces(outside: np.ndarray, connectivity: int, min_voxels: int,
               beyond_roi: np.ndarray | None = None) -> np.ndarray:
    """Components of the outside basin (walls removed) that touch the scan or ROI border.

    Pieces smaller than ``min_voxels`` are dropped; the others are numbered ``1..m``.
    """
    dual = dual_connectivity(outside.ndim, connectivity)
    structure = ndi.generate_binary_structure(outside.ndim, dual)
    if beyond_roi is not None:
        outside = outside & ~beyond_roi
    pieces, n = ndi.label(outside, structure)
    if n == 0:
        return pieces
    border = np.zeros(n + 1, bool)
    for ax in range(outside.ndim):
        for end in (0, -1):
            border[np.take(pieces, end, axis=ax)] = True
    if beyond_roi is not None and beyond_roi.any():
        border[pieces[ndi.binary_dilation(beyond_roi, structure)]] = True
    size = label_counts(pieces, n + 1)
    ok = border & (size >= min_voxels)
    ok[0] = False
    new = np.zeros(n + 1, pieces.dtype)
    new[ok] = np.arange(1, ok.sum() + 1)
    return new[pieces]


@dataclass(frozen=True)
class FaceValues:
    """The border voxels (:func:`border_voxels`) with their value at the delineation scale
    and the basin each lies in."""

    index: np.ndarray  # flat index of each border voxel
    value: np.ndarray  # its value (walls high)
    basin: np.ndarray  # its basin (``n_labels + 1``: the outside basin)


def border_voxels(shape: tuple[int, ...], beyond_roi: np.ndarray | None = None) -> np.ndarray:
    """Flat indices of the voxels on the array's faces and, with a ROI, next to its outside
    (``beyond_roi``, itself excluded), in increasing order.

    Examples
    --------
    >>> border_voxels((3, 3)).tolist()
    [0, 1, 2, 3, 5, 6, 7, 8]
    """
    border = np.zeros(shape, bool)
    for face in face_slices(len(shape)):
        border[face] = True
    if beyond_roi is not None and beyond_roi.any():
        border |= ndi.binary_dilation(beyond_roi, ndi.generate_binary_structure(len(shape), 1))
        border &= ~beyond_roi
    return np.flatnonzero(border)


def open_to_border(labels: np.ndarray, outside: np.ndarray, n_labels: int,
                   beyond_roi: np.ndarray | None = None, faces: FaceValues | None = None,
                   levels: np.ndarray | None = None) -> np.ndarray:
    """Chambers cut by the scan or ROI border: no wall between them and it.

    A chamber that holds a border voxel itself reaches the border below its own wall level:
    it is cut. A border voxel (on the array faces or next to the outside of the ROI) that is
    not a wall belongs to the outside basin (``outside``). A chamber face-adjacent to at
    least ``max(2, s ** ((d - 1) / d) / 4)`` such voxels (``s`` its voxel count, ``d`` the
    dimension: a quarter of a typical cross-section) is open to the border: the smoothing
    found a shallow rim there, not a wall. A few voxels of contact (noise in a thin wall)
    do not count.

    With ``faces`` (taken with the same ``beyond_roi``) and the chambers' cut ``levels``
    (the same scale), the chamber's own level decides too: the outside basin has one wall
    level for every piece of it, which under uneven illumination lies below the inside of a
    dim cell cut by the border, so its face voxels read as wall there. A chamber is then
    also open when at least as many voxels as above, and at least half of the border voxels
    next to it that lie in its own basin or the outside basin, lie below its level.

    Examples
    --------
    Chamber 1 stops one voxel short of the bottom face, whose voxels lie at its inside
    level (below its cut level 0.5), but above the outside basin's level (no ``outside``
    voxel there); chamber 2 has a wall along the face:

    >>> labels = np.zeros((5, 8), int); labels[1:4, 2:4] = 1; labels[1:3, 5:7] = 2
    >>> image = np.ones((5, 8)); image[4, :5] = 0.2
    >>> basins = np.full((5, 8), 3); basins[:, :5] = 1; basins[:4, 5:] = 2
    >>> index = border_voxels(labels.shape)
    >>> faces = FaceValues(index, image.ravel()[index], basins.ravel()[index])
    >>> outside = np.zeros(labels.shape, bool)
    >>> open_to_border(labels, outside, 2).tolist()
    [False, False]
    >>> open_to_border(labels, outside, 2, faces=faces, levels=np.array([0.5, 0.5])).tolist()
    [True, False]
    """
    ndim = labels.ndim
    border = np.zeros(labels.shape, bool)
    border.ravel()[faces.index if faces is not None
                   else border_voxels(labels.shape, beyond_roi)] = True
    opening = border & outside
    on_face = np.bincount(labels[border].ravel().astype(np.int64), minlength=n_labels + 1) > 0
    contact = np.zeros(n_labels + 1, np.int64)
    for x, y in ((a, b) for pair in _shift_pairs(ndim) for a, b in (pair, pair[::-1])):
        touch = opening[x] & (labels[y] > 0)
        contact += np.bincount(labels[y][touch], minlength=n_labels + 1)
    size = label_counts(labels, n_labels + 1)
    need = np.maximum(2.0, size ** ((ndim - 1) / ndim) / 4.0)
    cut = (contact >= need) | on_face
    if faces is not None and levels is not None:
        below, beside = _below_own_level(labels, faces, n_labels, levels)
        cut |= (below >= need) & (2 * below >= beside)
    return cut[1:] & (size[1:] > 0)


def _below_own_level(labels: np.ndarray, faces: FaceValues, n_labels: int,
                     levels: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per label ``0..n_labels``: the unlabelled border voxels face-adjacent to it in its
    own basin or the outside basin that lie below its level, and all of those."""
    shape = labels.shape
    flat = labels.ravel()
    free = flat[faces.index] == 0
    index, value, basin = faces.index[free], faces.value[free], faces.basin[free]
    coords = np.unravel_index(index, shape)
    lut = np.full(n_labels + 1, -np.inf)
    lut[1:] = np.asarray(levels, np.float64)[:n_labels]
    below = np.zeros(n_labels + 1, np.int64)
    beside = np.zeros(n_labels + 1, np.int64)
    for ax in range(labels.ndim):
        for step in (-1, 1):
            moved = coords[ax] + step
            ok = (moved >= 0) & (moved < shape[ax])
            near = list(coords)
            near[ax] = np.where(ok, moved, coords[ax])
            owner = np.where(ok, flat[np.ravel_multi_index(tuple(near), shape)], 0)
            ours = (owner > 0) & ((basin == owner) | (basin == n_labels + 1))
            beside += np.bincount(owner[ours], minlength=n_labels + 1)
            low = ours & (value < lut[owner])
            below += np.bincount(owner[low], minlength=n_labels + 1)
    return below, beside


def _shift_pairs(ndim: int):
    """Index pairs ``(a, b)`` selecting face neighbours along each axis."""
    for ax in range(ndim):
        a = [slice(None)] * ndim
        b = [slice(None)] * ndim
        a[ax], b[ax] = slice(1, None), slice(None, -1)
        yield tuple(a), tuple(b)


def fill_islands(labels: np.ndarray, connectivity: int,
                 exclude: int = 0) -> tuple[np.ndarray, dict[int, int]]:
    """Give enclosed wall components to the region around them; find nested chambers.

    Every voxel takes the label of its nearest region (a Voronoi partition, so walls are
    split half-way and neighbouring regions touch). A region whose only Voronoi neighbour
    is region ``H`` (not the border, the outside or a cut piece) is **nested** in ``H``.
    A wall component (``labels == 0``, wall connectivity) that touches no border, and whose
    voxels touch and are nearest to ``H`` and regions nested in ``H`` only (noise specks
    inside a region; the wall of a capsule inside a capsule), joins ``H``. Labels ``>= exclude``
    (when ``exclude > 0``: the outside and cut pieces) never receive anything.

    Returns the new labels and ``{inner label: host label}``.
    """
    zero = labels == 0
    if not zero.any() or zero.all():
        return labels, {}
    # the label of the nearest labelled voxel: what skimage's expand_labels gives with an
    # unbounded distance, without its float64 distances (int32 indices only; scipy's
    # feature transform, computed on every core)
    index = nearest_feature(zero)
    nearest = labels[tuple(index)]
    del index
    offset = int(labels.max()) + 1
    xs, ys = [], []
    for a, b in _shift_pairs(labels.ndim):
        x, y = nearest[a].ravel(), nearest[b].ravel()
        d = x != y
        xs += [x[d], y[d]]
        ys += [y[d], x[d]]
    for ax in range(labels.ndim):  # the border counts as a neighbour of its own
        for end in (0, -1):
            face = np.unique(np.take(nearest, end, axis=ax))
            xs.append(face)
            ys.append(np.full(face.shape, offset))
    neigh = _neighbour_sets(np.concatenate(xs), np.concatenate(ys))
    blocked = exclude if exclude else offset
    nested = {lab: next(iter(around)) for lab, around in neigh.items()
              if 0 < lab < blocked and len(around) == 1 and 0 < next(iter(around)) < blocked}
    walls, n_walls = ndi.label(zero, ndi.generate_binary_structure(labels.ndim, connectivity))
    on_border = np.zeros(n_walls + 1, bool)
    for ax in range(labels.ndim):
        for end in (0, -1):
            on_border[np.take(walls, end, axis=ax)] = True
    inner = zero & ~on_border[walls]  # only wall components that touch no border can move
    if not inner.any():
        return labels, nested
    ws, ls = [walls[inner]], [nearest[inner]]
    for a, b in _shift_pairs(labels.ndim):  # and the regions each of them touches
        for x, y in ((a, b), (b, a)):
            touch = inner[x] & (labels[y] > 0)
            ws.append(walls[x][touch])
            ls.append(labels[y][touch])
    give = np.zeros(n_walls + 1, labels.dtype)
    for w, labs in _neighbour_sets(np.concatenate(ws), np.concatenate(ls)).items():
        hosts = [h for h in labs if 0 < h < blocked
                 and all(o == h or nested.get(o) == h for o in labs)]
        if len(hosts) == 1:
            give[w] = hosts[0]
    return np.where(zero, give[walls], labels), nested


def _neighbour_sets(x: np.ndarray, y: np.ndarray) -> dict[int, set[int]]:
    """``{a: {b, ...}}`` for the distinct pairs ``(x[i], y[i])`` (one 1D sort of keys)."""
    span = int(max(x.max(initial=0), y.max(initial=0))) + 1
    keys = np.unique(x.astype(np.int64) * span + y.astype(np.int64))
    out: dict[int, set[int]] = {}
    for a, b in zip((keys // span).tolist(), (keys % span).tolist(), strict=True):
        out.setdefault(a, set()).add(b)
    return out
