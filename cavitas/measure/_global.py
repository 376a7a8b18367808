"""Figures for the whole scan: counts, total volume, volume fraction, number density."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._shared.units import size_unit
from .._table import Table
from ._checks import check_labels, check_mask, check_spacing

__all__ = ["RoiCounts", "figures_from_counts", "global_figures"]


def global_figures(table: Table, *, labels: Any, spacing: Sequence[float] | None = None,
                   unit: str | None = None, roi: Any = None) -> dict[str, Any]:
    """Whole-scan figures from a region table and its label image.

    Parameters
    ----------
    table : Table
        Output of :func:`measure_regions` on ``labels``.
    labels : array_like of int
        The label image the table was measured on.
    spacing, unit : optional
        As for :func:`measure_regions`; default: those stored in ``table.meta`` by
        :func:`measure_regions`, else 1 per axis and ``"µm"``.
    roi : array_like of bool, optional
        The region of interest; default the whole array.

    Returns
    -------
    dict
        ``region_count``; ``border_region_count`` (regions with ``touches_border``);
        ``total_volume`` and ``mean_volume`` of the regions; ``roi_volume``;
        ``volume_fraction`` = labelled voxels inside the ROI / ROI voxels (the closed
        porosity when regions are pores, 0–1); ``regions_per_volume`` = regions with
        their centroid voxel inside the ROI / ROI volume; and ``units``, the unit of each
        figure that has one. Add others (noise estimate, threshold) to the dict as needed.

    Examples
    --------
    >>> import numpy as np
    >>> from cavitas.measure import measure_regions
    >>> lab = np.zeros((10, 10), int); lab[2:4, 2:4] = 1; lab[6:9, 6:9] = 2
    >>> figs = global_figures(measure_regions(lab, thickness=False), labels=lab)
    >>> figs["region_count"], figs["volume_fraction"], figs["units"]["roi_volume"]
    (2, 0.13, 'µm²')
    """
    lab = check_labels(labels)
    ndim = lab.ndim
    sp = check_spacing(table.meta.get("spacing") if spacing is None else spacing, ndim)
    unit = table.meta.get("unit", "µm") if unit is None else unit
    inside = check_mask(roi, lab.shape, "roi")
    if inside is None:
        roi_voxels, filled = lab.size, int(np.count_nonzero(lab))
    else:
        roi_voxels, filled = int(np.count_nonzero(inside)), int(np.count_nonzero(lab[inside]))
    count = len(table)
    in_roi = count
    if inside is not None and count:
        idx = tuple(np.rint(table[f"centroid_voxel_{a}"]).astype(np.intp)
                    for a in ("z", "y", "x")[3 - ndim:])
        in_roi = int(np.count_nonzero(inside[idx]))
    return figures_from_counts(table, RoiCounts(roi_voxels, filled, in_roi), spacing=sp,
                               unit=unit)


@dataclass(frozen=True)
class RoiCounts:
    """What :func:`global_figures` counts in the label image and the region of interest."""

    roi_voxels: int        # voxels of the ROI (of the array without one)
    filled: int            # labelled voxels inside it
    centroids_inside: int  # regions whose rounded centroid voxel lies inside it


def figures_from_counts(table: Table, counts: RoiCounts, *, spacing: Sequence[float],
                        unit: str) -> dict[str, Any]:
    """:func:`global_figures` from the table and the counts alone (a chunked label image's
    come from per-chunk counts, :mod:`cavitas.measure._chunked`).

    Examples
    --------
    >>> t = Table({"volume": [4.0], "touches_border": [False]})
    >>> figures_from_counts(t, RoiCounts(100, 4, 1), spacing=(1.0, 1.0),
    ...                     unit="mm")["regions_per_volume"]
    0.01
    """
    ndim = len(spacing)
    count = len(table)
    volume = np.asarray(table["volume"], dtype=np.float64) if count else np.zeros(0)
    roi_voxels = counts.roi_voxels
    roi_volume = roi_voxels * float(np.prod(spacing))
    size = size_unit(unit, ndim)
    return {
        "region_count": count,
        "border_region_count": int(np.count_nonzero(table["touches_border"])) if count else 0,
        "total_volume": float(volume.sum()),
        "mean_volume": float(volume.mean()) if count else float("nan"),
        "roi_volume": roi_volume,
        "volume_fraction": counts.filled / roi_voxels if roi_voxels else float("nan"),
        "regions_per_volume": (counts.centroids_inside / roi_volume if roi_voxels
                               else float("nan")),
        "units": {"total_volume": size, "mean_volume": size, "roi_volume": size,
                  "regions_per_volume": f"1/{size_unit(unit, ndim, plural=False)}"},
    }
