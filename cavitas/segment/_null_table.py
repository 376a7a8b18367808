"""The noise null, tabulated once: cavity persistence of smoothed unit white noise.

The null of :mod:`cavitas.segment._noise` is the distribution of cavity persistence of
white noise of unit variance, Gaussian-smoothed as the image is. It depends on the
dimension, the connectivity and the per-axis smoothing σ (in voxels), and it is the same
for every image of that kind. It is therefore simulated once, by
:func:`simulate`, on a grid of σ (:data:`GRID`, per axis, every combination up to the
order of the axes) for :data:`REFERENCE_SHAPE` noise images over the seeds
:data:`NULL_SEEDS`, and shipped in the package (``null_table.npz``, arrays only). A run
interpolates it (:func:`tabulated_null`); ``python -m bench.make_null_table`` regenerates
the file and ``tests/test_null_table.py`` checks that regenerating part of it gives the
same numbers.

What is stored per grid point: the number of noise cavities in the pooled simulations
and their persistence at :data:`RANKS` ranks counted from the largest, log-spaced from the
largest to the smallest (the tail, where the significance rules look, is finest).

Between grid points (and for σ of axes in any order) the persistence values are
interpolated multilinearly in σ after dividing by the smoothed noise's standard
deviation (which carries most of the change with σ), the cavity count log-linearly,
quantile by quantile (the same rank share of each neighbour). Beyond the grid's last σ
the field is smooth on the voxel scale and the continuous limit applies: persistence in
units of the smoothed noise's deviation keeps its law, and the number of cavities per
voxel falls as the product of the σ (a stretched field; Adler & Taylor 2007, ch. 11–12).

Reference
---------
Adler, R. J., & Taylor, J. E. (2007). Random Fields and Geometry. Springer.
doi:10.1007/978-0-387-48116-6
"""

from __future__ import annotations

import functools
import itertools
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

__all__ = ["GRID", "NULL_SEEDS", "RANKS", "REFERENCE_SHAPE", "TABLE_PATH", "NullTable",
           "PooledNull", "build_table", "connectivities", "load_table", "simulate",
           "tabulated_null"]

#: Seeds of the noise-only images the null is simulated on (fixed: results are reproducible).
NULL_SEEDS = (11, 12, 13)
#: σ per axis (voxels) the null is tabulated at; every combination, axes in any order.
GRID = (0.0, 0.25, 0.5, 0.75, 1.0, 1.25, 1.5, 2.0, 2.5, 3.0, 4.0, 6.0)
#: Shape of each simulated noise image, per dimension.
REFERENCE_SHAPE = {2: (256, 256), 3: (64, 64, 64)}
#: Persistence values kept per grid point (at log-spaced ranks from the largest).
RANKS = 64
#: The shipped table (made by ``python -m bench.make_null_table``).
TABLE_PATH = Path(__file__).resolve().parent / "null_table.npz"


def connectivities(ndim: int) -> tuple[int, ...]:
    """The connectivities of a cubical complex in ``ndim`` dimensions: faces and full."""
    return (1, ndim)


def simulate(ndim: int, sigma: tuple[float, ...], connectivity: int) -> np.ndarray:
    """Sorted cavity persistence of :data:`NULL_SEEDS` unit white noise images of
    :data:`REFERENCE_SHAPE`, smoothed by ``sigma`` (voxels, per axis): the pooled sample.

    Examples
    --------
    >>> values = simulate(2, (2.0, 2.0), 1)
    >>> bool(values.size > 1000 and np.all(np.diff(values) >= 0) and values[0] > 0)
    True
    """
    from .. import cubical
    from ._noise import smooth

    pooled = []
    for seed in NULL_SEEDS:
        noise = np.random.default_rng(seed).standard_normal(REFERENCE_SHAPE[ndim])
        _, tree = cubical.cavity_sweep(smooth(noise, tuple(sigma)), walls="bright",
                                       connectivity=connectivity, mask=None)
        pers = tree.persistence[1:]
        pooled.append(pers[pers > 0])
    return np.sort(np.concatenate(pooled))


def rank_positions(count: int) -> np.ndarray:
    """The :data:`RANKS` ranks (1 = largest; fractional between) kept of ``count`` values."""
    return np.geomspace(1.0, max(count, 1), RANKS)


def summarise(values: np.ndarray) -> np.ndarray:
    """The persistence at :func:`rank_positions` of a sorted sample (float32).

    Examples
    --------
    >>> summarise(np.arange(1.0, 101.0))[[0, -1]]
    array([100.,   1.], dtype=float32)
    """
    if values.size == 0:
        return np.zeros(RANKS, np.float32)
    descending = values[::-1]
    ranks = np.arange(1, values.size + 1)
    return np.interp(rank_positions(values.size), ranks, descending).astype(np.float32)


@dataclass(frozen=True)
class NullTable:
    """The tabulated null of one dimension and connectivity.

    ``sigma`` holds each grid point's σ (sorted ascending per row), ``count`` its number of
    pooled noise cavities, ``levels`` its persistence at :func:`rank_positions`.
    """

    ndim: int
    connectivity: int
    sigma: np.ndarray    # (points, ndim) float64, each row ascending
    count: np.ndarray    # (points,) int64
    levels: np.ndarray   # (points, RANKS) float32

    def point(self, grid_index: tuple[int, ...]) -> int:
        """The row of the grid point with these :data:`GRID` indices (any order)."""
        return self._rows[tuple(sorted(grid_index))]

    @functools.cached_property
    def _rows(self) -> dict[tuple[int, ...], int]:
        index = {s: i for i, s in enumerate(GRID)}
        return {tuple(index[float(s)] for s in row): i for i, row in enumerate(self.sigma)}


