"""Persistence of a chunked volume, chunk by chunk on Dask workers (:func:`chunked_persistence`).

The plan
--------
1. Every chunk is swept on a worker (:func:`._boundary.sweep_chunk`): it settles the pairs
   that no other chunk can change and reduces the rest to a boundary tree per sweep.
2. Neighbouring boxes are joined pairwise along one axis at a time
   (:func:`._boundary.join_boxes`), always along the axis with the most boxes left, in a
   tree of joins (:func:`join_in_pairs`) until one box is the whole volume; each join runs
   on a worker and holds two boxes' boundary trees only.
3. The client gathers the settled pairs of every step, the diagram, and sorts them as the
   in-memory engine does.

The pairs are exactly those of the in-memory run, every level and voxel (the argument is in
:mod:`._seam_kernels`; ``tests/test_persistence_chunked.py`` checks it).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import Any, TypeVar

import numpy as np

from .. import _checks
from .._errors import ParameterError
from ._boundary import Box, PairRows, Summary, SweepPlan, join_boxes, sweep_chunk
from ._diagram import Diagram
from ._neighbors import check_connectivity, grid_shape3
from ._sort import supported

__all__ = ["as_dask_array", "chunk_window", "chunked_persistence", "is_chunked",
           "join_in_pairs", "lazy_image", "lazy_mask_blocks", "persistence_in_chunks",
           "swept_here", "swept_on_dask"]

Item = TypeVar("Item")


def is_chunked(image: Any) -> bool:
    """Whether ``image`` is a lazily read chunked array: a Dask array, a Zarr array or an
    HDF5 dataset (read chunk by chunk rather than loaded)."""
    kind = type(image).__module__.split(".")[0]
    return kind in ("dask", "zarr", "h5py")


class _HDF5Slab:
    """An HDF5 dataset named by file and path, opened anew by each read (so a Dask task
    that reads a chunk can be sent to another process, which an open dataset cannot)."""

    def __init__(self, path: str, name: str, shape: tuple[int, ...], dtype: np.dtype) -> None:
        self.path, self.name, self.shape, self.dtype = path, name, shape, dtype
        self.ndim = len(shape)

    def __getitem__(self, where: Any) -> np.ndarray:
        import h5py

        with h5py.File(self.path, "r") as handle:
            return handle[self.name][where]


def as_dask_array(image: Any) -> Any:
    """``image`` (Dask array, Zarr array or HDF5 dataset) as a Dask array of the same
    chunks (an unchunked HDF5 dataset is read in 64-plane slabs)."""
    import dask.array as da

    kind = type(image).__module__.split(".")[0]
    if kind == "dask":
        return image
    if kind == "zarr":
        return da.from_zarr(image)
    if kind == "h5py":
        slab = _HDF5Slab(image.file.filename, image.name, tuple(image.shape), image.dtype)
        chunks = image.chunks or (64,) + tuple(image.shape[1:])
        return da.from_array(slab, chunks=chunks, asarray=True, fancy=False)
    raise ParameterError(f"image must be a Dask, Zarr or HDF5 array; got {type(image).__name__}.")


def join_in_pairs(items: np.ndarray, join: Callable[[Item, Item, int], Item]) -> Item:
    """Join a 3D grid of boxes into one, two neighbours at a time.

    Each round joins along the axis with the most boxes left (the first such axis): boxes
    ``2i`` and ``2i + 1``; an odd last box waits for the next round. ``join(low, high,
    axis)`` returns the joined item; ``items`` is an object array of shape (cz, cy, cx).

    Examples
    --------
    >>> grid = np.array([["a", "b", "c"]], object).reshape(1, 1, 3)
    >>> join_in_pairs(grid, lambda lo, hi, axis: f"({lo}{hi})")
    '((ab)c)'
    """
    while items.size > 1:
        axis = int(np.argmax(items.shape))
        count = items.shape[axis]
        shape = list(items.shape)
        shape[axis] = (count + 1) // 2
        out = np.empty(shape, object)
        for idx in np.ndindex(*shape):
            low = idx[:axis] + (2 * idx[axis],) + idx[axis + 1:]
            if 2 * idx[axis] + 1 < count:
                high = idx[:axis] + (2 * idx[axis] + 1,) + idx[axis + 1:]
                out[idx] = join(items[low], items[high], axis)
            else:
                out[idx] = items[low]
        items = out
    return items.reshape(-1)[0]


def _boxes(chunks: Sequence[Sequence[int]], ndim: int) -> np.ndarray:
    """The box of every chunk, as a (cz, cy, cx) object array (one z chunk in 2D)."""
    chunks = [list(c) for c in chunks]
    if ndim == 2:
        chunks = [[1]] + chunks
    edges = [np.concatenate(([0], np.cumsum(c))).astype(int) for c in chunks]
    boxes = np.empty(tuple(len(c) for c in chunks), object)
    for idx in np.ndindex(*boxes.shape):
        boxes[idx] = Box.spanning([edges[a][i] for a, i in enumerate(idx)],
                                  [edges[a][i + 1] for a, i in enumerate(idx)])
    return boxes


def _plan(shape: tuple[int, ...], dtype: Any, walls: str, connectivity: object,
          dims: tuple[int, ...]) -> SweepPlan:
    ndim = len(shape)
    if ndim not in (2, 3):
        raise ParameterError(
            f"image must be a 2D or 3D array; got {ndim} dimension(s), shape {shape}.")
    if int(np.prod(shape)) == 0:
        raise ParameterError(f"image must hold at least one voxel; got shape {shape}.")
    dtype = np.dtype(dtype)
    if not (supported(dtype.newbyteorder("=")) or dtype.kind == "f"):
        raise ParameterError(f"image must have an integer or float dtype; got {dtype}.")
    _checks.walls(walls)
    conn = check_connectivity(ndim, connectivity)
    return SweepPlan(shape=grid_shape3(shape), walls=walls, connectivity=conn, ndim=ndim,
                     h0=0 in dims, cavities=ndim - 1 in dims)


def _diagram(parts: Sequence[PairRows], root: Summary, plan: SweepPlan,
             masked: bool) -> Diagram:
    """The diagram from every step's settled pairs, in the in-memory engine's row order
    (or the refusal of non-finite values, counted over the whole volume)."""
    from ._persistence import _sorted_rows

    _checks.refuse_nonfinite(root.nonfinite, image=plan.name, masked=masked)
    pairs = {}
    for dim, wanted in ((0, plan.h0), (plan.ndim - 1, plan.cavities)):
        if wanted:
            rows = np.concatenate([p.h0 if dim == 0 else p.cavities for p in parts])
            # the in-memory engine lists cavities of one breach by core (its node order)
            rows = rows[np.argsort(rows["death_voxel"], kind="stable")]
            pairs[dim] = _sorted_rows(rows)
    shape = plan.shape if plan.ndim == 3 else plan.shape[1:]
    return Diagram(pairs, shape=shape, walls=plan.walls, connectivity=plan.connectivity,
                   masked=masked)


def persistence_in_chunks(image: np.ndarray, chunks: Sequence[Sequence[int]], *,
                          walls: str = "bright", connectivity: int = 1,
                          mask: np.ndarray | None = None,
                          dims: tuple[int, ...] | None = None) -> Diagram:
    """The chunked computation in this process, one chunk after the other (no Dask).

    ``chunks`` lists the chunk sizes per axis, as Dask does. For tests and small runs:
    it gives the same diagram as :func:`chunked_persistence` with the same chunks.

    Examples
    --------
    >>> import numpy as np
    >>> ring = np.zeros((5, 5), np.uint8); ring[1:4, 1:4] = 9; ring[2, 2] = 1
    >>> dgm = persistence_in_chunks(ring, ((2, 1, 2), (3, 2)))
    >>> dgm.pairs(1)[["birth", "death"]].tolist()
    [(9.0, 1.0)]
    """
    image = np.asarray(image)
    wanted = _dims(dims, image.ndim)
    plan = _plan(image.shape, image.dtype, walls, connectivity, wanted)
    parts, root = swept_here(image, mask, chunks, plan)
    return _diagram(parts, root, plan, mask is not None)


def chunk_window(box: Box, plan: SweepPlan) -> tuple[slice, ...]:
    """The slices of the image that ``box`` covers (2D images: without the z axis)."""
    where = tuple(slice(lo, hi) for lo, hi in zip(box.start, box.stop, strict=True))
    return where if plan.ndim == 3 else where[1:]


def swept_here(image: np.ndarray, mask: np.ndarray | None, chunks: Sequence[Sequence[int]],
               plan: SweepPlan) -> tuple[list[PairRows], Summary]:
    """Every chunk swept and every join made in this process: the settled rows of each
    step (the chunks first, in :func:`_boxes` order) and the last summary."""
    boxes = _boxes(chunks, image.ndim)
    parts: list[PairRows] = []
    summaries = np.empty(boxes.shape, object)
    for idx in np.ndindex(*boxes.shape):
        where = chunk_window(boxes[idx], plan)
        swept = sweep_chunk(image[where], None if mask is None else mask[where], boxes[idx],
                            plan)
        parts.append(swept.rows)
        summaries[idx] = swept.summary

    def join(low: Summary, high: Summary, axis: int) -> Summary:
        swept = join_boxes(low, high, axis, plan)
        parts.append(swept.rows)
        return swept.summary

    root = join_in_pairs(summaries, join)
    return parts, root


def _dims(dims: Any, ndim: int) -> tuple[int, ...]:
    from ._persistence import _check_dims

    wanted = _check_dims(dims, ndim)
    if ndim == 3 and 1 in wanted:
        raise ParameterError("dims: H1 (tunnels and loops) of a volume read in chunks is not "
                             "available yet; ask for dims (0, 2), or compute it in memory "
                             "from a NumPy array.", parameters=("dims",))
    return wanted


def _chunk_task(block: np.ndarray, mask: np.ndarray | None, box: Box,
                plan: SweepPlan) -> tuple[PairRows, Summary]:
    swept = sweep_chunk(block, mask, box, plan)
    return swept.rows, swept.summary


def _join_task(low: Summary, high: Summary, axis: int,
               plan: SweepPlan) -> tuple[PairRows, Summary]:
    swept = join_boxes(low, high, axis, plan)
    return swept.rows, swept.summary


def chunked_persistence(image: Any, *, walls: str = "bright", connectivity: int = 1,
                        mask: Any = None, dims: Any = None) -> Diagram:
    """:func:`~cavitas.cubical.persistence` of a chunked array, computed chunk by chunk.

    Parameters
    ----------
    image : Dask array, Zarr array or HDF5 dataset
        Read one chunk per task, never whole; its chunks are the units of work.
    walls, connectivity, dims
        As for :func:`~cavitas.cubical.persistence`.
    mask : bool array of the image's shape, optional
        Any array Dask can chunk like the image (a NumPy array, a Dask or Zarr array).

    Returns
    -------
    Diagram
        Equal, row for row, to ``persistence(numpy.asarray(image), ...)``.

    Notes
    -----
    The tasks run on Dask's current scheduler: the workers of a ``distributed.Client`` if
    one is active, else local threads. A worker holds one chunk and its sweep's arrays
    (about 13 bytes per voxel beyond the chunk) or two boxes' boundary trees; the client
    holds the pairs.

    Examples
    --------
    >>> import dask.array as da, numpy as np
    >>> ring = np.zeros((5, 5), np.uint8); ring[1:4, 1:4] = 9; ring[2, 2] = 1
    >>> dgm = chunked_persistence(da.from_array(ring, chunks=2))
    >>> dgm.pairs(1)[["birth", "death"]].tolist()
    [(9.0, 1.0)]
    """
    image = lazy_image(image)
    wanted = _dims(dims, image.ndim)
    plan = _plan(tuple(image.shape), image.dtype, walls, connectivity, wanted)
    computed = swept_on_dask(image, lazy_mask_blocks(mask, image), plan)
    return _diagram(computed[:-1], computed[-1], plan, mask is not None)


def lazy_image(image: Any) -> Any:
    """``image`` as a Dask array without empty chunks (slicing leaves them)."""
    image = as_dask_array(image)
    if any(0 in sizes for sizes in image.chunks):
        image = image.rechunk(tuple(tuple(c for c in sizes if c) or (0,)
                                    for sizes in image.chunks))
    return image


def lazy_mask_blocks(mask: Any, image: Any) -> np.ndarray | None:
    """``mask`` (checked as in memory) as one delayed block per chunk of ``image``, in
    :func:`_boxes` order; None stays None."""
    if mask is None:
        return None
    return _checked_mask(mask, tuple(image.shape), image.chunks).to_delayed().reshape(-1)


def swept_on_dask(image: Any, masks: np.ndarray | None, plan: SweepPlan) -> list[Any]:
    """Every chunk swept and every join made on Dask's scheduler: the settled rows of each
    step (the chunks first, in :func:`_boxes` order), then the last summary."""
    import dask
    from dask import delayed

    boxes = _boxes(image.chunks, image.ndim)
    blocks = image.to_delayed().reshape(-1)
    sweep = delayed(_chunk_task, nout=2, pure=True)
    join = delayed(_join_task, nout=2, pure=True)
    parts = []
    summaries = np.empty(boxes.shape, object)
    for i, idx in enumerate(np.ndindex(*boxes.shape)):
        rows, summaries[idx] = sweep(blocks[i], None if masks is None else masks[i],
                                     boxes[idx], plan)
        parts.append(rows)

    def joined(low: Any, high: Any, axis: int) -> Any:
        rows, summary = join(low, high, axis, plan)
        parts.append(rows)
        return summary

    root = join_in_pairs(summaries, joined)
    return list(dask.compute(*parts, root))


def _checked_mask(mask: Any, shape: tuple[int, ...], chunks: Any) -> Any:
    """``mask`` as a Dask boolean array chunked like the image; checked as in memory."""
    import dask.array as da

    lazy = as_dask_array(mask) if is_chunked(mask) else da.from_array(np.asarray(mask))
    if tuple(lazy.shape) != shape:
        raise ParameterError(f"mask must have the image's shape {shape}; got {lazy.shape}.")
    if lazy.dtype != np.bool_:
        raise ParameterError(f"mask must be a boolean array; got dtype {lazy.dtype}.")
    if not bool(lazy.any().compute()):
        raise ParameterError("mask selects no voxel; expected at least one True value.")
    return lazy.rechunk(chunks)
