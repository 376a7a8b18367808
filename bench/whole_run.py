"""Whole runs: the library call and the command line against a watershed pipeline.

Inputs (invented, for this measurement only, :mod:`cavitas.scenes`): a 512² cell sheet
(300 cells, noise 0.2 of the contrast) and a 128³ foam (90 cells), stored as uint16 TIFF.

Reference: a Gaussian + h-minima + watershed pipeline of the same image in this process
(:func:`bench.segment_accuracy.classical`: σ 1, h a fifth of the 1-99 % intensity range,
a global wall threshold), the pipeline a user would otherwise pick. Rows:

* ``segment()`` (the library call) / reference (targets from the issue: 2D ≤ 2, 3D ≤ 1);
* the share of that call spent on the noise null (looked up in the shipped table:
  :mod:`cavitas.segment._null_table`; target ≤ 10 %);
* ``cavitas segment`` in a fresh interpreter (the fastest of three runs, Python's bytecode
  kept as an installed package keeps it), its wall time split into start-up (interpreter,
  imports, kernel loading: the wall time not in any step), reading, segmentation,
  measurement, writing and report (``run.json``'s ``timings_s``), as a ratio to the library
  call (target: at most twice the call and 1.5 s), and the report's share of the run
  without it (target ≤ 30 %);
* the first run's compile time: ``cavitas segment`` of the 2D image with an empty numba
  cache (``NUMBA_CACHE_DIR``), minus the same run with the cache filled.

Run: ``python -m bench --only whole_run``.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import tifffile

from bench.segment_accuracy import classical

NAME = "whole_run"
#: run.json's steps, in the order a run takes them.
STEPS = ("read", "segment", "measure", "write", "report")
#: The figures of this benchmark, with this method, before the report's region numbers
#: became two collections and its diagram was no longer drawn twice (commit 943dc7c, two
#: runs on the same 2-core machine, busy): printed beside today's.
BEFORE = {
    "2D 512²: segment() / watershed pipeline": "2.27–2.67",
    "3D 128³: segment() / watershed pipeline": "0.98–1.54",
    "2D 512²: cavitas segment / segment()": "10.2–10.5 (2.65–2.75 s)",
    "3D 128³: cavitas segment / segment()": "1.74–1.86 (5.1–6.1 s)",
    "2D 512²: report / run without it": "37–38 %",
    "3D 128³: report / run without it": "23 %",
}


def scenes() -> dict[str, np.ndarray]:
    """The invented inputs, as uint16 arrays: ``{"2D 512²": ..., "3D 128³": ...}``."""
    from cavitas.scenes import cell_sheet, foam

    sheet = cell_sheet((512, 512), cells=300, noise=0.2, seed=4).image
    volume = foam((128, 128, 128), cells=90, noise=0.2, seed=5).image
    return {name: (np.clip(image, 0, None) * 20000).astype(np.uint16)
            for name, image in (("2D 512²", sheet), ("3D 128³", volume))}


def watershed_pipeline(image: np.ndarray) -> np.ndarray:
    """The reference: Gaussian + h-minima + watershed + a wall threshold."""
    low, high = np.percentile(image, [1, 99])
    return classical(image, "bright", 1.0, 0.2 * float(high - low), 0.9)


def _best_of(repeats: int, work, *args) -> float:
    best = np.inf
    for _ in range(repeats):
        started = time.perf_counter()
        work(*args)
        best = min(best, time.perf_counter() - started)
    return best


def _null_seconds(image: np.ndarray) -> float:
    """Time of every null lookup a default run makes (both polarities, every scale)."""
    from cavitas.segment._noise import _null_cached, null_distribution
    from cavitas.segment._null_table import load_table
    from cavitas.segment._params import AUTO_SCALES

    _null_cached.cache_clear()
    load_table.cache_clear()
    started = time.perf_counter()
    for _ in range(2):  # the polarity check looks the same scales up again (cached then)
        for s in AUTO_SCALES:
            null_distribution(image.shape, (s,) * image.ndim, 1)
    return time.perf_counter() - started


def _installed_env(root: Path, **extra: str) -> dict[str, str]:
    """This environment as an installed package sees it: Python's compiled bytecode kept
    (in a folder under ``root``), as ``pip install`` leaves it, even where the shell
    forbids writing it (``PYTHONDONTWRITEBYTECODE``: every process would otherwise compile
    the package's sources again, about 0.3 s here)."""
    env = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
    return {**env, "PYTHONPYCACHEPREFIX": str(root / "bytecode"), **extra}


def _cli(path: Path, out: Path, *, report: bool, env: dict[str, str]) -> dict:
    """Wall time and run.json step times of ``cavitas segment`` in a fresh interpreter."""
    command = [sys.executable, "-m", "cavitas.cli", "segment", str(path), "-o", str(out),
               "--force", "-q"] + ([] if report else ["--no-report"])
    started = time.perf_counter()
    subprocess.run(command, check=True, env=env, capture_output=True)
    wall = time.perf_counter() - started
    steps = json.loads((out / "run.json").read_text())["timings_s"]
    return {"wall": wall, **{s: float(steps.get(s, 0.0)) for s in STEPS}}


def _best_run(path: Path, out: Path, *, report: bool, env: dict[str, str],
              repeats: int = 3) -> dict:
    """The fastest of ``repeats`` command-line runs (this machine is shared)."""
    return min((_cli(path, out, report=report, env=env) for _ in range(repeats)),
               key=lambda run: run["wall"])


def run(args) -> list[dict]:
    from cavitas.segment import segment

    rows: list[dict] = []
    images = scenes()
    with tempfile.TemporaryDirectory(prefix="cavitas-whole-run-") as tmp:
        root = Path(tmp)
        for name, image in images.items():
            segment(image[(slice(0, 24),) * image.ndim])  # kernels loaded before timing
            library = _best_of(3, segment, image)
            reference = _best_of(3, watershed_pipeline, image)
            target = "≤ 2" if image.ndim == 2 else "≤ 1"
            rows.append({"metric": f"{name}: segment() / watershed pipeline",
                         "value": f"{library / reference:.2f}", "target": target,
                         "note": f"{library:.2f} s vs {reference:.2f} s"})
            null = _null_seconds(image)
            rows.append({"metric": f"{name}: noise null share of segment()",
                         "value": f"{100 * null / library:.1f} %", "target": "≤ 10 %",
                         "note": "table lookups and interpolation, both polarities"})
            path = root / f"{image.ndim}d.tif"
            tifffile.imwrite(path, image)
            installed = _installed_env(root)
            # the page cache, bytecode and kernels warm
            _cli(path, root / "warm", report=True, env=installed)
            bare = _best_run(path, root / f"bare{image.ndim}", report=False, env=installed)
            full = _best_run(path, root / f"full{image.ndim}", report=True, env=installed)
            startup = full["wall"] - sum(full[s] for s in STEPS)
            split = ", ".join(f"{s} {full[s] / library:.2f}" for s in STEPS)
            rows.append({"metric": f"{name}: cavitas segment / segment()",
                         "value": f"{full['wall'] / library:.2f}",
                         "target": "≤ 2 (+1.5 s)",
                         "note": f"start-up {startup / library:.2f}, {split} "
                                 f"({full['wall']:.2f} s; the target "
                                 f"{2 * library + 1.5:.2f} s)"})
            rows.append({"metric": f"{name}: report / run without it",
                         "value": f"{100 * full['report'] / bare['wall']:.0f} %",
                         "target": "≤ 30 %",
                         "note": f"report {full['report']:.2f} s, run without it "
                                 f"{bare['wall']:.2f} s"})
        path = root / "2d.tif"
        cold = _installed_env(root, NUMBA_CACHE_DIR=str(root / "numba-cold"))
        first = _cli(path, root / "cold", report=False, env=cold)
        second = _cli(path, root / "cold", report=False, env=cold)
        rows.append({"metric": "first run's kernel compilation (2D cavitas segment)",
                     "value": f"{first['wall'] - second['wall']:.1f} s",
                     "note": f"first run {first['wall']:.1f} s, the next "
                             f"{second['wall']:.1f} s (an empty numba cache, then filled)"})
    for row in rows:
        if row["metric"] in BEFORE:
            row["note"] = f"{row['note']}; before: {BEFORE[row['metric']]}"
    return rows
