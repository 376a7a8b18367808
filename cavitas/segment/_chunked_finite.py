"""NaN and infinite values of a chunked float image, treated as :func:`cavitas.segment.segment`
treats them in memory (:func:`fill_outside_in_chunks`).

In memory (``_segment._fill_outside``) non-finite values outside the region of interest are
replaced, before smoothing, by the finite extreme inside it on the regions' side (the
minimum for bright walls, the maximum for dark ones), and non-finite values inside it (or
anywhere, without one) are refused. Here one pass over the chunks counts the non-finite
voxels inside and outside the mask and finds each chunk's extremes inside it; the client
combines them (a count is a sum, an extreme the extreme of the chunks' extremes, so the
value is the in-memory one exactly); the replacement is then one elementwise step per
chunk, in the chunks' own tasks.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .._checks import refuse_nonfinite

__all__ = ["fill_outside_in_chunks"]


@dataclass(frozen=True)
class FiniteSummary:
    """What one chunk (or the whole image, once combined) holds for the replacement."""

    nonfinite: int               # NaN or infinite voxels anywhere
    nonfinite_inside: int        # of those, inside the mask (all of them without a mask)
    low: Any                     # smallest value inside the mask, None when none is inside
    high: Any                    # largest value inside the mask, None when none is inside

    @staticmethod
    def combined(parts: list[FiniteSummary]) -> FiniteSummary:
        """The summary of the chunks together."""
        lows = [part.low for part in parts if part.low is not None]
        highs = [part.high for part in parts if part.high is not None]
        return FiniteSummary(sum(part.nonfinite for part in parts),
                             sum(part.nonfinite_inside for part in parts),
                             min(lows) if lows else None, max(highs) if highs else None)


def fill_outside_in_chunks(image: Any, mask: Any, name: str, *, walls: str) -> Any:
    """``image`` (a Dask array) with its non-finite values outside ``mask`` replaced as in
    memory; a non-finite value inside it (or anywhere, when ``mask`` is None) is refused.

    Parameters
    ----------
    image : dask.array.Array
        The image; integer images are returned as they are (they hold no NaN).
    mask : dask.array.Array of bool or None
        The region of interest, in any chunks.
    name : str
        The file, as the message names it (in quotes, as ``segment`` does).
    walls : {"bright", "dark"}
        Which side the replacement takes: the minimum inside the mask for bright walls, the
        maximum for dark ones (the smoothing then spreads no wall from outside into it).

    Returns
    -------
    dask.array.Array
        ``image`` itself when every value is finite (as in memory, no copy), else the
        replaced image, chunked like ``image``, in its type.

    Raises
    ------
    InputFileError
        The one sentence ``segment`` gives for non-finite values inside the mask.

    Examples
    --------
    >>> import dask.array as da
    >>> values = np.array([[np.nan, 2.0, 5.0], [1.0, 3.0, np.inf]])
    >>> inside = da.from_array(np.array([[0, 1, 1], [1, 1, 0]], bool), chunks=2)
    >>> fill_outside_in_chunks(da.from_array(values, chunks=2), inside, "a.zarr",
    ...                        walls="bright").compute().tolist()
    [[1.0, 2.0, 5.0], [1.0, 3.0, 1.0]]
    """
    import dask

    if image.dtype.kind != "f":
        return image
    blocks = image.to_delayed().ravel()
    masks = ([None] * len(blocks) if mask is None
             else mask.rechunk(image.chunks).to_delayed().ravel())
    summarise = dask.delayed(_summary, pure=True)
    whole = FiniteSummary.combined(list(dask.compute(
        *[summarise(block, inside) for block, inside in zip(blocks, masks, strict=True)])))
    if not whole.nonfinite:
        return image
    refuse_nonfinite(whole.nonfinite_inside, image=f"'{name}'", masked=mask is not None)
    extreme = whole.low if walls == "bright" else whole.high
    fill = image.dtype.type(0 if extreme is None else extreme)
    return image.map_blocks(_filled, fill, dtype=image.dtype)


def _summary(block: np.ndarray, inside: np.ndarray | None) -> FiniteSummary:
    """The :class:`FiniteSummary` of one chunk (``inside``: its part of the mask)."""
    finite = np.isfinite(block)
    nonfinite = int(finite.size - np.count_nonzero(finite))
    if inside is None:
        values = block[finite]
        nonfinite_inside = nonfinite
    else:
        values = block[inside & finite]
        nonfinite_inside = int(np.count_nonzero(inside & ~finite))
    if not values.size:
        return FiniteSummary(nonfinite, nonfinite_inside, None, None)
    return FiniteSummary(nonfinite, nonfinite_inside, values.min(), values.max())


def _filled(block: np.ndarray, fill: Any) -> np.ndarray:
    """One chunk with its non-finite values replaced by ``fill``."""
    return np.where(np.isfinite(block), block, fill).astype(block.dtype, copy=False)
