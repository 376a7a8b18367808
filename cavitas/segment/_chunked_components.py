"""Connected components of a chunked boolean volume, chunk by chunk (:func:`label_in_chunks`).

The labels equal ``scipy.ndimage.label`` of the whole volume (same connectivity), number for
number, and no step holds more than one chunk of voxels:

1. Each chunk is labelled alone (a *piece* per local component) and reports, per piece, the
   global flat index of its first voxel: in C order local flat indices sort like global
   ones, so that is the piece's smallest global index.
2. Each chunk's faces, framed by the faces of the chunks around it (corners included),
   give the pairs of different pieces that touch across a seam: two neighbouring voxels in
   different chunks both lie on a face of their own chunk, next to each other.
3. The client joins the pieces along those pairs (a graph of the pieces only, not of the
   voxels) and numbers each component by its smallest flat index: ``scipy.ndimage.label``
   numbers components in the raster order of their first voxel.
4. Each chunk is labelled again and relabelled through its own slice of the table.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import ndimage as ndi
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

__all__ = ["ChunkedComponents", "label_in_chunks"]

#: A piece's key: chunk number in the high bits, its local label in the low ones.
_LOCAL_BITS = 32


@dataclass(frozen=True)
class ChunkedComponents:
    """The components of a chunked volume: a lazy label map and how many there are."""

    labels: Any   # dask.array.Array of int32, chunked like the input; 0 outside the mask
    count: int


@dataclass(frozen=True)
class _Pieces:
    """One chunk's local components: where each starts, and the keys on the chunk's faces."""

    first: np.ndarray                  # int64: global flat index of each one's first voxel
    shape: tuple[int, ...]             # the chunk's shape
    faces: dict[tuple[int, int], np.ndarray]  # (axis, -1 low / 1 high): keys on that face


def label_in_chunks(mask: Any, connectivity: int = 1) -> ChunkedComponents:
    """``scipy.ndimage.label`` of a Dask boolean array, computed chunk by chunk.

    Parameters
    ----------
    mask : dask.array.Array of bool
        The voxels to group; its chunks are the units of work.
    connectivity : int
        Neighbours within this many orthogonal steps are joined
        (``scipy.ndimage.generate_binary_structure(ndim, connectivity)``).

    Returns
    -------
    ChunkedComponents
        ``labels`` equals ``ndi.label(mask.compute(), structure)[0]``; ``count`` its number.

    Notes
    -----
    Runs on Dask's current scheduler (a ``distributed.Client``'s workers if one is active).
    A worker holds one chunk with its labels (and a frame one voxel wider, of face
    voxels); what passes between tasks is each chunk's faces and pieces. The client holds
    one entry per piece (a component cut by ``k`` chunks is ``k`` pieces) and the seam
    pairs.

    Examples
    --------
    >>> import dask.array as da
    >>> ring = np.ones((5, 5), bool); ring[1:4, 1:4] = False; ring[2, 2] = True
    >>> found = label_in_chunks(da.from_array(ring, chunks=2))
    >>> found.count, found.labels.compute()[2].tolist()
    (2, [1, 0, 2, 0, 1])
    """
    import dask
    import dask.array as da
    from dask import delayed

    structure = ndi.generate_binary_structure(mask.ndim, connectivity)
    grid = tuple(mask.numblocks)
    blocks = mask.to_delayed()
    pieces = np.empty(grid, object)
    for index in np.ndindex(*grid):
        pieces[index] = delayed(_chunk_pieces, pure=True)(
            blocks[index], structure, int(np.ravel_multi_index(index, grid)),
            _origin(mask.chunks, index), tuple(mask.shape))
    offsets = _forward_offsets(structure)
    touching = [delayed(_touching_pairs, pure=True)(pieces[index], _neighbours(pieces, index),
                                                     offsets)
                for index in np.ndindex(*grid)]
    computed = dask.compute(list(pieces.ravel()), touching)
    found: list[_Pieces] = computed[0]
    pairs = np.concatenate([np.empty((0, 2), np.int64), *computed[1]])
    tables, count = _number_components(found, pairs)
    relabelled = np.empty(grid, object)
    for i, index in enumerate(np.ndindex(*grid)):
        shape = tuple(mask.chunks[axis][k] for axis, k in enumerate(index))
        part = delayed(_relabel, pure=True)(blocks[index], structure, tables[i])
        relabelled[index] = da.from_delayed(part, shape=shape, dtype=np.int32)
    return ChunkedComponents(da.block(relabelled.tolist()), count)


def _origin(chunks: tuple[tuple[int, ...], ...], index: tuple[int, ...]) -> tuple[int, ...]:
    """Global coordinates of the first voxel of the chunk at ``index``."""
    return tuple(int(sum(sizes[:k])) for sizes, k in zip(chunks, index, strict=True))


def _chunk_pieces(block: np.ndarray, structure: np.ndarray, number: int,
                  origin: tuple[int, ...], shape: tuple[int, ...]) -> _Pieces:
    """One chunk labelled alone: its pieces' first voxels and its faces' keys."""
    local, _ = ndi.label(block, structure)
    labels, first = np.unique(local.ravel(), return_index=True)
    first = first[labels > 0]
    coords = np.unravel_index(first, local.shape)
    global_coords = tuple(c + o for c, o in zip(coords, origin, strict=True))
    faces = {}
    for axis in range(local.ndim):
        for side, end in ((-1, 0), (1, -1)):
            plane = np.take(local, end, axis=axis).astype(np.int64)
            plane[plane > 0] += np.int64(number) << _LOCAL_BITS
            faces[axis, side] = plane
    return _Pieces(np.ravel_multi_index(global_coords, shape).astype(np.int64),
                   local.shape, faces)


def _neighbours(pieces: np.ndarray, index: tuple[int, ...]) -> dict[tuple[int, ...], Any]:
    """The chunks around ``index`` (diagonal ones too), by their offset from it."""
    around = {}
    for step in np.ndindex(*(3,) * len(index)):
        delta = tuple(s - 1 for s in step)
        other = tuple(i + d for i, d in zip(index, delta, strict=True))
        if any(delta) and all(0 <= o < n for o, n in zip(other, pieces.shape, strict=True)):
            around[delta] = pieces[other]
    return around


def _frame(own: _Pieces, around: dict[tuple[int, ...], _Pieces]) -> np.ndarray:
    """A chunk one voxel wider on every side, holding only face voxels' keys: its own and
    its neighbours' next to it (0 elsewhere, and beyond the volume)."""
    ndim = len(own.shape)
    frame = np.zeros(tuple(n + 2 for n in own.shape), np.int64)
    inner = tuple(slice(1, n + 1) for n in own.shape)
    for (axis, side), plane in own.faces.items():
        index: list[Any] = list(inner)
        index[axis] = 1 if side < 0 else own.shape[axis]
        frame[tuple(index)] = plane
    for delta, other in around.items():
        axis = next(a for a in range(ndim) if delta[a])  # a face of theirs holds the part
        plane = other.faces[axis, -delta[axis]]
        take = tuple(slice(None) if d == 0 else (0 if d > 0 else -1)
                     for a, d in enumerate(delta) if a != axis)
        put = tuple(inner[a] if d == 0 else (0 if d < 0 else own.shape[a] + 1)
                    for a, d in enumerate(delta))
        frame[put] = plane[take]
    return frame


