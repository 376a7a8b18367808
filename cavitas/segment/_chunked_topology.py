"""The topology of the segmented walls of a chunked label map (:func:`walls_in_chunks`).

:func:`cavitas.cubical.connectivity_density` of the walls (every voxel inside the mask
that no region holds), from three passes over the chunks, each equal to its whole-array
step:

* χ: :func:`cavitas.cubical._chunked_euler.euler_curve_in_chunks` of the wall set (its one
  level);
* β0, the wall components: :func:`._chunked_components.label_in_chunks` with the walls'
  connectivity;
* β2 (3D), the pieces of the space between the walls that do not reach the array's faces
  (``_euler._enclosed`` pads the array with that space and labels it): the components of
  the complement (the other connectivity) less those with a label on a face (only the
  faces' labels are read);

then β1 = β0 + β2 − χ (3D) or β0 − χ (2D). The label map is cut into blocks of whole
chunks (:func:`cavitas._shared.blocks.chunk_blocks`): no result depends on the blocks.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from .._shared.blocks import BLOCK_VOXELS, chunk_blocks
from ..cubical import ConnectivityDensity
from ..cubical._chunked_euler import euler_curve_in_chunks
from ..cubical._neighbors import check_connectivity, dual_connectivity
from ._chunked_components import label_in_chunks
from ._regions import face_slices

__all__ = ["walls_in_chunks"]


def walls_in_chunks(labels: Any, *, connectivity: int, spacing: Any, unit: str,
                    mask: Any = None, block_voxels: int = BLOCK_VOXELS) -> ConnectivityDensity:
    """``connectivity_density(labels == 0, connectivity=..., mask=...)`` of a Dask label
    map.

    Examples
    --------
    >>> import dask.array as da
    >>> from cavitas.cubical import connectivity_density
    >>> lab = np.zeros((3, 5, 5), int); lab[1, 1:4, 1:4] = 1
    >>> lab[1, 2, :] = lab[1, :, 2] = 0                   # a closed box, two walls inside
    >>> got = walls_in_chunks(da.from_array(lab, chunks=2), connectivity=1,
    ...                       spacing=(2.0, 1.0, 1.0), unit="µm")
    >>> got == connectivity_density(lab == 0, spacing=(2.0, 1.0, 1.0))
    True
    """
    ndim = labels.ndim
    connectivity = check_connectivity(ndim, connectivity)
    blocks = chunk_blocks(labels.chunks, block_voxels)
    walls = labels.rechunk(blocks) == 0
    if mask is not None:
        walls &= mask.rechunk(blocks)
    chi = euler_curve_in_chunks(walls.astype(np.uint8), connectivity=connectivity,
                                block_voxels=block_voxels).at(1)
    betti0 = label_in_chunks(walls, connectivity).count
    betti2 = 0
    if ndim == 3:
        between = label_in_chunks(~walls, dual_connectivity(ndim, connectivity))
        import dask
        import dask.array as da

        faces = dask.compute(*[da.unique(between.labels[face])
                               for face in face_slices(ndim)])
        reaching = np.unique(np.concatenate(faces))
        betti2 = between.count - int(np.count_nonzero(reaching))
    betti1 = betti0 + betti2 - chi
    inside = int(mask.sum().compute()) if mask is not None else int(np.prod(labels.shape))
    size = inside * float(np.prod(spacing))
    return ConnectivityDensity(chi, betti0, betti1, betti2, size, betti1 / size, str(unit))
