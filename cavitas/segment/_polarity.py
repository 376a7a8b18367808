"""The polarity check: would the other polarity (bright or dark walls) fit the image better?

Walls are the thin phase that encloses, regions the thick phase enclosed. With the wrong
polarity the regions are what lies between the real regions (the membranes, the
organelles, the matrix around pores): many small pieces covering little of the image, while
the other polarity finds fewer, larger regions covering much more of it. So the check runs
the detection once more at the chosen scale with the other polarity and compares the
significant cavities of both (the innermost ones, as the chambers will be): their count,
the share of the image they cover, and their median size.

Measured on the shared real scans (ten EM slices with dark membranes, a confocal membrane
slice, a confocal embryo, a concrete micro-CT) and the invented scenes, each run with both
polarities: with the wrong one, the other polarity's cavities covered 2.5-7.5× more of the
EM slices and 10× more of the confocal slice, with a median size 5.6-122× larger; on the
embryo, sheets and foams the wrong polarity found (next to) nothing. With the right one,
the other covered at most 0.41× as much, except on the concrete (one region: the matrix)
and the capsules (1.7× the cover, 3× the size: bright shells around dark cores are regions
in both polarities). A pore-in-matrix scan with the wrong polarity shows one region (the
matrix) where the right one shows hundreds.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["CavityCensus", "census", "polarity_hint"]

#: The other polarity must cover this many times more of the image ...
COVER_RATIO = 2.0
#: ... with regions this many times larger (median) ...
SIZE_RATIO = 4.0
#: ... and at least this many regions.
MIN_REGIONS = 3
#: Or: this polarity finds fewer than MIN_REGIONS and the other this many times more.
COUNT_RATIO = 10.0


@dataclass(frozen=True)
class CavityCensus:
    """The innermost significant cavities of one polarity at one scale."""

    count: int            # cavities
    cover: float          # share of the image they cover (their breach regions)
    median_size: float    # median voxels (0 when there is none)


def census(parent: np.ndarray, size: np.ndarray, passing: np.ndarray,
           n_voxels: int) -> CavityCensus:
    """The passing nodes of a cavity tree that have no passing node inside them.

    Examples
    --------
    >>> parent = np.array([-1, 0, 1, 0])   # node 2 lies inside node 1
    >>> size = np.array([0, 50, 10, 30])
    >>> census(parent, size, np.array([False, True, True, True]), 100)
    CavityCensus(count=2, cover=0.4, median_size=20.0)
    """
    inner = passing.copy()
    has_child = np.zeros(len(parent), bool)
    has_child[parent[passing & (parent >= 0)]] = True
    inner &= ~has_child
    sizes = size[inner].astype(np.float64)
    return CavityCensus(int(inner.sum()), float(sizes.sum() / max(n_voxels, 1)),
                        float(np.median(sizes)) if sizes.size else 0.0)


def polarity_hint(ours: CavityCensus, other: CavityCensus, other_walls: str,
                  voxel_word: str = "voxels") -> str | None:
    """One sentence when the other polarity fits markedly better, else None.

    Examples
    --------
    >>> polarity_hint(CavityCensus(200, 0.13, 130), CavityCensus(37, 0.43, 1000), "dark")[:45]
    'The walls may be dark rather than bright: wit'
    >>> polarity_hint(CavityCensus(37, 0.43, 1000), CavityCensus(200, 0.13, 130), "bright")
    """
    larger = (other.count >= MIN_REGIONS and other.cover >= COVER_RATIO * ours.cover
              and other.median_size >= SIZE_RATIO * ours.median_size)
    more = ours.count < MIN_REGIONS and other.count >= COUNT_RATIO * max(ours.count, 1)
    if not (larger or more):
        return None
    this = "bright" if other_walls == "dark" else "dark"
    return (f"The walls may be {other_walls} rather than {this}: with --walls {other_walls} "
            f"the significant cavities number {other.count} (here {ours.count}), cover "
            f"{other.cover:.0%} of the image (here {ours.cover:.0%}) and have a median size "
            f"of {other.median_size:.0f} {voxel_word} (here {ours.median_size:.0f}).")
