"""Persistence engine (H0 + cavities) against sorting, labelling and watershed.

Input (invented, for this measurement only): Gaussian-smoothed white noise, scaled to the
full uint16 range, 128^3 and 256^3 voxels (512^3 with ``--large``).

Targets: ours / numpy stable argsort <= 8 at 256^3; ours / skimage watershed <= 0.2 at
128^3; extra memory <= 12 bytes per voxel beyond the input; 512^3 / 256^3 time <= 10.

Times are the best of three runs (one at 512^3). "ours" is one ``persistence(image)`` call
as a user makes it: on a machine with two or more cores its two sweeps run in parallel
threads. The step breakdown (sort, H0 sweep, cavity sweep, rest) is measured separately,
one step after the other, in CPU time.
"""

from __future__ import annotations

import gc
import subprocess
import sys
import time
import tracemalloc
from pathlib import Path

import numpy as np
from scipy import ndimage as ndi

from cavitas._cores import usable_cores
from cavitas.cubical import Diagram, persistence
from cavitas.cubical._persistence import _cavity_rows, _Prepared

NAME = "persistence"


def smoothed_noise(side: int, *, seed: int = 1) -> np.ndarray:
    """Invented test volume: smoothed noise in uint16 (sigma 2 voxels)."""
    rng = np.random.default_rng(seed)
    field = rng.standard_normal((side,) * 3, dtype=np.float32)
    field = ndi.gaussian_filter(field, 2.0, output=np.float32)
    lo, hi = float(field.min()), float(field.max())
    field -= lo
    field *= 65535.0 / (hi - lo)
    return field.astype(np.uint16)


def _rss_kib(field: str) -> int:
    for line in Path("/proc/self/status").read_text().splitlines():
        if line.startswith(field + ":"):
            return int(line.split()[1])
    raise OSError(field)


def _tracemalloc_peak(fn) -> int:
    """Peak bytes of numpy buffers allocated while ``fn()`` runs (numba's own not seen)."""
    gc.collect()
    tracemalloc.start()
    fn()
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return peak


def _rss_peak_in_fresh_process(side: int, parallel: bool) -> int:
    """Extra peak RSS of one persistence() call, measured in a fresh interpreter.

    A fresh process has no freed-but-resident heap to hide allocations in; the kernel's
    peak-RSS counter is reset (/proc/self/clear_refs) right before the call. -1 if the
    counter cannot be reset.
    """
    code = (
        "import gc, sys; from bench.persistence import _child_rss; "
        f"print(_child_rss({side}, {parallel}))"
    )
    root = Path(__file__).resolve().parent.parent
    out = subprocess.run([sys.executable, "-c", code], cwd=root, capture_output=True,
                         text=True, check=True)
    return int(out.stdout.strip().splitlines()[-1])


def _child_rss(side: int, parallel: bool) -> int:
    image = smoothed_noise(side)
    persistence(smoothed_noise(48), parallel=parallel)  # threads and kernels loaded
    gc.collect()
    try:
        Path("/proc/self/clear_refs").write_text("5")  # reset VmHWM to the current RSS
    except OSError:
        return -1
    before = _rss_kib("VmRSS")
    persistence(image, parallel=parallel)
    return (_rss_kib("VmHWM") - before) * 1024


class _Clock:
    """Wall-clock and CPU time of the steps of one run (CPU time is less disturbed when
    other jobs share the machine). ``best_of`` > 1 keeps the fastest of that many calls."""

    def __init__(self, best_of: int = 1) -> None:
        self.wall: dict[str, float] = {}
        self.cpu: dict[str, float] = {}
        self.best_of = best_of

    def __call__(self, name, fn, *args, **kwargs):
        runs = []
        for _ in range(self.best_of):
            w, c = time.perf_counter(), time.process_time()
            out = fn(*args, **kwargs)
            runs.append((time.perf_counter() - w, time.process_time() - c))
            if self.best_of > 1:
                gc.collect()
        wall, cpu = min(runs)
        self.wall[name] = self.wall.get(name, 0.0) + wall
        self.cpu[name] = self.cpu.get(name, 0.0) + cpu
        return out


def _ours_in_steps(image: np.ndarray, clock: _Clock) -> Diagram:
    """persistence(image) step by step (the same calls it makes), timing each step."""
    prep = clock("sort", _Prepared, image, "bright", 1, None)
    parent = prep.new_parent()
    h0 = clock("H0 sweep", prep.h0, parent)
    tree = clock("cavity sweep", prep.tree, parent)
    top = clock("rest", _cavity_rows, tree)
    return clock("rest", Diagram, {0: h0, 2: top}, shape=image.shape, walls="bright",
                 connectivity=1)


