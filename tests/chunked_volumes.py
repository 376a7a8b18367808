"""Invented volumes and chunkings shared by the chunked-engine tests."""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass

import numpy as np

__all__ = ["Case", "LatticeCase", "cell_lattice", "lattice_case", "random_cases",
           "random_chunks"]


def random_chunks(rng, size, largest):
    """Random chunk sizes of at most ``largest`` adding up to ``size``."""
    sizes = []
    while sum(sizes) < size:
        sizes.append(int(rng.integers(1, min(largest, size - sum(sizes)) + 1)))
    return tuple(sizes)


def cell_lattice(rng, shape, pitch=4):
    """Bright walls on a lattice of period ``pitch`` around dark cells, with noise: one
    cavity per cell (invented data)."""
    wall = np.zeros(shape, bool)
    for axis_coord in np.indices(shape):
        wall |= axis_coord % pitch == 0
    return (np.where(wall, 180, 40) + rng.integers(0, 30, size=shape)).astype(np.uint16)


@dataclass(frozen=True)
class Case:
    """One random volume with its options and chunking."""

    image: np.ndarray
    connectivity: int
    walls: str
    mask: np.ndarray | None
    chunks: tuple[tuple[int, ...], ...]


def random_cases(rng, ndim, count) -> Iterator[Case]:
    """Small random volumes (ties, float32 around zero, uint16), every connectivity and
    polarity, a mask in one case of four, random chunks of 1 to 4 voxels."""
    for case in range(count):
        shape = tuple(int(rng.integers(1, 9)) for _ in range(ndim))
        image = rng.integers(0, int(rng.choice([2, 5, 300])), size=shape)
        image = image.astype(np.float32) - 2 if case % 3 == 0 else image.astype(np.uint16)
        mask = None
        if case % 4 == 3:
            mask = rng.random(shape) < 0.7
            mask.flat[0] = True
        chunks = tuple(random_chunks(rng, s, int(rng.integers(1, 5))) for s in shape)
        yield Case(image, (1, ndim)[case % 2], ("bright", "dark")[case // 2 % 2], mask, chunks)


@dataclass(frozen=True)
class LatticeCase:
    """Eight cells (interiors 1..3 and 5..7 on each axis) with a ragged ROI edge, cut by
    chunks of one voxel's thickness through the cells."""

    image: np.ndarray
    mask: np.ndarray
    chunks: tuple[tuple[int, ...], ...] = ((2, 1, 3, 1, 2), (2, 4, 3), (3, 3, 4))


def lattice_case(connectivity, walls) -> LatticeCase:
    """The cluster tests' volume for one connectivity and polarity."""
    rng = np.random.default_rng([connectivity, walls == "bright"])
    image = cell_lattice(rng, (9, 9, 10))
    if walls == "dark":
        image = image.max() - image
    mask = np.ones(image.shape, bool)
    mask[:, :, 8:] = rng.random((9, 9, 2)) < 0.5
    return LatticeCase(image, mask)
