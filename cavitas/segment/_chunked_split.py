"""The two-class split of a chunked smoothed image, exactly (:func:`class_split_in_chunks`).

:func:`cavitas.segment._evidence.class_split` takes Otsu's threshold of a regular subsample
of the whole image (every ``step``-th voxel in C order, :func:`._evidence.sample_step`) and
of each of its blocks (every ``step``-th voxel of the block, in the block's own C order).
Which voxels those are follows from their coordinates alone, so each chunk task picks the
ones that lie in its chunk, for the whole image and for every block it meets, and returns
their values; the client joins them per part and hands them to
:func:`._evidence.split_of_samples`, the in-memory computation itself. The order the
values arrive in does not matter: the threshold comes from a histogram and the class medians
from order statistics. One pass over the chunks; the client holds the subsamples, at most
about 2**19 values per part (65 parts in 3D).

Without a region of interest only: inside one, a voxel's place in the subsample depends
on how many ROI voxels come before it in C order, which this pass does not count.
"""

from __future__ import annotations

import itertools
from typing import Any

import numpy as np

from ._evidence import ClassSplit, sample_step, split_blocks, split_of_samples

__all__ = ["class_split_in_chunks"]


def class_split_in_chunks(smoothed: Any) -> ClassSplit:
    """:func:`cavitas.segment._evidence.class_split` of a Dask array (no ROI), equal to the
    in-memory one.

    Examples
    --------
    >>> import dask.array as da
    >>> from cavitas.segment._evidence import class_split
    >>> img = np.random.default_rng(0).random((70, 50)).astype(np.float32)
    >>> img[::9] += 1
    >>> got, want = class_split_in_chunks(da.from_array(img, chunks=(13, 7))), class_split(img)
    >>> bool(np.array_equal(got.grid, want.grid)) and got.whole == want.whole
    True
    """
    import dask

    shape = tuple(int(n) for n in smoothed.shape)
    parts = _parts(shape)
    steps = [sample_step(int(np.prod([b - a for a, b in part]))) for part in parts]
    starts = [np.r_[0, np.cumsum(sizes)] for sizes in smoothed.chunks]
    tasks = []
    for index, block in zip(itertools.product(*(range(len(c)) for c in smoothed.chunks)),
                            smoothed.to_delayed().ravel(), strict=True):
        box = tuple((int(s[i]), int(s[i + 1])) for s, i in zip(starts, index, strict=True))
        tasks.append(dask.delayed(_chunk_samples, pure=True)(block, box, parts, steps))
    gathered = dask.compute(tasks)[0]
    samples = {part: np.concatenate([chunk[k] for chunk in gathered])
               for k, part in enumerate(parts)}

    def sample_of(part: tuple[slice, ...]) -> np.ndarray:
        return samples[tuple(s.indices(n)[:2] for s, n in zip(part, shape, strict=True))]

    return split_of_samples(shape, sample_of)


def _parts(shape: tuple[int, ...]) -> list[tuple[tuple[int, int], ...]]:
    """The whole image and the blocks of :func:`._evidence.split_blocks`, as (start, stop)
    per axis."""
    block, counts = split_blocks(shape)
    parts = [tuple((0, n) for n in shape)]
    for idx in np.ndindex(*counts):
        parts.append(tuple((i * b, min((i + 1) * b, n))
                           for i, b, n in zip(idx, block, shape, strict=True)))
    return parts


def _chunk_samples(block: np.ndarray, box: tuple[tuple[int, int], ...],
                   parts: list[tuple[tuple[int, int], ...]],
                   steps: list[int]) -> list[np.ndarray]:
    """Per part: the values of the chunk ``block`` (at ``box`` in the image) that the part's
    regular subsample takes (empty where the part misses the chunk)."""
    block = np.asarray(block)
    out = []
    for part, step in zip(parts, steps, strict=True):
        lo = [max(a, p) for (a, _), (p, _) in zip(box, part, strict=True)]
        hi = [min(b, q) for (_, b), (_, q) in zip(box, part, strict=True)]
        if any(h <= low for low, h in zip(lo, hi, strict=True)):
            out.append(np.empty(0, block.dtype))
            continue
        # flat index of each voxel of the overlap in the part's own C order
        sizes = [q - p for p, q in part]
        strides = np.cumprod([1, *sizes[::-1]])[:-1][::-1]
        flat = np.zeros([h - low for low, h in zip(lo, hi, strict=True)], np.int64)
        for axis, (low, h, (p, _), stride) in enumerate(zip(lo, hi, part, strides,
                                                            strict=True)):
            shape = [1] * flat.ndim
            shape[axis] = h - low
            flat += (np.arange(low - p, h - p, dtype=np.int64) * int(stride)).reshape(shape)
        here = block[tuple(slice(low - a, h - a)
                           for low, h, (a, _) in zip(lo, hi, box, strict=True))]
        out.append(here[flat % step == 0])
    return out