def _measure(side: int, *, watershed: bool) -> dict:
    image = smoothed_noise(side)
    clock = _Clock(best_of=3 if side <= 256 else 1)
    dgm = _ours_in_steps(image, clock)
    for table in (clock.wall, clock.cpu):
        table["serial"] = sum(table[k] for k in ("sort", "H0 sweep", "cavity sweep", "rest"))
    check = clock("ours", persistence, image)
    assert all(np.array_equal(dgm.pairs(d), check.pairs(d)) for d in (0, 2))
    res: dict = {"n": image.size, "steps": clock, "h0_pairs": len(dgm.pairs(0)),
                 "cavities": len(dgm.pairs(2))}
    clock("argsort", np.argsort, image, axis=None, kind="stable")
    threshold = image > np.uint16(np.median(image))
    clock("label", ndi.label, threshold)
    del threshold
    if watershed:
        from skimage.segmentation import watershed as sk_watershed

        clock("watershed", sk_watershed, image)
    res["traced_bytes"] = _tracemalloc_peak(lambda: persistence(image))
    res["rss_bytes"] = _rss_peak_in_fresh_process(side, True)
    res["rss_serial_bytes"] = _rss_peak_in_fresh_process(side, False)
    return res


def run(args) -> list[dict]:
    """Measure at 128^3 and 256^3 (and 512^3 with ``args.large``)."""
    persistence(smoothed_noise(16))  # compile (or load the cached kernels) before timing
    sides = [128, 256] + ([512] if getattr(args, "large", False) else [])
    rows: list[dict] = []
    results = {}
    for side in sides:
        r = results[side] = _measure(side, watershed=side == 128)
        wall, cpu = r["steps"].wall, r["steps"].cpu
        tag = f"{side}^3"

        def ratio(ref, wall=wall, cpu=cpu):
            return f"{wall['ours'] / wall[ref]:.2f} (cpu {cpu['ours'] / cpu[ref]:.2f})"

        rows += [
            {"metric": f"{tag} ours (H0 + cavities)",
             "value": f"{wall['ours']:.2f} s (cpu {cpu['ours']:.2f} s)",
             "note": f"{r['h0_pairs']} H0 pairs, {r['cavities']} cavities; "
                     f"{usable_cores()} core(s)"},
            {"metric": f"{tag}   sort / H0 / cavity / rest",
             "value": " / ".join(f"{cpu[k]:.2f}" for k in
                                 ("sort", "H0 sweep", "cavity sweep", "rest")) + " s",
             "note": "cpu time, one step after the other"},
            {"metric": f"{tag} numpy argsort(stable)", "value": f"{wall['argsort']:.2f} s"},
            {"metric": f"{tag} scipy label (threshold)", "value": f"{wall['label']:.2f} s"},
            {"metric": f"{tag} ours / argsort", "value": ratio("argsort"),
             "target": "<= 8 at 256^3"},
            {"metric": f"{tag} ours, one thread / argsort",
             "value": f"{wall['serial'] / wall['argsort']:.2f}", "note": "parallel=False"},
            {"metric": f"{tag} ours / label", "value": ratio("label")},
            {"metric": f"{tag} extra bytes per voxel (peak RSS)",
             "value": f"{r['rss_bytes'] / r['n']:.1f}", "target": "<= 12",
             "note": "fresh process; beyond the input"},
            {"metric": f"{tag}   same, one thread",
             "value": f"{r['rss_serial_bytes'] / r['n']:.1f}", "note": "parallel=False"},
            {"metric": f"{tag} extra bytes per voxel (numpy)",
             "value": f"{r['traced_bytes'] / r['n']:.1f}", "note": "tracemalloc peak"},
        ]
        if "watershed" in wall:
            rows += [
                {"metric": f"{tag} skimage watershed", "value": f"{wall['watershed']:.2f} s"},
                {"metric": f"{tag} ours / watershed", "value": ratio("watershed"),
                 "target": "<= 0.2 at 128^3"},
            ]
    if 512 in results:
        wall = [results[s]["steps"].wall for s in (256, 512)]
        cpu = [results[s]["steps"].cpu["serial"] for s in (256, 512)]
        rows += [
            {"metric": "256^3 -> 512^3 time growth",
             "value": f"{wall[1]['ours'] / wall[0]['ours']:.2f} "
                      f"(one thread, cpu {cpu[1] / cpu[0]:.2f})",
             "target": "<= 10", "note": "8 = linear"},
            {"metric": "256^3 -> 512^3 argsort growth",
             "value": f"{wall[1]['argsort'] / wall[0]['argsort']:.2f}",
             "note": "the reference on the same machine"},
        ]
    return rows
