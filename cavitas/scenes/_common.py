"""Shared parts of the scene generators: the Scene type, parameter checks, and the
imaging steps (blur, polarity, illumination, noise) applied to a clean wall image.

Every scene is **invented data**, made for the demo and for benchmarks only; nothing here
models a real instrument closely enough to serve as a check value.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import ndimage as ndi

from .. import _checks
from .._errors import ParameterError

__all__ = ["Scene"]

#: Unit of every scene's spacing.
UNIT = "µm"


@dataclass(frozen=True, eq=False)
class Scene:
    """A synthetic image with the ground truth of its chambers (invented data).

    Attributes
    ----------
    image : ndarray of float32
        The rendered image, ``(z, y, x)`` or ``(y, x)``. Before illumination and noise,
        walls are 1 and everything else 0 (``walls="bright"``); ``walls="dark"`` renders
        ``1 - that`` so walls are dark on a bright background.
    truth : ndarray of int32
        Label map of the chambers, ``1..N``; 0 marks walls and the medium outside.
    spacing : tuple of float
        Voxel size per axis in ``unit``, same order as the axes.
    unit : str
        Physical unit of ``spacing`` (``"µm"``).
    border_labels : tuple of int
        Labels of ``truth`` that touch the scan border (cut by it, hence not enclosed in
        the scan); they stay in ``truth`` but scoring usually treats them apart.
    description : str
        One paragraph saying what the scene shows and how it was made.
    params : dict
        The generator's name and the parameters it was called with.
    """

    image: np.ndarray
    truth: np.ndarray
    spacing: tuple[float, ...]
    unit: str = UNIT
    border_labels: tuple[int, ...] = ()
    description: str = ""
    params: dict[str, Any] = field(default_factory=dict)

    @property
    def n_labels(self) -> int:
        """Number of chambers in ``truth`` (border-cut ones included)."""
        return int(self.truth.max(initial=0))

    @property
    def volume(self) -> Any:
        """The image as a :class:`cavitas.io.Volume` with the scene's spacing and unit."""
        from ..io import Volume

        return Volume(self.image, spacing=self.spacing, unit=self.unit,
                      meta={"scene": self.params.get("generator", "")})


# -- parameter checks ------------------------------------------------------------------

def check_shape(shape: Sequence[int], ndim: int) -> tuple[int, ...]:
    """Return ``shape`` as a tuple of ``ndim`` ints >= 8, or raise ParameterError."""
    shape = _checks.shape(shape)
    if len(shape) != ndim or min(shape) < 8:
        raise ParameterError(
            f"shape must have {ndim} axes of at least 8 voxels each; got {shape}."
        )
    return shape


def check_range(name: str, value: float, low: float, high: float = np.inf) -> float:
    """Return ``value`` as float if ``low <= value <= high``, else raise ParameterError."""
    value = float(value)
    if not (np.isfinite(value) and low <= value <= high):
        raise ParameterError(f"{name} must be in [{low}, {high}]; got {value}.")
    return value


def check_count(name: str, value: int, low: int = 0) -> int:
    """Return ``value`` as int if it is a whole number >= ``low``, else raise ParameterError."""
    if not isinstance(value, (int, np.integer, float)) or int(value) != value or value < low:
        raise ParameterError(f"{name} must be a whole number >= {low}; got {value!r}.")
    return int(value)


def check_imaging(*, noise: float, ramp: float, blur: float, walls: str) -> None:
    """Check the imaging options every generator shares, or raise ParameterError."""
    check_range("noise", noise, 0.0, 10.0)
    check_range("ramp", ramp, 0.01, 100.0)
    check_range("blur", blur, 0.0, 20.0)
    _checks.walls(walls)


def fmt_extent(extent: Iterable[float]) -> str:
    """A physical extent as ``"a x b x c"`` for messages."""
    return " x ".join(f"{v:.4g}" for v in extent)


# -- geometry helpers ------------------------------------------------------------------

def physical_grid(shape: tuple[int, ...], spacing: tuple[float, ...]) -> np.ndarray:
    """Voxel centres in physical units, as a ``(n_voxels, ndim)`` float64 array (C order)."""
    axes = [np.arange(n, dtype=np.float64) * s for n, s in zip(shape, spacing, strict=True)]
    return np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, len(shape))


def soft_wall(distance: np.ndarray, half_thickness: float | np.ndarray,
              step: float | np.floating) -> np.ndarray:
    """Partial-volume wall profile: 1 inside the wall, 0 outside, a linear ramp one voxel
    (``step``, physical units) wide centred on the wall surface ``distance == half_thickness``.
    """
    return np.clip((half_thickness - distance) / step + 0.5, 0.0, 1.0)


def border_labels(truth: np.ndarray) -> tuple[int, ...]:
    """Sorted labels (> 0) of ``truth`` present on any face of the array."""
    faces = [truth[tuple(slice(None) if a != axis else end for a in range(truth.ndim))]
             for axis in range(truth.ndim) for end in (0, -1)]
    found = np.unique(np.concatenate([f.ravel() for f in faces]))
    return tuple(int(v) for v in found if v > 0)


