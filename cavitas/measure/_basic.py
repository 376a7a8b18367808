"""Counts, centroids, second moments, bounding boxes and intensity statistics in one pass."""

from __future__ import annotations

from dataclasses import dataclass

import numba
import numpy as np

__all__ = ["RawSums", "raw_sums", "region_sums", "stats_from_sums"]


@numba.njit(cache=True, nogil=True)
def _sums_kernel(dense, n, image, has_image):  # pragma: no cover - compiled
    nz, ny, nx = dense.shape
    count = np.zeros(n + 1, np.int64)
    first = np.zeros((n + 1, 3), np.float64)
    second = np.zeros((n + 1, 6), np.float64)  # zz, yy, xx, zy, zx, yx
    lo = np.full((n + 1, 3), np.iinfo(np.int64).max, np.int64)
    hi = np.full((n + 1, 3), -1, np.int64)
    imin = np.full(n + 1, np.inf)
    imax = np.full(n + 1, -np.inf)
    isum = np.zeros(n + 1, np.float64)
    for z in range(nz):
        for y in range(ny):
            for x in range(nx):
                lab = dense[z, y, x]
                if lab == 0:
                    continue
                count[lab] += 1
                first[lab, 0] += z
                first[lab, 1] += y
                first[lab, 2] += x
                second[lab, 0] += z * z
                second[lab, 1] += y * y
                second[lab, 2] += x * x
                second[lab, 3] += z * y
                second[lab, 4] += z * x
                second[lab, 5] += y * x
                if z < lo[lab, 0]:
                    lo[lab, 0] = z
                if z > hi[lab, 0]:
                    hi[lab, 0] = z
                if y < lo[lab, 1]:
                    lo[lab, 1] = y
                if y > hi[lab, 1]:
                    hi[lab, 1] = y
                if x < lo[lab, 2]:
                    lo[lab, 2] = x
                if x > hi[lab, 2]:
                    hi[lab, 2] = x
                if has_image:
                    v = image[z, y, x]
                    isum[lab] += v
                    if v < imin[lab]:
                        imin[lab] = v
                    if v > imax[lab]:
                        imax[lab] = v
    return count, first, second, lo, hi, imin, imax, isum


def region_sums(dense: np.ndarray, n: int, image: np.ndarray | None) -> dict[str, np.ndarray]:
    """Per-region sums over a 3D renumbered label array (rows 1..n), in one pass.

    Returns ``count``, ``mean`` (voxel-index centroid, (n, 3)), ``cov`` (covariance of the
    voxel indices, (n, 3, 3), population form as in an inertia computation), ``lo``/``hi``
    (inclusive bounding box) and, with an image, ``imin``/``imax``/``imean``.

    Notes
    -----
    One sweep over the voxels, O(N + n) time. Second moments are accumulated as raw sums
    in float64; for indices below 10⁴ the cancellation in E[x²] - E[x]² loses at most
    about 10⁻⁸ of a voxel².

    Examples
    --------
    >>> import numpy as np
    >>> d = np.zeros((1, 3, 4), np.int32); d[0, 1, 1:3] = 1
    >>> s = region_sums(d, 1, None)
    >>> s["count"].tolist(), s["mean"].tolist(), s["hi"].tolist()
    ([2], [[0.0, 1.0, 1.5]], [[0, 1, 2]])
    """
    return stats_from_sums(raw_sums(dense, n, image), image=image is not None)


@dataclass(frozen=True)
class RawSums:
    """Per-region sums before division, one row per region: what adds up across pieces of
    an array (:mod:`cavitas.measure._chunked`). Coordinates are 3D voxel indices
    ``(z, y, x)``; ``second`` holds the sums of zz, yy, xx, zy, zx, yx."""

    count: np.ndarray    # (n,) int64
    first: np.ndarray    # (n, 3) float64
    second: np.ndarray   # (n, 6) float64
    lo: np.ndarray       # (n, 3) int64, inclusive
    hi: np.ndarray       # (n, 3) int64, inclusive
    imin: np.ndarray     # (n,) float64 (inf without image)
    imax: np.ndarray     # (n,) float64
    isum: np.ndarray     # (n,) float64


def raw_sums(dense: np.ndarray, n: int, image: np.ndarray | None) -> RawSums:
    """:class:`RawSums` of regions 1..n of a 3D renumbered label array, in one pass."""
    has_image = image is not None
    img = image if has_image else np.zeros((1, 1, 1), np.float64)
    count, first, second, lo, hi, imin, imax, isum = _sums_kernel(dense, n, img, has_image)
    return RawSums(count[1:], first[1:], second[1:], lo[1:], hi[1:], imin[1:], imax[1:],
                   isum[1:])


def stats_from_sums(sums: RawSums, *, image: bool) -> dict[str, np.ndarray]:
    """:func:`region_sums`' figures from the sums: centroid, covariance, box, intensities."""
    count = sums.count
    n = len(count)
    safe = np.maximum(count, 1).astype(np.float64)
    mean = sums.first / safe[:, None]
    e2 = sums.second / safe[:, None]
    cov = np.empty((n, 3, 3))
    for k, (i, j) in enumerate(((0, 0), (1, 1), (2, 2), (0, 1), (0, 2), (1, 2))):
        cov[:, i, j] = cov[:, j, i] = e2[:, k] - mean[:, i] * mean[:, j]
    out = {"count": count, "mean": mean, "cov": cov, "lo": sums.lo, "hi": sums.hi}
    if image:
        out.update(imin=sums.imin, imax=sums.imax, imean=sums.isum / safe)
    return out
