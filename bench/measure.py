"""Region measurements: all columns for ~1,000 regions of a 256³ label map.

Input (invented, for this measurement only): a Voronoi partition of 256³ voxels from 1,000
random seeds, with the voxels where neighbouring cells meet set to 0 as walls (about two
voxels thick), plus a random intensity image.

Reference: one ``skimage.measure.regionprops_table(labels, properties=("area", "centroid",
"bbox"))`` pass on the same map, in the same process. Target: all columns ≤ 5× that.
Also: time per region of the surface estimate (Crofton sweep, all regions at once) and,
for comparison, of a marching-cubes mesh on each region's padded crop.
"""

from __future__ import annotations

import time

import numpy as np
from scipy import ndimage as ndi
from skimage.measure import regionprops_table

from cavitas.measure import measure_regions, surface_area
from cavitas.measure._checks import as_3d, dense_labels, face_offsets
from cavitas.measure._shells import shell_voxels
from cavitas.measure._surface import region_surface
from cavitas.measure._thickness import thickness_3d

NAME = "measure"


def voronoi_foam(side: int = 256, cells: int = 1000, *, seed: int = 3) -> np.ndarray:
    """Invented label map: Voronoi cells with 0-valued walls where cells meet."""
    rng = np.random.default_rng(seed)
    seeds = np.zeros((side,) * 3, bool)
    seeds[tuple(rng.integers(0, side, (cells, 3)).T)] = True
    ids, _ = ndi.label(seeds)
    nearest = ndi.distance_transform_edt(~seeds, return_distances=False, return_indices=True)
    cell = ids[tuple(nearest)]
    wall = np.zeros(cell.shape, bool)
    for axis in range(3):
        change = np.diff(cell, axis=axis) != 0
        lo = [slice(None)] * 3
        hi = [slice(None)] * 3
        lo[axis], hi[axis] = slice(0, -1), slice(1, None)
        wall[tuple(lo)] |= change
        wall[tuple(hi)] |= change
    return np.where(wall, 0, cell).astype(np.int32)


def _best_of(repeats: int, fn, *args, **kwargs) -> float:
    best = np.inf
    for _ in range(repeats):
        start = time.perf_counter()
        fn(*args, **kwargs)
        best = min(best, time.perf_counter() - start)
    return best


def run(args) -> list[dict]:
    """Time the measurement against the reference pass; return rows for the table."""
    labels = voronoi_foam()
    image = np.random.default_rng(4).random(labels.shape, dtype=np.float32)
    n = int(np.unique(labels).size - 1)
    measure_regions(labels[:32, :32, :32], image=image[:32, :32, :32])  # compile / load
    t_ref = _best_of(2, regionprops_table, labels, properties=("area", "centroid", "bbox"))
    t_all = _best_of(2, measure_regions, labels, image=image)
    t_plain = _best_of(2, measure_regions, labels, image=image, thickness=False)
    dense, _ = dense_labels(labels)
    dense = as_3d(dense)
    volume = np.bincount(dense.ravel())[1:].astype(float)
    t_surf = _best_of(2, region_surface, dense, n, (1.0, 1.0, 1.0), volume)
    walls = dense == 0
    shell = shell_voxels(dense, walls, face_offsets(3))
    t_thick = _best_of(2, thickness_3d, walls, (1.0, 1.0, 1.0), shell)
    crops = ndi.find_objects(labels)[:50]
    start = time.perf_counter()
    for i, box in enumerate(crops):
        surface_area(labels[box] == i + 1, method="mesh")
    t_mesh = (time.perf_counter() - start) / len(crops)
    return [
        {"metric": "regions / voxels", "value": f"{n} / 256^3", "note": "Voronoi foam"},
        {"metric": "regionprops_table (area, centroid, bbox)", "value": f"{t_ref:.2f} s",
         "note": "reference"},
        {"metric": "measure_regions, all columns", "value": f"{t_all:.2f} s",
         "note": "with image, shells, wall thickness"},
        {"metric": "  ratio to reference", "value": f"{t_all / t_ref:.2f}", "target": "<= 5"},
        {"metric": "measure_regions, no wall thickness", "value": f"{t_plain:.2f} s",
         "note": f"ratio {t_plain / t_ref:.2f}"},
        {"metric": "wall thickness alone", "value": f"{t_thick:.2f} s",
         "note": f"overlap with region sweeps saves {t_plain + t_thick - t_all:.2f} s"},
        {"metric": "surface (Crofton) per region", "value": f"{t_surf / n * 1e6:.0f} µs",
         "note": f"one sweep, {t_surf:.2f} s for all"},
        {"metric": "surface (mesh on crop) per region", "value": f"{t_mesh * 1e6:.0f} µs",
         "note": "marching cubes, first 50 regions"},
    ]