def split_components(truth: np.ndarray) -> np.ndarray:
    """Give each connected piece of each label its own label (full connectivity, the
    cavity side of the default faces-only walls), so a label cut into pieces by the scan
    border becomes one label per piece. Labels must not touch each other. Returns
    :func:`relabel` of the result."""
    pieces, _ = ndi.label(truth > 0, structure=np.ones((3,) * truth.ndim, bool))
    key = pieces.astype(np.int64) * (int(truth.max(initial=0)) + 1) + truth
    return relabel(np.where(truth > 0, key, 0))


def relabel(truth: np.ndarray) -> np.ndarray:
    """Relabel the positive values of ``truth`` to ``1..N`` in order of first appearance
    in C order (raster order), as int32; 0 stays 0."""
    flat = truth.ravel()
    values, first = np.unique(flat, return_index=True)
    keep = values > 0
    order = np.argsort(first[keep], kind="stable")
    lut = np.zeros(int(values.max(initial=0)) + 1, dtype=np.int32)
    lut[values[keep][order]] = np.arange(1, order.size + 1, dtype=np.int32)
    return lut[truth].astype(np.int32, copy=False)


def poisson_disc(rng: np.random.Generator, n: int, low: np.ndarray, high: np.ndarray,
                 min_distance: float, *, tries: int = 60) -> np.ndarray:
    """Draw up to ``n`` points uniformly in the box ``[low, high)`` no closer than
    ``min_distance`` to each other (dart throwing; deterministic for the generator).

    Stops early when ``tries * n`` candidates have been drawn; returns ``(m, ndim)``, m <= n.
    """
    low = np.asarray(low, float)
    high = np.asarray(high, float)
    points = np.empty((n, low.size))
    m = 0
    batch = 256
    for _ in range(max(1, tries * n // batch)):
        for cand in rng.uniform(low, high, size=(batch, low.size)):
            if m == 0 or np.min(np.sum((points[:m] - cand) ** 2, axis=1)) >= min_distance**2:
                points[m] = cand
                m += 1
                if m == n:
                    return points
    return points[:m]


def seed_cells(rng: np.random.Generator, cells: int, extent: np.ndarray,
               min_fraction: float) -> tuple[np.ndarray, float]:
    """Seeds of ``cells`` cells filling a scan of physical ``extent`` and a margin around it.

    The seeds lie in the scan grown by half the minimum distance on every side, so the
    cells continue past the border; the minimum distance is ``min_fraction`` of the mean
    distance ``d`` between seeds, found from ``cells = prod(extent + min_fraction * d) / d**ndim``
    by fixed-point iteration. Returns the seeds ``(cells, ndim)`` and ``d``.
    """
    ndim = len(extent)
    mean = (np.prod(extent) / cells) ** (1.0 / ndim)
    for _ in range(50):
        mean = (np.prod(extent + min_fraction * mean) / cells) ** (1.0 / ndim)
    margin = min_fraction * mean / 2.0
    seeds = poisson_disc(rng, cells, -margin * np.ones(ndim), extent + margin,
                         min_fraction * mean)
    if len(seeds) < cells:
        raise ParameterError(
            f"Could not place cells={cells} seeds at least {min_fraction * mean:.3g} µm "
            f"apart in a scan of {fmt_extent(extent)} µm; lower cells."
        )
    return seeds, float(mean)


# -- imaging ---------------------------------------------------------------------------

def illumination(shape: tuple[int, ...], ramp: float) -> np.ndarray:
    """Multiplicative gain rising linearly from 1 at the first corner (index 0 on every
    axis) to ``ramp`` at the opposite corner, along the main diagonal of the index grid."""
    t = sum(
        (np.arange(n, dtype=np.float32) / max(n - 1, 1)).reshape(
            [-1 if a == axis else 1 for a in range(len(shape))])
        for axis, n in enumerate(shape)
    ) / len(shape)
    return np.asarray(1.0 + (ramp - 1.0) * t, dtype=np.float32)


def render(clean: np.ndarray, rng: np.random.Generator, *, blur: float, walls: str,
           ramp: float, noise: float) -> np.ndarray:
    """Turn a clean wall image (walls 1, rest 0) into the scene image, in this order:

    1. Gaussian blur of standard deviation ``blur`` voxels on every axis;
    2. polarity: ``walls="dark"`` takes ``1 - image``;
    3. illumination: multiply by :func:`illumination` (1 → ``ramp`` across the image);
    4. noise: add Gaussian noise of standard deviation ``noise`` (the wall-to-interior
       contrast before illumination is 1, so ``noise`` is a fraction of it; under a ramp
       the local contrast is ``gain`` and the noise stays ``noise``).

    Returns float32.
    """
    image = clean.astype(np.float32)
    if blur > 0:
        image = ndi.gaussian_filter(image, sigma=blur, mode="nearest")
    if walls == "dark":
        image = 1.0 - image
    if ramp != 1.0:
        image *= illumination(image.shape, ramp)
    if noise > 0:
        image += np.float32(noise) * rng.standard_normal(image.shape, dtype=np.float32)
    return image.astype(np.float32, copy=False)
