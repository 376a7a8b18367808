"""A tiny scene shared by the report tests.

Invented data (regression only, never a check value): bright spherical (circular in 2D)
walls around dark cavities, with Gaussian noise, plus a hand-made diagram.
"""

from __future__ import annotations

import numpy as np
from scipy import ndimage

from cavitas._table import Table
from cavitas.cubical._diagram import PAIR_DTYPE, Diagram

SHAPES = {2: (48, 64), 3: (20, 28, 32)}


def scene(ndim: int, *, seed: int = 5, dtype=np.float32) -> tuple[np.ndarray, np.ndarray]:
    """Image and labels: four shells, each region the inside of one shell."""
    shape = SHAPES[ndim]
    rng = np.random.default_rng(seed)
    grid = np.indices(shape, dtype=np.float64)
    image = np.zeros(shape)
    labels = np.zeros(shape, np.int32)
    centres = [(0.3, 0.3), (0.3, 0.72), (0.72, 0.3), (0.7, 0.72)]
    for k, (fy, fx) in enumerate(centres, start=1):
        centre = [s / 2 for s in shape[:-2]] + [fy * shape[-2], fx * shape[-1]]
        radius = 4.0 + 1.5 * k if ndim == 2 else 3.0 + k
        dist = np.sqrt(sum((g - c) ** 2 for g, c in zip(grid, centre, strict=True)))
        image[np.abs(dist - radius) < 1.0] = 1.0
        labels[dist < radius - 1.0] = k
    image += rng.normal(0.0, 0.1, shape)
    if np.issubdtype(dtype, np.integer):
        image = (image.clip(0, 1.5) * 1000).astype(dtype)
    return image.astype(dtype), labels


def regions_of(labels: np.ndarray, *, spacing: tuple[float, ...]) -> Table:
    """A region table in the shape measure_regions gives (a subset of its columns)."""
    ids = np.unique(labels[labels > 0])
    count = ndimage.sum_labels(np.ones(labels.shape), labels, ids)
    centres = np.array(ndimage.center_of_mass(np.ones(labels.shape), labels, ids))
    axes = "zyx"[3 - labels.ndim:]
    columns = {"label": ids, "volume": count * float(np.prod(spacing)),
               "sphericity": np.linspace(0.7, 0.95, len(ids)),
               "persistence": np.linspace(0.5, 0.9, len(ids)),
               "margin": np.array([0.4, 0.05, 0.3, 0.2])[: len(ids)],
               "touches_border": np.zeros(len(ids), bool)}
    columns.update({f"centroid_voxel_{a}": centres[:, i] for i, a in enumerate(axes)})
    return Table(columns, units={"volume": "µm³" if labels.ndim == 3 else "µm²",
                                 "persistence": "a.u."})


def diagram(ndim: int, n_regions: int) -> Diagram:
    """A hand-made diagram: ``n_regions`` long cavity pairs and a few short ones."""
    births = np.array([1.0] * (n_regions + 3))
    deaths = np.r_[np.linspace(0.0, 0.3, n_regions), [0.9, 0.95, 0.97]]
    rows = np.array(list(zip(births, deaths, range(len(births)), range(len(births)),
                             strict=True)), dtype=PAIR_DTYPE)
    h0 = np.array([(1.2, -np.inf, 0, -1)], dtype=PAIR_DTYPE)
    return Diagram({0: h0, ndim - 1: rows}, shape=SHAPES[ndim], walls="bright",
                   connectivity=1)
