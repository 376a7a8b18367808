"""The nearest labelled voxel of every voxel, on all cores (numba, private).

:func:`nearest_feature` returns what ``scipy.ndimage.distance_transform_edt(mask,
return_distances=False, return_indices=True)`` returns, index for index, ties included:
it runs the same separable Voronoi construction (Maurer, Qi and Raghavan 2003) with the
same comparisons, one axis after the other (axis 0 first), every line of an axis on its
own, so the lines are shared out among the cores. On the first axis every feature is a
voxel of the line itself, where the construction amounts to the nearest feature voxel of
the line, the lower of two equidistant: two scans find it (:func:`_nearest_on_line`).
scipy runs it on one core. Memory: the same 12 bytes per voxel as scipy's indices.

Maurer, C. R., Qi, R., Raghavan, V. (2003). A linear time algorithm for computing exact
Euclidean distance transforms of binary images in arbitrary dimensions. IEEE Trans.
Pattern Anal. Mach. Intell. 25(2), 265-270. doi:10.1109/TPAMI.2003.1177156
"""

from __future__ import annotations

from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from typing import Any

import numpy as np
from numba import njit

from .._cores import usable_cores

__all__ = ["nearest_feature"]


@njit(cache=True, nogil=True, inline="always")
def _off_axis(f, k, d, c0, c1, c2):
    """Squared distance of feature ``f[k]`` from the line, off axis ``d``."""
    r = 0.0
    if d != 0:
        t = np.float64(f[k, 0] - c0)
        r += t * t
    if d != 1:
        t = np.float64(f[k, 1] - c1)
        r += t * t
    if d != 2:
        t = np.float64(f[k, 2] - c2)
        r += t * t
    return r


@njit(cache=True, nogil=True)
def _voronoi_line(line, d, c0, c1, c2, f, g):
    """One line along axis ``d`` (``line``: its features, one row per coordinate; the
    line's own coordinates ``c0, c1, c2``, the one along ``d`` ignored): every voxel takes
    the nearest of the features its voxels hold."""
    length = line.shape[1]
    for ii in range(length):
        f[ii, 0] = line[0, ii]
        f[ii, 1] = line[1, ii]
        f[ii, 2] = line[2, ii]
    last = -1
    for ii in range(length):
        if f[ii, 0] >= 0:
            fd = np.float64(f[ii, d])
            w_r = _off_axis(f, ii, d, c0, c1, c2)
            while last >= 1:
                idx1 = g[last]
                f1 = np.float64(f[idx1, d])
                idx2 = g[last - 1]
                a = f1 - np.float64(f[idx2, d])
                b = fd - f1
                c = a + b
                u_r = _off_axis(f, idx2, d, c0, c1, c2)
                v_r = _off_axis(f, idx1, d, c0, c1, c2)
                if c * v_r - b * u_r - a * w_r - a * b * c <= 0.0:
                    break
                last -= 1
            last += 1
            g[last] = ii
    if last < 0:
        return
    top = last
    last = 0
    for ii in range(length):
        t = np.float64(f[g[last], d] - ii)
        delta1 = _off_axis(f, g[last], d, c0, c1, c2) + t * t
        while last < top:
            t = np.float64(f[g[last + 1], d] - ii)
            delta2 = _off_axis(f, g[last + 1], d, c0, c1, c2) + t * t
            if delta1 <= delta2:
                break
            delta1 = delta2
            last += 1
        line[0, ii] = f[g[last], 0]
        line[1, ii] = f[g[last], 1]
        line[2, ii] = f[g[last], 2]


@njit(cache=True, nogil=True)
def _nearest_on_line(line, d, c0, c1, c2, g):
    """:func:`_voronoi_line` for the first axis, where each feature is a voxel's own: every
    feature lies on the line, so the construction keeps all of them and each voxel takes
    the nearest one, the lower of two equidistant; two scans find it (``g``: scratch)."""
    length = line.shape[1]
    before = -1
    for ii in range(length):
        if line[0, ii] >= 0:
            before = ii
        g[ii] = before
    if before < 0:
        return  # no feature on the line: left as it is
    after = -1
    for ii in range(length - 1, -1, -1):
        if line[0, ii] >= 0:
            after = ii
            continue  # a feature is its own nearest
        q = g[ii]
        if q < 0 or (after >= 0 and after - ii < ii - q):
            q = after
        line[0, ii] = c0
        line[1, ii] = c1
        line[2, ii] = c2
        line[d, ii] = q


