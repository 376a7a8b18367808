"""Exact Euclidean distance transform with anisotropic spacing (compiled).

Separable lower-envelope-of-parabolas algorithm of Felzenszwalb & Huttenlocher (2012),
one pass per axis. Same result as ``scipy.ndimage.distance_transform_edt(mask,
sampling=spacing)`` (distance from each ``True`` voxel to the nearest ``False`` voxel
centre); it exists because the thickness computation needs only squared distances, and
this kernel runs several times faster than scipy's on 256³ volumes.

References
----------
Felzenszwalb P. F., Huttenlocher D. P. (2012). Distance transforms of sampled functions.
Theory of Computing 8, 415–428. doi:10.4086/toc.2012.v008a019
"""

from __future__ import annotations

from collections.abc import Sequence

import numba
import numpy as np

__all__ = ["squared_edt"]


@numba.njit(cache=True, nogil=True)
def _envelope(f, out, s2, v, zb):  # pragma: no cover - compiled
    n = f.shape[0]
    k = -1
    for q in range(n):
        fq = f[q]
        if fq == np.inf:
            continue
        cut = -np.inf
        while k >= 0:
            p = v[k]
            cut = ((fq + s2 * q * q) - (f[p] + s2 * p * p)) / (2.0 * s2 * (q - p))
            if cut <= zb[k]:
                k -= 1
            else:
                break
        k += 1
        v[k] = q
        zb[k] = cut if k > 0 else -np.inf
    if k < 0:
        for x in range(n):
            out[x] = np.inf
        return
    zb[k + 1] = np.inf
    j = 0
    for x in range(n):
        while zb[j + 1] < x:
            j += 1
        d = x - v[j]
        out[x] = s2 * d * d + f[v[j]]


@numba.njit(cache=True, nogil=True)
def _edt_kernel(mask, s2z, s2y, s2x):  # pragma: no cover - compiled
    nz, ny, nx = mask.shape
    dist = np.empty((nz, ny, nx), np.float64)
    m = max(nz, ny, nx)
    f = np.empty(m, np.float64)
    g = np.empty(m, np.float64)
    v = np.empty(m, np.int64)
    zb = np.empty(m + 1, np.float64)
    # x: distance along the line to the nearest background voxel (two sweeps)
    for z in range(nz):
        for y in range(ny):
            last = -1
            for x in range(nx):
                if not mask[z, y, x]:
                    last = x
                    dist[z, y, x] = 0.0
                elif last >= 0:
                    dist[z, y, x] = s2x * (x - last) * (x - last)
                else:
                    dist[z, y, x] = np.inf
            last = -1
            for x in range(nx - 1, -1, -1):
                if not mask[z, y, x]:
                    last = x
                elif last >= 0:
                    d = s2x * (last - x) * (last - x)
                    if d < dist[z, y, x]:
                        dist[z, y, x] = d
    if ny > 1:
        for z in range(nz):
            for x in range(nx):
                for y in range(ny):
                    f[y] = dist[z, y, x]
                _envelope(f[:ny], g[:ny], s2y, v, zb)
                for y in range(ny):
                    dist[z, y, x] = g[y]
    if nz > 1:
        for y in range(ny):
            for x in range(nx):
                for z in range(nz):
                    f[z] = dist[z, y, x]
                _envelope(f[:nz], g[:nz], s2z, v, zb)
                for z in range(nz):
                    dist[z, y, x] = g[z]
    return dist


def squared_edt(mask: np.ndarray, spacing: Sequence[float]) -> np.ndarray:
    """Squared distance from each ``True`` voxel of a 3D mask to the nearest ``False`` one.

    ``inf`` where the mask holds no ``False`` voxel at all.

    Examples
    --------
    >>> m = np.ones((1, 1, 5), bool); m[0, 0, 0] = False
    >>> squared_edt(m, (1.0, 1.0, 2.0)).ravel().tolist()
    [0.0, 4.0, 16.0, 36.0, 64.0]
    """
    mask = np.ascontiguousarray(mask, dtype=bool)
    sz, sy, sx = (float(s) * float(s) for s in spacing)
    return _edt_kernel(mask, sz, sy, sx)
