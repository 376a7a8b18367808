"""Euler characteristic curves and the bottleneck distance against reference runs.

Inputs (invented, for this measurement only): the smoothed-noise 256^3 uint16 volume of
``bench/persistence.py``; the cavity diagrams (H1) of 2D white-noise images, about 3,000
and 20,000 points each.

References, in the same process: one ``scipy.ndimage.label`` of the walls at the median
level (a threshold-by-threshold curve needs one per level; ours covers every level); the
previous bisection bottleneck (``tests/bottleneck_bisection.py``: an explicit pair graph
per test, over 9 minutes at 20,000 points, so only the 3,000-point diagrams are timed
against it); gudhi's ``bottleneck_distance(e=0)`` when the optional gudhi is installed.

Targets: the curve within 15x one labelling (labelling each level instead would take one
per distinct level, tens of thousands here); the bottleneck of the 20,000-point diagrams
within 10 s.
"""

from __future__ import annotations

import time

import numpy as np
from scipy import ndimage as ndi

from bench.persistence import smoothed_noise
from cavitas.cubical import bottleneck, euler_curve, persistence
from tests.bottleneck_bisection import bisection_bottleneck

NAME = "topology"


def _timed(fn, *args, **kwargs) -> tuple[float, object]:
    start = time.perf_counter()
    result = fn(*args, **kwargs)
    return time.perf_counter() - start, result


def noise_diagram(side: int, seed: int) -> np.ndarray:
    """(birth, death) rows of the cavities of a white-noise image (invented data)."""
    pairs = persistence(np.random.default_rng(seed).normal(size=(side, side))).pairs(1)
    return np.column_stack([pairs["birth"], pairs["death"]])


def _euler_rows() -> list[dict]:
    volume = smoothed_noise(256)
    euler_curve(volume[:8, :8, :8])  # compile outside the timing
    ours, _ = _timed(euler_curve, volume)
    walls = volume >= np.median(volume)
    label, _ = _timed(ndi.label, walls)
    return [{"metric": "Euler curve 256^3 uint16, every level: s", "value": f"{ours:.2f}"},
            {"metric": "  / one scipy.ndimage.label", "value": f"{ours / label:.1f}",
             "target": "<= 15", "note": f"{len(np.unique(volume))} levels"}]


def _bottleneck_rows() -> list[dict]:
    small_a, small_b = noise_diagram(170, 1), noise_diagram(170, 2)
    bottleneck(small_a[:10], small_b[:10], 0)  # compile outside the timing
    ours, found = _timed(bottleneck, small_a, small_b, 0)
    before, previous = _timed(bisection_bottleneck, small_a, small_b, 0)
    rows = [{"metric": f"bottleneck {len(small_a)} vs {len(small_b)} points: previous / ours",
             "value": f"{before / ours:.0f}",
             "note": f"{before:.1f} s / {ours:.2f} s, same value: {found == previous}"}]
    big_a, big_b = noise_diagram(430, 1), noise_diagram(430, 2)
    ours, _ = _timed(bottleneck, big_a, big_b, 0)
    rows.append({"metric": f"bottleneck {len(big_a)} vs {len(big_b)} points: s",
                 "value": f"{ours:.2f}", "target": "<= 10"})
    try:
        import gudhi
    except ImportError:
        rows.append({"metric": "  / gudhi bottleneck_distance", "value": "-",
                     "note": "gudhi not installed (pip install cavitas[bench])"})
    else:
        theirs, _ = _timed(gudhi.bottleneck_distance, big_a, big_b, 0.0)
        rows.append({"metric": "  / gudhi bottleneck_distance", "value": f"{ours / theirs:.2f}"})
    return rows


def run(args) -> list[dict]:
    """Time the Euler curve and the bottleneck distance; return rows for the table."""
    return _euler_rows() + _bottleneck_rows()
