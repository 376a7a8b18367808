"""The whole diagram of a volume (H0, H1, H2) against gudhi's cubical persistence.

Input (invented, for this measurement only): the smoothed-noise uint16 volumes of
``bench/persistence.py`` at 96^3 and 128^3, and 256^3 for the time and memory lines.

Reference, in the same process: gudhi's ``CubicalComplex`` (the general-purpose
computational-topology library, an optional extra: ``pip install cavitas[bench]``; without
it those rows say so), which computes every dimension of the same filtration: its
top-dimensional cells are our ``connectivity=3``, its vertices our ``connectivity=1``, both
sublevel, i.e. our ``walls="dark"``. Both diagrams are compared before their times are
reported. gudhi reads float64, so it is given the image as float64 (not timed).

Targets: ours / gudhi <= 1 at 96^3 and 128^3. "ours" is one ``persistence(image,
dims=(0, 1, 2))`` call as a user makes it (H1 in one thread, the two sweeps in another on a
machine with two or more cores). The 256^3 lines state the time and the peak extra bytes
per voxel of that call (fresh process, peak RSS), for the default and ``parallel=False``.
"""

from __future__ import annotations

import subprocess
import sys
import time
from collections import Counter
from pathlib import Path

import numpy as np

from bench.persistence import _rss_kib, smoothed_noise
from cavitas._cores import usable_cores
from cavitas.cubical import Diagram, persistence

NAME = "whole_diagram"
ALL = (0, 1, 2)


def _gudhi():
    try:
        import gudhi
    except ImportError:
        return None
    return gudhi


def _gudhi_diagram(gudhi, image: np.ndarray, connectivity: int) -> list[Counter]:
    """Per dimension, the (birth, death) multiset of gudhi's cubical persistence."""
    cells = (gudhi.CubicalComplex(vertices=image) if connectivity == 1
             else gudhi.CubicalComplex(top_dimensional_cells=image))
    cells.compute_persistence(homology_coeff_field=2, min_persistence=0)
    out = []
    for dim in ALL:
        pairs = np.asarray(cells.persistence_intervals_in_dimension(dim)).reshape(-1, 2)
        out.append(Counter(map(tuple, pairs[pairs[:, 0] != pairs[:, 1]].tolist())))
    return out


def _as_counters(dgm: Diagram) -> list[Counter]:
    return [Counter(zip(dgm.pairs(d)["birth"].tolist(), dgm.pairs(d)["death"].tolist(),
                        strict=True)) for d in ALL]


def _timed(fn, *args, **kwargs):
    wall, cpu = time.perf_counter(), time.process_time()
    out = fn(*args, **kwargs)
    return time.perf_counter() - wall, time.process_time() - cpu, out


def _against_gudhi(gudhi, side: int) -> list[dict]:
    image = smoothed_noise(side)
    as_float = image.astype(np.float64)
    rows = []
    for connectivity in (3, 1):
        wall, cpu, dgm = _timed(persistence, image, walls="dark", connectivity=connectivity,
                                dims=ALL)
        g_wall, g_cpu, theirs = _timed(_gudhi_diagram, gudhi, as_float, connectivity)
        same = _as_counters(dgm) == theirs
        tag = f"{side}^3 connectivity {connectivity}"
        rows += [
            {"metric": f"{tag} ours (H0 + H1 + H2)", "value": f"{wall:.2f} s (cpu {cpu:.2f} s)",
             "note": f"{len(dgm.pairs(1))} H1 pairs; {usable_cores()} core(s)"},
            {"metric": f"{tag} gudhi", "value": f"{g_wall:.2f} s",
             "note": "same diagram" if same else "DIAGRAMS DIFFER"},
            {"metric": f"{tag} ours / gudhi",
             "value": f"{wall / g_wall:.2f} (cpu {cpu / g_cpu:.2f})", "target": "<= 1"},
        ]
    return rows


def _child_peak(side: int, parallel: bool) -> str:
    """Wall and CPU time and extra peak RSS (bytes) of one whole-diagram call, in this
    (fresh) process."""
    image = smoothed_noise(side)
    persistence(smoothed_noise(24), dims=ALL, parallel=parallel)  # kernels loaded
    try:
        Path("/proc/self/clear_refs").write_text("5")  # reset VmHWM to the current RSS
    except OSError:
        return "-1 -1 -1"
    before = _rss_kib("VmRSS")
    wall, cpu, _ = _timed(persistence, image, dims=ALL, parallel=parallel)
    return f"{wall} {cpu} {(_rss_kib('VmHWM') - before) * 1024}"


def _in_fresh_process(side: int, parallel: bool) -> tuple[float, float, int]:
    code = f"from bench.whole_diagram import _child_peak; print(_child_peak({side}, {parallel}))"
    root = Path(__file__).resolve().parent.parent
    out = subprocess.run([sys.executable, "-c", code], cwd=root, capture_output=True,
                         text=True, check=True)
    wall, cpu, peak = out.stdout.split()[-3:]
    return float(wall), float(cpu), int(peak)


def run(args) -> list[dict]:
    """Ours against gudhi at 96^3 and 128^3; time and memory at 256^3."""
    persistence(smoothed_noise(16), dims=ALL)  # compile (or load the cached kernels)
    rows: list[dict] = []
    gudhi = _gudhi()
    if gudhi is None:
        rows.append({"metric": "gudhi comparison", "value": "skipped",
                     "note": "gudhi is not installed (pip install cavitas[bench])"})
    else:
        for side in (96, 128):
            rows += _against_gudhi(gudhi, side)
    n = 256**3
    for parallel, label in ((True, "default"), (False, "parallel=False")):
        wall, cpu, peak = _in_fresh_process(256, parallel)
        rows += [
            {"metric": f"256^3 ours (H0 + H1 + H2), {label}",
             "value": f"{wall:.1f} s (cpu {cpu:.1f} s)",
             "note": "fresh process, bright walls, connectivity 1"},
            {"metric": f"256^3   extra bytes per voxel (peak RSS), {label}",
             "value": f"{peak / n:.1f}", "note": "beyond the input"},
        ]
    return rows
