"""Turn image slices into display pixels: intensity window, block downsampling, outlines.

Every picture of the report (static slice plots and the slice browser frames) is drawn from
:func:`render_slice`, so they all look alike. Outlines are two-tone: a light tone around
regions that lie on dark pixels and a dark tone around those on bright pixels, so they stand
out by lightness and stay readable in grey print or for colour-blind readers, not by hue.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

__all__ = [
    "OUTLINE_DARK",
    "OUTLINE_LIGHT",
    "block_reduce",
    "intensity_window",
    "outline_mask",
    "render_slice",
    "take_slice",
    "to_rgb",
]

#: Outline tone drawn over dark pixels (a pale amber) and over bright pixels (a deep teal).
OUTLINE_LIGHT = (255, 214, 102)
OUTLINE_DARK = (18, 70, 92)


def intensity_window(image: np.ndarray, *, low: float = 0.5, high: float = 99.5,
                     max_samples: int = 2_000_000) -> tuple[float, float]:
    """Robust display range of ``image``: its ``low`` and ``high`` percentiles.

    At most about ``max_samples`` voxels are read (a regular stride), so a large memory
    map is not loaded whole. Non-finite values are ignored.

    Examples
    --------
    >>> import numpy as np
    >>> intensity_window(np.arange(1001.0))
    (5.0, 995.0)
    """
    step = max(1, int(np.ceil((image.size / max_samples) ** (1.0 / image.ndim))))
    sample = np.asarray(image[(slice(None, None, step),) * image.ndim], dtype=np.float64)
    sample = sample[np.isfinite(sample)]
    if sample.size == 0:
        return 0.0, 1.0
    lo, hi = np.percentile(sample, [low, high])
    if not hi > lo:
        lo, hi = float(sample.min()), float(sample.max())
    if not hi > lo:
        hi = lo + 1.0
    return float(lo), float(hi)


def take_slice(array: np.ndarray, axis: int, index: int) -> np.ndarray:
    """The 2D plane ``index`` across ``axis`` of a 3D array (the array itself in 2D)."""
    if array.ndim == 2:
        return np.asarray(array)
    return np.asarray(np.take(array, int(index), axis=axis))


def block_reduce(plane: np.ndarray, factor: int, *, how: str = "mean") -> np.ndarray:
    """Shrink a 2D plane by an integer ``factor`` per side (edge-padded blocks).

    ``how`` is ``"mean"`` (intensities) or ``"max"`` (masks: a block is set if any pixel is).

    Examples
    --------
    >>> import numpy as np
    >>> block_reduce(np.arange(16.0).reshape(4, 4), 2)
    array([[ 2.5,  4.5],
           [10.5, 12.5]])
    """
    if factor <= 1:
        return plane
    h, w = plane.shape
    ph, pw = -h % factor, -w % factor
    padded = np.pad(plane, ((0, ph), (0, pw)), mode="edge")
    blocks = padded.reshape(padded.shape[0] // factor, factor, padded.shape[1] // factor, factor)
    return blocks.max(axis=(1, 3)) if how == "max" else blocks.mean(axis=(1, 3))


def outline_mask(labels: np.ndarray) -> np.ndarray:
    """Pixels of each region that touch another label or the background (inner outline).

    A pixel is on the outline when a face neighbour inside the array carries another
    label: what :func:`skimage.segmentation.find_boundaries` gives with ``mode="inner"``
    (restricted to the regions), by one comparison per axis.

    Examples
    --------
    >>> import numpy as np
    >>> lab = np.zeros((5, 5), int); lab[1:4, 1:4] = 1
    >>> int(outline_mask(lab).sum())
    8
    """
    labels = np.asarray(labels)
    edge = np.zeros(labels.shape, dtype=bool)
    for axis in range(labels.ndim):
        before = [slice(None)] * labels.ndim
        after = [slice(None)] * labels.ndim
        before[axis], after[axis] = slice(None, -1), slice(1, None)
        differ = labels[tuple(before)] != labels[tuple(after)]
        edge[tuple(before)] |= differ
        edge[tuple(after)] |= differ
    return edge & (labels != 0)


def render_slice(plane: np.ndarray, label_plane: np.ndarray | None,
                 window: Sequence[float], *, factor: int = 1,
                 levels: int = 256) -> tuple[np.ndarray, np.ndarray]:
    """Grey levels and an outline code for one plane, reduced by ``factor``.

    Parameters
    ----------
    plane : (H, W) array
        Image intensities.
    label_plane : (H, W) int array or None
        Region labels of the same plane (0 = none); ``None`` draws no outlines.
    window : (low, high)
        Intensities mapped to black and white.
    factor : int
        Block size of the downsampling (1 = full resolution).
    levels : int
        Number of grey levels kept (fewer levels compress better).

    Returns
    -------
    grey : (h, w) uint8
        Grey value index in ``[0, levels)``.
    outline : (h, w) uint8
        0 = no outline, 1 = light tone, 2 = dark tone. Each region's outline takes one
        tone: light when the pixels under it are dark on average, dark when bright (an
        outline lies on the flank of the wall, so the wall's tone decides, not the inside).

    Examples
    --------
    >>> import numpy as np
    >>> img = np.zeros((6, 6)); img[0, :] = 1.0
    >>> lab = np.zeros((6, 6), int); lab[2:5, 2:5] = 1
    >>> grey, code = render_slice(img, lab, (0.0, 1.0))
    >>> int(grey.max()), int((code == 1).sum())
    (255, 8)
    """
    lo, hi = float(window[0]), float(window[1])
    scaled = (np.asarray(plane, dtype=np.float64) - lo) / (hi - lo if hi > lo else 1.0)
    scaled = np.nan_to_num(scaled, nan=0.0)
    code = np.zeros(scaled.shape, dtype=np.uint8)
    if label_plane is not None:
        edges = outline_mask(label_plane)
        if edges.any():  # one tone per region, against the mean grey under its outline
            owners, which = np.unique(label_plane[edges], return_inverse=True)
            mean = np.bincount(which, scaled[edges]) / np.bincount(which)
            code[edges] = np.where(mean < 0.5, 1, 2).astype(np.uint8)[which]
    grey = block_reduce(scaled, factor)
    grey = np.clip(np.floor(grey * levels), 0, levels - 1).astype(np.uint8)
    return grey, block_reduce(code, factor, how="max")

def to_rgb(grey: np.ndarray, code: np.ndarray, *, levels: int = 256) -> np.ndarray:
    """Combine :func:`render_slice` output into an (h, w, 3) uint8 RGB picture."""
    g = (grey.astype(np.float64) * (255.0 / max(levels - 1, 1))).round().astype(np.uint8)
    rgb = np.repeat(g[..., None], 3, axis=-1)
    rgb[code == 1] = OUTLINE_LIGHT
    rgb[code == 2] = OUTLINE_DARK
    return rgb

