"""Shells: the wall voxels that share a face with a region, and sums over them."""

from __future__ import annotations

import numba
import numpy as np

__all__ = ["shell_means", "shell_sums", "shell_totals", "shell_voxels"]


@numba.njit(cache=True, nogil=True)
def _touching_kernel(dense, walls, offsets):  # pragma: no cover - compiled
    nz, ny, nx = dense.shape
    out = np.zeros((nz, ny, nx), np.bool_)
    for z in range(nz):
        for y in range(ny):
            for x in range(nx):
                if not walls[z, y, x] or dense[z, y, x] != 0:
                    continue
                for k in range(offsets.shape[0]):
                    qz, qy, qx = z + offsets[k, 0], y + offsets[k, 1], x + offsets[k, 2]
                    if 0 <= qz < nz and 0 <= qy < ny and 0 <= qx < nx and dense[qz, qy, qx]:
                        out[z, y, x] = True
                        break
    return out


@numba.njit(cache=True, nogil=True)
def _shell_kernel(dense, shell, n, offsets, image, has_image, thick,
                  has_thick):  # pragma: no cover - compiled
    nz, ny, nx = dense.shape
    count = np.zeros(n + 1, np.int64)
    isum = np.zeros(n + 1, np.float64)
    tsum = np.zeros(n + 1, np.float64)
    tmax = np.zeros(n + 1, np.float64)
    seen = np.zeros(offsets.shape[0], np.int64)
    for z in range(nz):
        for y in range(ny):
            for x in range(nx):
                if not shell[z, y, x]:
                    continue
                m = 0
                for k in range(offsets.shape[0]):
                    qz, qy, qx = z + offsets[k, 0], y + offsets[k, 1], x + offsets[k, 2]
                    if not (0 <= qz < nz and 0 <= qy < ny and 0 <= qx < nx):
                        continue
                    lab = dense[qz, qy, qx]
                    if lab == 0:
                        continue
                    new = True
                    for j in range(m):
                        if seen[j] == lab:
                            new = False
                            break
                    if not new:
                        continue
                    seen[m] = lab
                    m += 1
                    count[lab] += 1
                    if has_image:
                        isum[lab] += image[z, y, x]
                    if has_thick:
                        t = thick[z, y, x]
                        tsum[lab] += t
                        if t > tmax[lab]:
                            tmax[lab] = t
    return count, isum, tsum, tmax


def shell_voxels(dense: np.ndarray, walls: np.ndarray, offsets: np.ndarray) -> np.ndarray:
    """Wall voxels (``walls`` and label 0) that share a face with a labelled voxel (3D views).

    Examples
    --------
    >>> from cavitas.measure._checks import face_offsets
    >>> d = np.zeros((1, 1, 5), np.int32); d[0, 0, 2] = 1
    >>> shell_voxels(d, np.ones_like(d, bool), face_offsets(2))
    array([[[False,  True, False,  True, False]]])
    """
    return _touching_kernel(dense, np.ascontiguousarray(walls), offsets)


def shell_sums(dense: np.ndarray, shell: np.ndarray, n: int, offsets: np.ndarray,
               image: np.ndarray | None, thick: np.ndarray | None) -> dict[str, np.ndarray]:
    """Per region: shell voxel count, mean shell intensity, mean and max thickness there.

    A shell voxel touching several regions counts once for each. Regions without shell
    voxels get NaN means.
    """
    dummy = np.zeros((1, 1, 1), np.float64)
    count, isum, tsum, tmax = _shell_kernel(
        dense, shell, n, offsets, dummy if image is None else image, image is not None,
        dummy if thick is None else thick, thick is not None)
    out = shell_means(count[1:], isum[1:] if image is not None else None)
    if thick is not None:
        safe = np.where(count[1:] > 0, count[1:], np.nan)
        out["tmean"] = tsum[1:] / safe
        out["tmax"] = np.where(count[1:] > 0, tmax[1:], np.nan)
    return out


def shell_totals(dense: np.ndarray, shell: np.ndarray, n: int, offsets: np.ndarray,
                 image: np.ndarray | None) -> tuple[np.ndarray, np.ndarray]:
    """Per region 1..n: shell voxels and the sum of the image over them (zeros without an
    image), before division: what adds up across pieces of an array."""
    dummy = np.zeros((1, 1, 1), np.float64)
    count, isum, _, _ = _shell_kernel(dense, shell, n, offsets,
                                      dummy if image is None else image, image is not None,
                                      dummy, False)
    return count[1:], isum[1:]


def shell_means(count: np.ndarray, isum: np.ndarray | None) -> dict[str, np.ndarray]:
    """:func:`shell_sums`' ``count`` and ``imean`` (with an image's sums; NaN where a
    region has no shell voxel) from the totals.

    Examples
    --------
    >>> shell_means(np.array([2, 0]), np.array([5.0, 0.0]))["imean"].tolist()
    [2.5, nan]
    """
    out = {"count": count}
    if isum is not None:
        out["imean"] = isum / np.where(count > 0, count, np.nan)
    return out