@njit(cache=True, nogil=True)
def _own_features(mask, feat, start, stop):
    """Each voxel of planes ``[start, stop)`` of axis 1 its own coordinates, or none (-1)."""
    n0, n1, n2 = mask.shape
    for i1 in range(start, stop):
        for i0 in range(n0):
            for i2 in range(n2):
                if mask[i0, i1, i2]:
                    feat[0, i0, i1, i2] = -1
                else:
                    feat[0, i0, i1, i2] = i0
                    feat[1, i0, i1, i2] = i1
                    feat[2, i0, i1, i2] = i2


@njit(cache=True, nogil=True)
def _line(line, d, c0, c1, c2, f, g, first):
    """One line: :func:`_nearest_on_line` on the ``first`` axis, else :func:`_voronoi_line`."""
    if first:
        _nearest_on_line(line, d, c0, c1, c2, g)
    else:
        _voronoi_line(line, d, c0, c1, c2, f, g)


@njit(cache=True, nogil=True)
def _axis_pass(feat, d, outer_axis, first, start, stop):
    """The lines along axis ``d`` whose coordinate on ``outer_axis`` lies in
    ``[start, stop)`` (``first``: the first axis, every feature a voxel's own)."""
    n0, n1, n2 = feat.shape[1:]
    length = feat.shape[1 + d]
    f = np.empty((length, 3), np.int64)
    g = np.empty(length, np.int64)
    for outer in range(start, stop):
        if d == 0:
            for inner in range(n2 if outer_axis == 1 else n1):
                i1, i2 = (outer, inner) if outer_axis == 1 else (inner, outer)
                _line(feat[:, :, i1, i2], 0, 0, i1, i2, f, g, first)
        elif d == 1:
            for inner in range(n2 if outer_axis == 0 else n0):
                i0, i2 = (outer, inner) if outer_axis == 0 else (inner, outer)
                _line(feat[:, i0, :, i2], 1, i0, 0, i2, f, g, first)
        else:
            for inner in range(n1 if outer_axis == 0 else n0):
                i0, i1 = (outer, inner) if outer_axis == 0 else (inner, outer)
                _line(feat[:, i0, i1, :], 2, i0, i1, 0, f, g, first)


def _share(pool: ThreadPoolExecutor, workers: int, count: int, kernel: Callable[..., None],
           *args: Any) -> None:
    """``kernel(*args, start, stop)`` over ``range(count)`` cut into ``workers`` pieces."""
    cuts = np.linspace(0, count, workers + 1).astype(int)
    jobs = [pool.submit(kernel, *(*args, int(a), int(b)))
            for a, b in zip(cuts[:-1], cuts[1:], strict=True) if b > a]
    for job in jobs:
        job.result()


def nearest_feature(mask: np.ndarray) -> np.ndarray:
    """Index of the nearest ``False`` voxel of a 2D or 3D ``mask``, per voxel.

    Equal to ``scipy.ndimage.distance_transform_edt(mask, return_distances=False,
    return_indices=True)`` (int32, one plane of indices per axis).

    Examples
    --------
    >>> mask = np.array([[False, True, True, True, False]])
    >>> nearest_feature(mask)[1].tolist()
    [[0, 0, 0, 4, 4]]
    """
    shape = mask.shape
    if mask.all() or mask.ndim not in (2, 3):  # no feature (scipy's placeholders), or 1D
        from scipy import ndimage as ndi

        return ndi.distance_transform_edt(mask, return_distances=False, return_indices=True)
    sides = (*(1,) * (3 - mask.ndim), *shape)  # a 2D image as one plane
    cube = np.ascontiguousarray(mask, np.bool_).reshape(sides)
    feat = np.zeros((3, *sides), np.int32)
    workers = min(usable_cores(), 8)
    with ThreadPoolExecutor(max_workers=workers, thread_name_prefix="cavitas-nearest") as pool:
        _share(pool, workers, sides[1], _own_features, cube, feat)
        first = True
        for d in range(3):  # one axis after the other; its lines in parallel
            if sides[d] == 1:
                continue  # a line of one voxel keeps its own feature
            outer = max((a for a in range(3) if a != d), key=lambda a: sides[a])
            _share(pool, workers, sides[outer], _axis_pass, feat, d, outer, first)
            first = False
    return feat[3 - mask.ndim:].reshape((mask.ndim, *shape))