def grid_points(ndim: int) -> list[tuple[float, ...]]:
    """Every σ combination of :data:`GRID` in ``ndim`` axes, axes sorted (the order is
    immaterial: the reference noise images are cubes)."""
    return [tuple(c) for c in itertools.combinations_with_replacement(GRID, ndim)]


def _key(ndim: int, connectivity: int, name: str) -> str:
    return f"d{ndim}_c{connectivity}_{name}"


def build_table(points: dict[int, list[tuple[float, ...]]] | None = None,
                workers: int = 1) -> dict[str, np.ndarray]:
    """The arrays of the table file: every connectivity of each dimension at ``points``
    (default: :func:`grid_points`), simulated in ``workers`` processes."""
    points = points or {ndim: grid_points(ndim) for ndim in REFERENCE_SHAPE}
    jobs = [(ndim, sigma, c) for ndim in sorted(points) for c in connectivities(ndim)
            for sigma in points[ndim]]
    if workers > 1:
        from concurrent.futures import ProcessPoolExecutor

        with ProcessPoolExecutor(workers) as pool:
            samples = list(pool.map(simulate, *zip(*jobs, strict=True)))
    else:
        samples = [simulate(*job) for job in jobs]
    arrays: dict[str, np.ndarray] = {"grid": np.asarray(GRID),
                                     "seeds": np.asarray(NULL_SEEDS)}
    for ndim in sorted(points):
        arrays[f"d{ndim}_shape"] = np.asarray(REFERENCE_SHAPE[ndim])
        for c in connectivities(ndim):
            mine = [(job[1], s) for job, s in zip(jobs, samples, strict=True)
                    if job[0] == ndim and job[2] == c]
            arrays[_key(ndim, c, "sigma")] = np.asarray([m[0] for m in mine], np.float64)
            arrays[_key(ndim, c, "count")] = np.asarray([m[1].size for m in mine], np.int64)
            arrays[_key(ndim, c, "levels")] = np.stack([summarise(m[1]) for m in mine])
    return arrays


@functools.lru_cache(maxsize=8)
def load_table(ndim: int, connectivity: int, path: Path = TABLE_PATH) -> NullTable:
    """The shipped table of ``ndim`` and ``connectivity`` (read once per process)."""
    with np.load(path, allow_pickle=False) as data:
        if tuple(data["grid"]) != GRID or tuple(data[f"d{ndim}_shape"]) != REFERENCE_SHAPE[ndim]:
            raise RuntimeError(f"{path} was made for another grid; regenerate it with "
                               "python -m bench.make_null_table.")
        return NullTable(ndim, connectivity, data[_key(ndim, connectivity, "sigma")],
                         data[_key(ndim, connectivity, "count")],
                         data[_key(ndim, connectivity, "levels")])


@dataclass(frozen=True)
class PooledNull:
    """An interpolated pooled sample: ``values`` (ascending) over ``voxels`` voxels."""

    values: np.ndarray
    voxels: int


def _bracket(sigma: float) -> list[tuple[int, float]]:
    """Grid indices around ``sigma`` (clamped to the grid) with their linear weights."""
    s = min(max(sigma, 0.0), GRID[-1])
    upper = int(np.searchsorted(GRID, s, side="left"))
    if GRID[upper] == s:
        return [(upper, 1.0)]
    lower = upper - 1
    weight = (s - GRID[lower]) / (GRID[upper] - GRID[lower])
    return [(lower, 1.0 - weight), (upper, weight)]


def tabulated_null(sigma: tuple[float, ...], connectivity: int) -> PooledNull:
    """The pooled null sample at ``sigma`` (voxels; 2 or 3 axes), interpolated in the table.

    Examples
    --------
    >>> on_grid = tabulated_null((1.0, 1.0), 1)
    >>> between = tabulated_null((1.0, 1.25), 1)
    >>> coarser = tabulated_null((1.5, 1.0), 1)
    >>> bool(coarser.values[-1] < between.values[-1] < on_grid.values[-1])
    True
    """
    from ._noise import smoothed_noise_sigma

    ndim = len(sigma)
    table = load_table(ndim, connectivity)
    deviation = smoothed_noise_sigma(1.0, sigma)
    # beyond the grid: the continuous limit (fewer cavities per voxel, same law in units
    # of the smoothed noise's deviation)
    log_count = sum(math.log(GRID[-1] / s) for s in sigma if s > GRID[-1])
    corners = []
    for choice in itertools.product(*(_bracket(float(s)) for s in sigma)):
        weight = math.prod(w for _, w in choice)
        row = table.point(tuple(i for i, _ in choice))
        corner_sigma = tuple(GRID[i] for i, _ in choice)
        corners.append((weight, row, smoothed_noise_sigma(1.0, corner_sigma)))
        log_count += weight * math.log(max(int(table.count[row]), 1))
    count = int(round(math.exp(log_count)))
    # the same rank share of every corner: rank r of `count` is rank r·n/count of n
    share = np.arange(1, count + 1) / count
    blended = np.zeros(count)
    for weight, row, corner_deviation in corners:
        n = int(table.count[row])
        positions = np.log(rank_positions(n))
        at = np.log(np.clip(share * n, 1.0, max(n, 1)))
        blended += weight * np.interp(at, positions, table.levels[row].astype(np.float64)) \
            / corner_deviation
    voxels = len(NULL_SEEDS) * math.prod(REFERENCE_SHAPE[ndim])
    return PooledNull(blended[::-1] * deviation, voxels)
