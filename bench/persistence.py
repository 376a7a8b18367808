"""Persistence engine (H0 + cavities) against sorting, labelling, watershed and gudhi (2D).

Input (invented, for this measurement only): Gaussian-smoothed white noise, scaled to the
full uint16 range: 1024^2 and 2048^2 pixels, 128^3 and 256^3 voxels (512^3 with
``--large``).

Targets: 2D, ours / gudhi's 2D path <= 1 at 1024^2 and 2048^2; 3D, ours / numpy stable
argsort <= 8 at 256^3; ours / skimage watershed <= 0.2 at 128^3; extra memory <= 12 bytes
per voxel beyond the input; 512^3 / 256^3 time <= 10.

2D reference: gudhi (the general-purpose computational-topology library, an optional
extra: ``pip install cavitas[bench]``; without it those rows say so) computes H0 and H1 of
a 2D image of top-dimensional cells with a dedicated path, the one
``gudhi.sklearn.CubicalPersistence`` runs for 2D input. That is our ``walls="dark",
connectivity=2``; both diagrams are compared before timing. "general kernels" is the
2D path before the local pairing (every pixel through the union-find), kept for the
cavity tree with sizes.

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


def smoothed_noise_2d(side: int, *, seed: int = 1) -> np.ndarray:
    """Invented test image: smoothed noise in uint16 (sigma 2 pixels)."""
    rng = np.random.default_rng(seed)
    field = ndi.gaussian_filter(rng.standard_normal((side, side), dtype=np.float32), 2.0)
    field -= field.min()
    field *= 65535.0 / field.max()
    return field.astype(np.uint16)


def _gudhi_2d():
    """gudhi's dedicated 2D function (top-dimensional cells, sublevel), or None."""
    try:
        from gudhi._pers_cub_low_dim_ext import _persistence_on_rectangle_from_top_cells
    except ImportError:
        return None
    return lambda cells: _persistence_on_rectangle_from_top_cells(cells, 0.0)


def _same_diagram(dgm: Diagram, gudhi_pairs) -> bool:
    """Whether our (birth, death) multisets equal gudhi's, per dimension."""
    def by_rows(pairs):
        return pairs[np.lexsort((pairs[:, 1], pairs[:, 0]))]

    for dim, theirs in enumerate(gudhi_pairs):
        rows = dgm.pairs(dim)
        ours = np.stack([rows["birth"], rows["death"]], 1)
        if not np.array_equal(by_rows(ours), by_rows(np.asarray(theirs, float))):
            return False
    return True


def _general_2d(image: np.ndarray) -> None:
    """The 2D path before local pairing: both general sweeps, one after the other."""
    prep = _Prepared(image, "dark", 2, None, plane=False)
    parent = prep.new_parent()
    prep.h0(parent)
    _cavity_rows(prep.tree(parent))


def _plane_rows() -> list[dict]:
    gudhi_2d = _gudhi_2d()
    rows: list[dict] = []
    if gudhi_2d is None:
        rows.append({"metric": "2D gudhi comparison", "value": "skipped",
                     "note": "gudhi is not installed (pip install cavitas[bench])"})
    persistence(smoothed_noise_2d(32), walls="dark", connectivity=2)
    for side in (1024, 2048):
        image = smoothed_noise_2d(side)
        as_float = image.astype(np.float64)
        clock = _Clock(best_of=5)
        dgm = clock("ours", persistence, image, walls="dark", connectivity=2)
        clock("ours float64", persistence, as_float, walls="dark", connectivity=2)
        clock("one thread", persistence, image, walls="dark", connectivity=2, parallel=False)
        clock("general", _general_2d, image)
        wall, cpu = clock.wall, clock.cpu
        tag = f"{side}^2"
        rows += [
            {"metric": f"{tag} ours (H0 + cavities)", "value": f"{wall['ours'] * 1e3:.1f} ms",
             "note": f"{len(dgm.pairs(0))} H0 pairs, {len(dgm.pairs(1))} cavities; "
                     f"{usable_cores()} core(s)"},
            {"metric": f"{tag} ours / general kernels",
             "value": f"{wall['ours'] / wall['general']:.2f} "
                      f"(one thread {wall['one thread'] / wall['general']:.2f})",
             "note": f"general {wall['general'] * 1e3:.1f} ms, one thread"},
        ]
        if gudhi_2d is None:
            continue
        same = _same_diagram(dgm, clock("gudhi", gudhi_2d, as_float))
        rows += [
            {"metric": f"{tag} gudhi 2D path", "value": f"{wall['gudhi'] * 1e3:.1f} ms",
             "note": "same diagram" if same else "DIAGRAMS DIFFER"},
            {"metric": f"{tag} ours / gudhi",
             "value": f"{wall['ours'] / wall['gudhi']:.2f} (cpu {cpu['ours'] / cpu['gudhi']:.2f})",
             "target": "<= 1"},
            {"metric": f"{tag}   one thread / gudhi",
             "value": f"{wall['one thread'] / wall['gudhi']:.2f}", "note": "parallel=False"},
            {"metric": f"{tag}   float64 input / gudhi",
             "value": f"{wall['ours float64'] / wall['gudhi']:.2f}",
             "note": "the image gudhi reads"},
        ]
    return rows


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
    prep = clock("sort", _Prepared, image, "bright", 1, None, plane=False)
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
    """Measure at 1024^2 and 2048^2, 128^3 and 256^3 (and 512^3 with ``args.large``)."""
    rows = _plane_rows()
    persistence(smoothed_noise(16))  # compile (or load the cached kernels) before timing
    sides = [128, 256] + ([512] if getattr(args, "large", False) else [])
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