def _forward_offsets(structure: np.ndarray) -> list[tuple[int, ...]]:
    """The neighbour steps of ``structure`` that come later in raster order."""
    centre = np.array(structure.shape) // 2
    steps = [tuple(int(v) for v in np.array(p) - centre) for p in zip(*np.nonzero(structure),
                                                                      strict=True)]
    return [s for s in steps if s > (0,) * structure.ndim]


def _touching_pairs(own: _Pieces, around: dict[tuple[int, ...], _Pieces],
                    offsets: list[tuple[int, ...]]) -> np.ndarray:
    """Distinct pairs of different pieces that are neighbours across this chunk's sides."""
    keys = _frame(own, around)
    found = [np.empty((0, 2), np.int64)]
    for step in offsets:
        a = tuple(slice(0, n - s) if s >= 0 else slice(-s, n)
                  for n, s in zip(keys.shape, step, strict=True))
        b = tuple(slice(s, n) if s >= 0 else slice(0, n + s)
                  for n, s in zip(keys.shape, step, strict=True))
        x, y = keys[a], keys[b]
        meet = (x > 0) & (y > 0) & (x != y)
        found.append(np.stack([x[meet], y[meet]], axis=1))
    return np.unique(np.concatenate(found), axis=0)


def _number_components(pieces: list[_Pieces], pairs: np.ndarray
                       ) -> tuple[list[np.ndarray], int]:
    """Per chunk, the final label of each local piece; and the number of components."""
    sizes = np.array([p.first.size for p in pieces], np.int64)
    start = np.concatenate([[0], np.cumsum(sizes)])
    total = int(start[-1])
    if total == 0:
        return [np.zeros(0, np.int32) for _ in pieces], 0

    def index(key: np.ndarray) -> np.ndarray:
        return start[key >> _LOCAL_BITS] + (key & ((1 << _LOCAL_BITS) - 1)) - 1

    a, b = index(pairs[:, 0]), index(pairs[:, 1])
    graph = coo_matrix((np.ones(a.size, np.int8), (a, b)), shape=(total, total))
    count, component = connected_components(graph, directed=False)
    first = np.full(count, np.iinfo(np.int64).max)
    np.minimum.at(first, component, np.concatenate([p.first for p in pieces]))
    number = np.empty(count, np.int32)
    number[np.argsort(first)] = np.arange(1, count + 1, dtype=np.int32)
    final = number[component]
    return [final[start[i]:start[i + 1]] for i in range(len(pieces))], int(count)


def _relabel(block: np.ndarray, structure: np.ndarray, table: np.ndarray) -> np.ndarray:
    """One chunk's final labels: its local components through its slice of the table."""
    local, _ = ndi.label(block, structure)
    return np.concatenate([[0], table]).astype(np.int32)[local]
