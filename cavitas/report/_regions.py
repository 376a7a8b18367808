"""Which regions the report points at, and where they are (centroids in voxels)."""

from __future__ import annotations

import numpy as np

from .._errors import ParameterError
from .._table import Table

__all__ = ["pick_region", "region_centroids"]

_AXES = ("z", "y", "x")


def region_centroids(labels: np.ndarray, regions: Table) -> np.ndarray:
    """Voxel centroid of each row of ``regions``, shape ``(len(regions), ndim)``.

    Uses the columns ``centroid_voxel_z/y/x`` (``y/x`` in 2D) when the table has them,
    and otherwise computes the centre of mass of each ``label`` in ``labels``. Rows whose
    label is absent from ``labels`` get NaN.

    Examples
    --------
    >>> import numpy as np
    >>> lab = np.zeros((5, 5), int); lab[1:4, 2] = 7
    >>> region_centroids(lab, Table({"label": [7]})).tolist()
    [[2.0, 2.0]]
    """
    ndim = labels.ndim
    names = [f"centroid_voxel_{a}" for a in _AXES[3 - ndim:]]
    if len(regions) == 0:
        return np.zeros((0, ndim))
    if all(n in regions for n in names):
        return np.stack([np.asarray(regions[n], dtype=np.float64) for n in names], axis=1)
    if "label" not in regions:
        raise ParameterError(
            f"The region table needs a 'label' column or {names} to place regions; "
            f"it has {regions.names}."
        )
    wanted = np.asarray(regions["label"]).astype(np.int64)
    lab = np.asarray(labels)
    size = int(max(lab.max(initial=0), wanted.max(initial=0))) + 1
    sums = np.zeros((ndim + 1, size))  # voxel count, then the sum of each coordinate
    planes = lab if ndim == 3 else lab[None]
    rows, cols = np.indices(planes.shape[1:])
    for z, plane in enumerate(planes):  # one plane at a time: no volume-sized temporaries
        flat = plane.ravel().astype(np.int64)
        count = np.bincount(flat, minlength=size)
        sums[0] += count
        sums[-2] += np.bincount(flat, rows.ravel(), minlength=size)
        sums[-1] += np.bincount(flat, cols.ravel(), minlength=size)
        if ndim == 3:
            sums[1] += count * z
    safe = np.clip(wanted, 0, size - 1)
    with np.errstate(invalid="ignore", divide="ignore"):
        centres = sums[1:, safe] / np.where(wanted >= 0, sums[0, safe], 0)
    return centres.T

def pick_region(regions: Table, which: str) -> int | None:
    """Row index of the ``"largest"`` or the ``"least_certain"`` region, or ``None``.

    Largest is by ``volume`` (``area`` in 2D tables); least certain is the smallest finite
    ``margin`` (how far above the threshold a region stands), else the smallest
    ``persistence``. ``None`` when the table has no rows or no such column.

    Examples
    --------
    >>> t = Table({"label": [1, 2, 3], "volume": [5.0, 9.0, 1.0], "margin": [0.3, 2.0, 0.1]})
    >>> pick_region(t, "largest"), pick_region(t, "least_certain")
    (1, 2)
    """
    if which == "largest":
        keys, pick = ("volume", "area"), np.argmax
    elif which == "least_certain":
        keys, pick = ("margin", "persistence"), np.argmin
    else:
        raise ParameterError(f"which must be 'largest' or 'least_certain'; got {which!r}.")
    for key in keys:
        if key in regions and len(regions):
            values = np.asarray(regions[key], dtype=np.float64)
            finite = np.isfinite(values)
            if finite.any():
                idx = np.flatnonzero(finite)
                return int(idx[pick(values[finite])])
    return None
