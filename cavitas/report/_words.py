"""The words and number formats a reader sees: 2D words in 2D, 3D words in 3D.

The region table and the measurement modules name columns once, in 3D terms
(``volume``, ``surface_area``, ``sphericity``, ``voxel_count``). A 2D image has areas,
perimeters, circularity and pixels instead; :class:`Words` gives the reader's name of each
column and of each quantity for the image at hand, and :func:`column_order` puts what a
reader looks for first (identity, size and shape) before the persistence bookkeeping.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

__all__ = ["MISSING", "Words", "column_order", "missing_mask", "round_number"]

#: The one way a missing value is shown (NaN, None, and -1 in index columns).
MISSING = "—"

#: Columns that hold a flat voxel index, where -1 means "none".
_INDEX_COLUMNS = ("core_voxel", "breach_voxel")

#: Columns shown first, in this order (3D names; 2D ones are renamed by :class:`Words`).
_FRONT = (
    "label", "kind", "touches_border", "volume", "equivalent_diameter", "sphericity",
    "surface_area", "major_axis", "intermediate_axis", "minor_axis", "intensity_mean",
    "intensity_min", "intensity_max", "wall_thickness_mean", "wall_thickness_max",
    "shell_intensity_mean", "volume_with_wall", "centroid_z", "centroid_y", "centroid_x",
)
#: Persistence bookkeeping, after the measurements.
_TOPOLOGY = (
    "persistence", "margin", "birth", "death", "level", "parent", "depth", "own_volume",
    "enclosed_volume", "voxel_count", "own_voxels", "enclosed_voxels", "shell_voxel_count",
    "core_voxel", "breach_voxel",
)

_PLAIN_2D = {
    "volume": "area", "surface_area": "perimeter", "sphericity": "circularity",
    "voxel_count": "pixels", "own_voxels": "own pixels", "enclosed_voxels": "enclosed pixels",
    "own_volume": "own area", "enclosed_volume": "enclosed area",
    "shell_voxel_count": "shell pixels", "core_voxel": "core pixel",
    "breach_voxel": "breach pixel", "volume_with_wall": "area with wall",
    "intermediate_axis": "intermediate axis",
    "volume_fraction": "area fraction", "mean_volume": "mean area",
    "total_volume": "total area", "roi_volume": "analysed area",
    "regions_per_volume": "regions per area",
}
_PLAIN_3D = {
    "voxel_count": "voxels", "own_voxels": "own voxels", "enclosed_voxels": "enclosed voxels",
    "shell_voxel_count": "shell voxels", "volume_fraction": "volume fraction",
    "mean_volume": "mean volume", "total_volume": "total volume",
    "roi_volume": "analysed volume", "regions_per_volume": "regions per volume",
}


@dataclass(frozen=True)
class Words:
    """The reader's words for a 2D or a 3D image.

    Examples
    --------
    >>> Words(2).column("surface_area"), Words(3).column("surface_area")
    ('perimeter', 'surface area')
    >>> Words(2).size, Words(3).element
    ('area', 'voxel')
    """

    ndim: int

    @property
    def size(self) -> str:
        """What the size of a region is called: area or volume."""
        return "area" if self.ndim == 2 else "volume"

    @property
    def element(self) -> str:
        """One grid element: pixel or voxel."""
        return "pixel" if self.ndim == 2 else "voxel"

    @property
    def shape_name(self) -> str:
        """The roundness measure: circularity or sphericity."""
        return "circularity" if self.ndim == 2 else "sphericity"

    @property
    def fraction(self) -> str:
        """The share of the image the regions fill."""
        return "area fraction" if self.ndim == 2 else "volume fraction"

    def column(self, name: str) -> str:
        """A column name in the reader's words (underscores become spaces)."""
        table = _PLAIN_2D if self.ndim == 2 else _PLAIN_3D
        if name in table:
            return table[name]
        if self.ndim == 2:
            name = name.replace("voxel", "pixel")
        return name.replace("_", " ")


def column_order(names: list[str]) -> list[str]:
    """Identity, size and shape first, then the other measurements, the topology, and
    positions in voxels (centroids, bounding boxes) last.

    Examples
    --------
    >>> column_order(["persistence", "volume", "label", "bbox_min_x", "sphericity"])
    ['label', 'volume', 'sphericity', 'persistence', 'bbox_min_x']
    """
    front = [n for n in _FRONT if n in names]
    back = [n for n in _TOPOLOGY if n in names]
    middle = [n for n in names if n not in front and n not in back
              and not n.startswith(("centroid_voxel_", "bbox_"))]
    tail = [n for n in names if n.startswith(("centroid_voxel_", "bbox_"))]
    return front + middle + back + tail


def missing_mask(name: str, values: np.ndarray) -> np.ndarray:
    """Which entries of a column are missing: NaN, None, or -1 in an index column."""
    values = np.asarray(values)
    if values.dtype == object:
        out = np.array([v is None or (isinstance(v, float) and math.isnan(v))
                        for v in values], bool)
    elif values.dtype.kind == "f":
        out = np.isnan(values)
    else:
        out = np.zeros(values.shape, bool)
    if name in _INDEX_COLUMNS and values.dtype.kind in "iuf":
        out |= values == -1
    return out


def round_number(value: Any) -> str:
    """A number as a reader writes it: whole above 100, three significant digits below,
    digits grouped in thousands, no exponent in the usual range.

    Examples
    --------
    >>> round_number(290950.0), round_number(0.898503), round_number(12.59), round_number(7)
    ('290,950', '0.899', '12.6', '7')
    >>> round_number(float("nan")), round_number(5.0), round_number(3.2e-7)
    ('—', '5', '3.2e-07')
    """
    if value is None:
        return MISSING
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if isinstance(value, (int, np.integer)):
        return f"{int(value):,}"
    value = float(value)
    if math.isnan(value):
        return MISSING
    if math.isinf(value):
        return "∞" if value > 0 else "−∞"
    if abs(value) >= 100:
        return f"{value:,.0f}"
    return f"{value:.3g}"
