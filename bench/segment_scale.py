"""Memory and time of a whole ``segment_file`` run as the volume grows.

Input (invented, for this measurement only): a Voronoi foam (one cell per 24^3 voxels,
walls where neighbouring cells meet, about two voxels thick), blurred (σ 1 voxel), walls
1000 above a background of 500, Gaussian noise σ 120, stored as uint16 TIFF: 128^3 and
256^3 voxels (512^3 with ``--large``).

Each size runs in a fresh interpreter (``report=False``, so the segmentation is
isolated; the largest size once more with the report): peak RSS per voxel above the
interpreter's baseline (taken after a 24^3 warm-up run has loaded every module and
compiled kernel), wall time, and the split per step from ``run.json``
(``timings_s``) and from the segmentation's own ``parameters.timings_s``.

Reference: one ``scipy.ndimage.gaussian_filter`` (σ 1, float32) plus one
``skimage.segmentation.watershed`` of the result (markers at its local minima), on the
same volume, in this process. Times are given as ratios to it.

Target: peak at most 40 bytes per voxel above the baseline on uint16 input (issue: 512^3
within 24 GiB with room to spare; before: 138 B/voxel); ``cavitas.io.estimate_memory_bytes``
must stay above the measured peak.
"""

from __future__ import annotations

import json
import subprocess
import sys
import tempfile
import textwrap
import time
from pathlib import Path

import numpy as np
import tifffile
from scipy import ndimage as ndi

from cavitas.io import estimate_memory_bytes

NAME = "segment_scale"

_ONE_RUN = textwrap.dedent("""
    import gc, json, resource, sys, time
    from pathlib import Path
    import numpy as np, tifffile
    from cavitas.workflow import segment_file

    def rss():
        return int(Path("/proc/self/statm").read_text().split()[1]) * 4096

    src, out, report = sys.argv[1], sys.argv[2], sys.argv[3] == "1"
    warm = Path(out + "-warm")  # load every module and compiled kernel before measuring
    warm.mkdir()
    noise = np.random.default_rng(0).normal(500, 50, (24, 24, 24))
    tifffile.imwrite(warm / "w.tif", noise.astype(np.uint16))
    segment_file(warm / "w.tif", warm / "out", None, progress=False, report=report)
    gc.collect()
    base = rss()
    start = time.perf_counter()
    summary = segment_file(src, out, None, progress=False, report=report)
    seconds = time.perf_counter() - start
    run = json.loads(Path(out, "run.json").read_text())
    print(json.dumps({"seconds": seconds, "base": base, "regions": summary["regions"],
                      "peak": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024,
                      "steps": run["timings_s"], "segment": run["parameters"]["timings_s"]}))
""")


def foam_volume(side: int, *, cell: int = 24, seed: int = 1) -> np.ndarray:
    """Invented uint16 foam of ``side``^3 voxels (see the module notes)."""
    rng = np.random.default_rng(seed)
    seeds = np.zeros((side,) * 3, bool)
    seeds[tuple(rng.integers(0, side, (max(8, (side // cell) ** 3), 3)).T)] = True
    ids, _ = ndi.label(seeds)
    index = ndi.distance_transform_edt(~seeds, return_distances=False, return_indices=True)
    cells = ids[tuple(index)]
    del index
    wall = np.zeros(cells.shape, np.float32)
    for axis in range(3):
        change = np.diff(cells, axis=axis) != 0
        wall[(slice(None),) * axis + (slice(1, None),)] += change
        wall[(slice(None),) * axis + (slice(None, -1),)] += change
    del cells
    np.minimum(wall, 1.0, out=wall)
    ndi.gaussian_filter(wall, 1.0, output=wall)
    data = np.empty(wall.shape, np.uint16)
    for z in range(side):  # noise plane by plane: no second full-size float copy
        data[z] = (wall[z] * 1000 + 500 + rng.normal(0, 120, wall.shape[1:])).clip(0, 65535)
    return data


def _reference_seconds(data: np.ndarray) -> float:
    from skimage.segmentation import watershed

    start = time.perf_counter()
    smoothed = ndi.gaussian_filter(data, 1.0, output=np.float32)
    watershed(smoothed)
    return time.perf_counter() - start


def _run(src: Path, out: Path, *, report: bool) -> dict:
    done = subprocess.run([sys.executable, "-c", _ONE_RUN, str(src), str(out),
                           "1" if report else "0"], capture_output=True, text=True, check=True)
    return json.loads(done.stdout.strip().splitlines()[-1])


def _rows(side: int, figures: dict, reference: float, *, report: bool) -> list[dict]:
    voxels = side ** 3
    extra = (figures["peak"] - figures["base"]) / voxels
    planned = estimate_memory_bytes((side,) * 3, np.uint16)
    label = f"{side}^3 uint16{' + report' if report else ''}"
    steps = ", ".join(f"{k} {v / reference:.1f}" for k, v in figures["steps"].items())
    inner = ", ".join(f"{k} {v / reference:.1f}" for k, v in figures["segment"].items()
                      if k != "total")
    return [
        {"metric": f"{label}: peak RSS per voxel", "value": f"{extra:.1f} B",
         "target": "<= 40 B", "note": f"above the interpreter ({figures['base'] / 2**20:.0f} "
                                      f"MiB); {figures['peak'] / 2**30:.2f} GiB in all; io "
                                      f"estimate {planned / 2**30:.2f} GiB"},
        {"metric": f"{label}: time / reference", "value": f"{figures['seconds'] / reference:.1f}",
         "note": f"{figures['seconds']:.1f} s; reference {reference:.1f} s; "
                 f"{figures['regions']} regions"},
        {"metric": f"{label}: steps / reference", "value": "",
         "note": f"{steps}; in segment: {inner}"},
    ]


def run(args) -> list[dict]:
    """Rows of the benchmark (512^3 only with ``--large``)."""
    sides = [128, 256] + ([512] if getattr(args, "large", False) else [])
    rows = []
    with tempfile.TemporaryDirectory(prefix="cavitas-bench-scale-") as name:
        tmp = Path(name)
        for side in sides:
            data = foam_volume(side)
            src = tmp / f"foam{side}.tif"
            tifffile.imwrite(src, data)
            reference = _reference_seconds(data)
            del data
            rows += _rows(side, _run(src, tmp / f"out{side}", report=False), reference,
                          report=False)
            if side == sides[-1]:
                rows += _rows(side, _run(src, tmp / f"rep{side}", report=True), reference,
                              report=True)
            src.unlink()
    return rows
