"""Measurements of labelled regions in physical units.

:func:`measure_regions` gives one row per region (volume, surface area, shape, position,
intensities, shell intensity, wall thickness); :func:`global_figures` gives whole-scan
figures (count, volume fraction, number density). :func:`surface_area` and
:func:`local_thickness` work on a single binary mask.

For research use only; not for diagnosis.

Examples
--------
>>> import numpy as np
>>> from cavitas.measure import measure_regions, global_figures
>>> lab = np.ones((6, 6, 10), np.int32); lab[..., 4:6] = 0; lab[..., 6:] = 2  # 2-voxel wall
>>> table = measure_regions(lab, spacing=(2.0, 1.0, 0.5))
>>> table["volume"].tolist(), table.units["volume"], table["wall_thickness_mean"].tolist()
([144.0, 144.0], 'µm³', [1.0, 1.0])
>>> global_figures(table, labels=lab, spacing=(2.0, 1.0, 0.5))["volume_fraction"]
0.8
"""

from ._global import global_figures
from ._regions import measure_regions
from ._surface import surface_area
from ._thickness import local_thickness

__all__ = ["global_figures", "local_thickness", "measure_regions", "surface_area"]
