"""Batch throughput (--jobs 2 against --jobs 1) and one 512^3 volume through ``segment``.

Input (invented, for this measurement only): foam scenes from ``cavitas.scenes`` stored as
uint16 TIFF: 20 volumes of 48^3 for the throughput, and with ``--large`` one 512^3 volume
(a 128^3 foam repeated 4 times per axis, then noise at full resolution).

Targets: jobs 2 / jobs 1 throughput >= 1.6 on two free cores; 512^3 uint16 peak RSS well
under the machine's 24 GiB (``cavitas.io.estimate_memory_bytes``: 54 bytes per voxel,
6.8 GiB).
Run: ``python -m bench --only batch [--large]``.
"""

from __future__ import annotations

import json
import resource
import subprocess
import sys
import tempfile
import textwrap
import time
from pathlib import Path

import numpy as np
import tifffile

from cavitas.batch import run_batch
from cavitas.io import estimate_memory_bytes
from cavitas.scenes import foam

NAME = "batch"

_SEGMENT_ONE = textwrap.dedent("""
    import cProfile, json, pstats, resource, sys, time
    from cavitas.workflow import segment_file
    from cavitas import io
    src, out = sys.argv[1], sys.argv[2]
    start = time.perf_counter()
    profile = cProfile.Profile()
    profile.enable()
    summary = segment_file(src, out, None, progress=False)
    profile.disable()
    total = time.perf_counter() - start
    stats = pstats.Stats(profile).stats
    own = [(v[3], f"{k[0].rsplit('cavitas/', 1)[-1]}:{k[2]}") for k, v in stats.items()
           if "/cavitas/" in k[0] and k[2] not in ("segment_file", "<module>")]
    run = json.load(open(out + "/run.json"))
    print(json.dumps({"seconds": total, "peak_kib": resource.getrusage(
        resource.RUSAGE_SELF).ru_maxrss, "regions": summary["regions"],
        "timings": run["parameters"].get("timings_s", {}),
        "top": sorted(own, reverse=True)[:8]}))
""")


def _scene_file(path: Path, side: int, seed: int) -> None:
    """Invented foam volume of ``side``^3 as uint16 TIFF (built coarse for large sides)."""
    coarse = min(side, 128)
    scene = foam((coarse,) * 3, cells=max(8, coarse // 3), noise=0.0, seed=seed)
    image = scene.image
    if side > coarse:
        reps = side // coarse
        image = image.repeat(reps, 0).repeat(reps, 1).repeat(reps, 2)
    rng = np.random.default_rng(seed)
    data = np.empty(image.shape, np.uint16)
    for z in range(image.shape[0]):  # noise plane by plane: no second full float copy
        plane = image[z] * 1000 + 500 + rng.normal(0, 80, image.shape[1:])
        data[z] = plane.clip(0, 65535)
    tifffile.imwrite(path, data)


def _throughput(tmp: Path, count: int = 20, side: int = 48) -> list[dict]:
    src = tmp / "small"
    src.mkdir()
    for i in range(count):
        _scene_file(src / f"foam{i:02d}.tif", side, seed=i)
    run_batch([src / "foam00.tif"], tmp / "warm", jobs=1, progress=False)  # compile caches
    seconds: dict[int, float] = {1: float("inf"), 2: float("inf")}
    for attempt in range(2):  # best of two: other processes on the machine add noise
        for jobs in (1, 2):
            start = time.perf_counter()
            out = run_batch([src], tmp / f"jobs{jobs}-{attempt}", jobs=jobs, progress=False)
            seconds[jobs] = min(seconds[jobs], time.perf_counter() - start)
            assert out.exit_code == 0, out.failed
    same = all((tmp / "jobs1-0" / n / "regions.csv").read_bytes()
               == (tmp / "jobs2-0" / n / "regions.csv").read_bytes()
               for n in (r["name"] for r in out.results))
    return [
        {"metric": f"{count} x {side}^3 uint16, --jobs 1", "value": f"{seconds[1]:.2f} s",
         "note": f"{count / seconds[1]:.2f} inputs/s"},
        {"metric": f"{count} x {side}^3 uint16, --jobs 2", "value": f"{seconds[2]:.2f} s",
         "note": f"{count / seconds[2]:.2f} inputs/s; outputs identical: {same}"},
        {"metric": "throughput jobs 2 / jobs 1", "value": f"{seconds[1] / seconds[2]:.2f}",
         "target": ">= 1.6", "note": "best of 2 runs each; the 2 cores are shared with other work"},
    ]


def _large(tmp: Path, side: int = 512) -> list[dict]:
    src = tmp / f"foam{side}.tif"
    _scene_file(src, side, seed=1)
    done = subprocess.run([sys.executable, "-c", _SEGMENT_ONE, str(src), str(tmp / "big")],
                          capture_output=True, text=True, check=True)
    figures = json.loads(done.stdout.strip().splitlines()[-1])
    peak = figures["peak_kib"] * 1024
    planned = estimate_memory_bytes((side,) * 3, np.uint16)
    top = ", ".join(f"{name} {sec:.1f} s" for sec, name in figures["top"][:5])
    return [
        {"metric": f"segment {side}^3 uint16: time", "value": f"{figures['seconds']:.1f} s",
         "note": f"steps {figures['timings']}"},
        {"metric": f"segment {side}^3 uint16: peak RSS", "value": f"{peak / 2**30:.2f} GiB",
         "target": "< 24 GiB", "note": f"{peak / side**3:.1f} B/voxel; io estimate "
                                       f"{planned / 2**30:.2f} GiB"},
        {"metric": f"segment {side}^3: where the time goes", "value": "",
         "note": top + f"; {figures['regions']} regions"},
    ]


def run(args) -> list[dict]:
    """Rows of the batch benchmark (the 512^3 run only with ``--large``)."""
    with tempfile.TemporaryDirectory(prefix="cavitas-bench-batch-") as name:
        tmp = Path(name)
        rows = _throughput(tmp)
        if getattr(args, "large", False):
            rows += _large(tmp)
    own = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**20
    rows.append({"metric": "peak RSS of the bench process", "value": f"{own:.2f} GiB",
                 "note": "scene generation and batch bookkeeping"})
    return rows
