"""Neighbour offsets and border handling shared by every voxel-graph kernel.

Every kernel of the package walks the voxel grid in the same way, so this module owns the
one definition of "neighbour" and of "touches the outside". Reuse it rather than re-deriving
the rules (the segmentation pass over ``order`` and the :class:`CavityTree` must see exactly
the neighbours the cavity sweep saw).

Design
------
* **One 3D view.** A 2D image of shape ``(ny, nx)`` is handled as a single plane
  ``(1, ny, nx)`` (:func:`grid_shape3`); its offsets have ``dz = 0``, so no neighbour ever
  leaves the plane through ``z``. Flat (C-order) indices are the same in both views.
* **Offsets.** :func:`neighbor_offsets` returns every neighbour of a voxel for a
  connectivity (1 = faces, ``ndim`` = full, scikit-image's convention) as flat offsets and
  as ``(dz, dy, dx)`` rows, in one fixed order (that of
  ``scipy.ndimage.generate_binary_structure`` raveled, centre removed).
  :func:`dual_connectivity` gives the rule of the complement (faces <-> full).
* **Border strategy.** A kernel unravels a voxel once (:func:`unravel3`), asks
  :func:`is_interior` whether all neighbours are in bounds (the common case: then
  ``v + offsets_flat[k]`` is used directly), and otherwise calls :func:`neighbor_or_outside`,
  which returns ``-1`` for a neighbour beyond the array. A voxel *touches the outside* when
  at least one of its neighbours is ``-1``; with faces or full connectivity alike, that is
  exactly "lies on the array border" (in a 3D array every axis counts, even of length 1).

The three numba helpers are ``@njit(cache=True, inline="always")`` and may be called from
any other ``@njit`` kernel.

Examples
--------
>>> off, zyx = neighbor_offsets((4, 5), 1)
>>> off.tolist()
[-5, -1, 1, 5]
>>> zyx.tolist()
[[0, -1, 0], [0, 0, -1], [0, 0, 1], [0, 1, 0]]
>>> neighbor_offsets((3, 4, 5), 3)[0].shape
(26,)
>>> dual_connectivity(3, 1)
3
"""

from __future__ import annotations

import numpy as np
from numba import njit

from .._errors import ParameterError

__all__ = [
    "check_connectivity",
    "dual_connectivity",
    "grid_shape3",
    "is_interior",
    "neighbor_offsets",
    "neighbor_or_outside",
    "unravel3",
]


def check_connectivity(ndim: int, connectivity: object) -> int:
    """Validate a wall connectivity for an ``ndim``-D image and return it as an int.

    Only 1 (faces) and ``ndim`` (full) correspond to a cubical complex: voxels as vertices
    (a cell enters when all its voxels are in) and voxels as top cells (a face enters when
    any adjacent voxel is in). Intermediate values (2 in 3D) have no such complex.

    Examples
    --------
    >>> check_connectivity(3, 3)
    3
    """
    if isinstance(connectivity, (bool, np.bool_)) or not isinstance(
        connectivity, (int, np.integer)
    ):
        raise ParameterError(
            f"connectivity must be the integer 1 (faces) or {ndim} (full); got {connectivity!r}."
        )
    connectivity = int(connectivity)
    if connectivity not in (1, ndim):
        raise ParameterError(
            f"connectivity must be 1 (faces) or {ndim} (full) for a {ndim}D image; got "
            f"{connectivity}: only 1 (faces) or {ndim} (full) correspond to a cubical complex."
        )
    return connectivity


def dual_connectivity(ndim: int, connectivity: int) -> int:
    """Connectivity of the complement of a wall set that uses ``connectivity``.

    Faces-only walls leave a fully connected complement and vice versa (the duality of the
    two cubical constructions). In 1D-like cases (``ndim == 1``) both are 1.
    """
    return ndim if connectivity == 1 else 1


def grid_shape3(shape: tuple[int, ...]) -> tuple[int, int, int]:
    """The ``(nz, ny, nx)`` view used by the kernels (a 2D image is one plane)."""
    shape = tuple(int(s) for s in shape)
    if len(shape) == 2:
        return (1, shape[0], shape[1])
    nz, ny, nx = shape
    return (nz, ny, nx)


def neighbor_offsets(shape: tuple[int, ...], connectivity: int) -> tuple[np.ndarray, np.ndarray]:
    """All neighbours of a voxel under ``connectivity``, as flat and ``(dz, dy, dx)`` offsets.

    Parameters
    ----------
    shape : tuple of int
        Image shape, 2D or 3D.
    connectivity : int
        1 (faces) up to ``ndim`` (full): a neighbour differs by at most one step on each
        axis and by a step on at most ``connectivity`` axes.

    Returns
    -------
    offsets_flat : (k,) int64
        Offsets of the flat C-order index (valid for in-bounds neighbours only).
    offsets_zyx : (k, 3) int64
        The same neighbours as ``(dz, dy, dx)`` in the :func:`grid_shape3` view.
    """
    ndim = len(shape)
    nz, ny, nx = grid_shape3(shape)
    rows = []
    zrange = (-1, 0, 1) if ndim == 3 else (0,)
    for dz in zrange:
        for dy in (-1, 0, 1):
            for dx in (-1, 0, 1):
                hops = abs(dz) + abs(dy) + abs(dx)
                if 0 < hops <= connectivity:
                    rows.append((dz, dy, dx))
    zyx = np.array(rows, dtype=np.int64).reshape(-1, 3)
    flat = zyx[:, 0] * (ny * nx) + zyx[:, 1] * nx + zyx[:, 2]
    return flat.astype(np.int64), zyx


@njit(cache=True, inline="always")
def unravel3(v, ny, nx):
    """``(z, y, x)`` of flat index ``v`` in a grid of ``(nz, ny, nx)``."""
    plane = ny * nx
    z = v // plane
    r = v - z * plane
    y = r // nx
    return z, y, r - y * nx


@njit(cache=True, inline="always")
def is_interior(z, y, x, nz, ny, nx, zmargin):
    """True if every neighbour of ``(z, y, x)`` is in bounds.

    ``zmargin`` is 1 for a 3D image and 0 for a 2D one (whose offsets never move in z).
    """
    return (
        z >= zmargin and z < nz - zmargin and y >= 1 and y < ny - 1 and x >= 1 and x < nx - 1
    )


@njit(cache=True, inline="always")
def neighbor_or_outside(v, z, y, x, k, offsets_flat, offsets_zyx, nz, ny, nx):
    """Flat index of neighbour ``k`` of voxel ``v`` at ``(z, y, x)``, or -1 beyond the array."""
    zz = z + offsets_zyx[k, 0]
    yy = y + offsets_zyx[k, 1]
    xx = x + offsets_zyx[k, 2]
    if zz < 0 or zz >= nz or yy < 0 or yy >= ny or xx < 0 or xx >= nx:
        return -1
    return v + offsets_flat[k]
