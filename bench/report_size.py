"""Size of the HTML report for a 512³ scan (budget: about 15 MB).

Invented data (for this measurement only): a foam of Voronoi cells with bright walls,
built at 128³ and repeated to 512³, then Gaussian noise at full resolution, which is the
hard case for PNG compression. Run: ``.venv/bin/python bench/report_size.py [SIDE]``.
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from scipy import ndimage

from cavitas._table import Table
from cavitas.report import write_report


def foam(side: int, *, cells: int = 300, seed: int = 7) -> tuple[np.ndarray, np.ndarray]:
    """Invented foam: (image float32, labels int32) of shape (side,) * 3."""
    rng = np.random.default_rng(seed)
    coarse = max(side // 4, 16)
    seeds = np.zeros((coarse,) * 3, np.int32)
    where = rng.integers(0, coarse, size=(cells, 3))
    seeds[tuple(where.T)] = np.arange(1, cells + 1)
    _, nearest = ndimage.distance_transform_edt(seeds == 0, return_indices=True)
    cell = seeds[tuple(nearest)]
    wall = np.zeros(cell.shape, bool)
    for axis in range(3):
        wall |= np.diff(cell, axis=axis, append=np.take(cell, [-1], axis=axis)) != 0
    labels = np.where(wall, 0, cell).astype(np.int32)
    reps = side // coarse
    labels = labels.repeat(reps, 0).repeat(reps, 1).repeat(reps, 2)
    image = np.where(labels == 0, 1.0, 0.2).astype(np.float32)
    image += rng.normal(0.0, 0.15, image.shape).astype(np.float32)
    return image, labels


def main(side: int = 512) -> None:
    image, labels = foam(side)
    ids = np.unique(labels[labels > 0])
    volume = ndimage.sum_labels(np.ones(labels.shape, np.float32), labels, ids)
    regions = Table({"label": ids, "volume": volume}, units={"volume": "µm³"})
    out = Path(tempfile.mkdtemp()) / "report.html"
    start = time.perf_counter()
    write_report(out, image=image, labels=labels, spacing=(1.0, 1.0, 1.0), unit="µm",
                 regions=regions, params={"bench": "report size"}, figures={})
    took = time.perf_counter() - start
    size = out.stat().st_size
    print(f"{side}^3 scan, {len(ids)} regions: report {size / 1e6:.2f} MB, "
          f"written in {took:.1f} s")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 512)
