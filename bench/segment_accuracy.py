"""Segmentation accuracy: cavitas (automatic, no tuning) vs a classical pipeline tuned on truth.

Scenes are invented data (:mod:`cavitas.scenes`): 2D membrane-stained cell sheets, 3D foams
(``foam3d-holes``: some walls with a round hole of radius twice the wall thickness, whose two
cells are one region in the truth) and 3D capsules (some nested), walls 2.5 voxels thick,
illumination ramp 3x, noise 0.1 / 0.2 / 0.3 of the wall-to-interior contrast, both
polarities.

The classical pipeline is Gaussian smoothing + h-minima markers + watershed + one global
wall threshold, with regions touching the border dropped; its three parameters are tuned
per scene on the truth itself (a grid search), so it is an optimistic reference.

Scores, over truth cells that do not touch the border:
* **found**: cells matched one-to-one (Dice >= 0.7, which makes the match unique);
* **median Dice**: of each truth cell with its best-overlapping region (0 if none);
* **spurious**: regions of the label map matched to no truth cell (border-cut ones
  included) at Dice >= 0.7, as a share of all regions.

The **hard set** (rows ``hard ...``; :func:`hard_scenes`) is invented data too, for
benchmarks only. Every hard scene is lit by a gain falling linearly from 1 at the first
corner to 0.35 at the opposite one (``ramp=0.35``) and carries noise 0.1 / 0.18 / 0.3 of
the full wall contrast, so in the dim corner the noise is up to 0.3 / 0.35 = 0.86 of the
local contrast (the quick set's ``ramp=3`` brightens instead: the same 1 : 2.86 ratio, but
there the noise never exceeds its stated share of the local contrast). Both polarities.

* ``sheet2d-small``: 256x256 cell sheets, 400 seeds, membranes 2 pixels thick: cells about
  13 pixels across (at seed 0, mean equivalent-circle diameter of the inner truth cells
  12.9 pixels, 10th-90th percentile 11-15);
* ``crop2d-large``: 160x160 crops of a sheet with cells about 60 pixels across (11 seeds):
  nearly every cell is cut by the border, usually one is whole;
* ``crop3d-foam``: a 64^3 crop of a foam with cells about 57 voxels across (6 seeds),
  walls 2 voxels thick: every cell is cut by the border.

The hard rows also count **border-cut labelled** ("cut"): regions of the label map whose
best-matching truth cell (highest Dice) is a border-cut one, at Dice >= 0.5, i.e. cells
open to the scan border labelled as if enclosed; "grazing" says how many of those cells
meet the border in at most :data:`GRAZING` voxels (cut by a hair, nearly enclosed in the
image). Found and median Dice read "-" when a scene has no inner truth cell. Targets
(from the issue): found >= 97 % (95 % at noise 0.3), spurious <= 1 %, median Dice within
0.03 of the tuned watershed, 0 border-cut labelled; each row's note names the targets
cavitas misses there. Times: cavitas's call, and the tuned watershed's whole grid search.

Run: ``python -m bench --only segment_accuracy`` (the quick set, then the hard set: about
two and a half minutes on two cores) or ``python -m bench.segment_accuracy [--full] [--seeds N]
[--hard | --no-hard]`` (``--hard``: the hard set only; ``--no-hard``: without it).
"""

from __future__ import annotations

import argparse
import time
from collections.abc import Iterator
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
from scipy import ndimage as ndi

if TYPE_CHECKING:
    from cavitas.scenes import Scene

NAME = "segment_accuracy"

#: Scene kinds of the quick / full set.
KINDS = ("sheet2d", "foam3d", "foam3d-holes", "capsules3d")
#: Scene kinds of the hard set (:func:`hard_scenes`).
HARD_KINDS = ("sheet2d-small", "crop2d-large", "crop3d-foam")
#: Noise levels of the hard set, as fractions of the full (undimmed) wall contrast.
HARD_NOISES = (0.1, 0.18, 0.3)
#: Illumination gain of the hard set at the dim corner (1 at the first corner).
HARD_GAIN = 0.35
#: Border contact (voxels) up to which a border-cut cell counts as grazing the border.
GRAZING = 2


def _scenes(full: bool, seed: int):
    from cavitas import scenes

    for noise in (0.1, 0.2, 0.3):
        for walls in ("bright", "dark"):
            common = dict(noise=noise, ramp=3.0, walls=walls, seed=seed)
            case = (noise, walls)
            if full:
                yield "sheet2d", case, scenes.cell_sheet((512, 512), cells=150, **common)
                yield "foam3d", case, scenes.foam((96, 96, 96), cells=60, **common)
                yield "foam3d-holes", case, scenes.foam((96, 96, 96), cells=60,
                                                        broken_walls=2, **common)
                yield "capsules3d", case, scenes.capsules((64, 128, 128), count=12, nested=3,
                                                          **common)
            else:
                yield "sheet2d", case, scenes.cell_sheet((256, 256), cells=50, **common)
                yield "foam3d", case, scenes.foam((64, 64, 64), cells=120, **common)
                yield "foam3d-holes", case, scenes.foam((64, 64, 64), cells=120,
                                                        broken_walls=3, **common)
                yield "capsules3d", case, scenes.capsules((40, 80, 80), count=5, nested=2,
                                                          **common)


@dataclass(frozen=True)
class Case:
    """Imaging of one hard scene.

    Attributes
    ----------
    noise : float
        Standard deviation of the added noise, as a fraction of the full wall contrast.
    walls : {"bright", "dark"}
        Polarity; also the ``walls`` to pass to :func:`cavitas.segment`.
    """

    noise: float
    walls: str


def hard_scenes(seed: int = 0) -> Iterator[tuple[str, Case, Scene]]:
    """Yield the hard set one scene at a time, made on demand (invented data, for
    benchmarks only; see the module docstring).

    Parameters
    ----------
    seed : int
        Scene seed; the same seed gives the same scenes.

    Yields
    ------
    name : str
        One of :data:`HARD_KINDS`.
    case : Case
        Noise level and polarity.
    scene : cavitas.scenes.Scene
        Image, truth and the border-cut labels.

    Examples
    --------
    Iterate on the selection rule::

        import cavitas
        from bench.segment_accuracy import evaluate, hard_scenes

        for name, case, scene in hard_scenes(0):
            seg = cavitas.segment(scene.volume, walls=case.walls)
            print(name, case, evaluate(seg.labels, scene))
    """
    for name, case in _hard_cases():
        yield name, case, _hard_scene(name, case, seed)


def _hard_cases() -> Iterator[tuple[str, Case]]:
    """Names and cases of the hard set, in the order of its rows."""
    for noise in HARD_NOISES:
        for walls in ("bright", "dark"):
            for name in HARD_KINDS:
                yield name, Case(noise, walls)


def _hard_scene(name: str, case: Case, seed: int) -> Scene:
    """The hard scene ``name`` (one of :data:`HARD_KINDS`) for ``case`` and ``seed``."""
    from cavitas import scenes

    common = dict(noise=case.noise, ramp=HARD_GAIN, walls=case.walls, seed=seed,
                  wall_thickness=2)
    if name == "sheet2d-small":
        return scenes.cell_sheet((256, 256), cells=400, **common)
    if name == "crop2d-large":
        return scenes.cell_sheet((160, 160), cells=11, **common)
    if name == "crop3d-foam":
        return scenes.foam((64, 64, 64), cells=6, **common)
    raise ValueError(f"unknown hard scene {name!r}; known: {HARD_KINDS}")


def _dice_table(labels: np.ndarray, truth: np.ndarray):
    """Dice of every truth label (rows) with every predicted label (columns).

    Returns
    -------
    dice : ndarray of float, ``(truth.max() + 1, labels.max() + 1)``
        Row and column 0 (background) are 0.
    st, sp : ndarray of int
        Voxel count of each truth label and of each predicted label.
    """
    t = truth.ravel().astype(np.int64)
    p = labels.ravel().astype(np.int64)
    nt, npred = int(t.max()) + 1, int(p.max()) + 1
    both = (t > 0) & (p > 0)
    inter = np.bincount(t[both] * npred + p[both], minlength=nt * npred).reshape(nt, npred)
    st = np.bincount(t, minlength=nt)
    sp = np.bincount(p, minlength=npred)
    dice = 2 * inter / np.maximum(st[:, None] + sp[None, :], 1)
    dice[0, :] = 0
    dice[:, 0] = 0
    return dice, st, sp


def score(labels: np.ndarray, truth: np.ndarray, border: tuple[int, ...]) -> dict:
    """found %, median Dice, spurious % (see module docstring)."""
    dice, st, sp = _dice_table(labels, truth)
    nt = dice.shape[0]
    interior = np.setdiff1d(np.arange(1, nt), np.asarray(border, np.int64))
    interior = interior[st[interior] > 0]
    best_t = dice[interior].max(axis=1) if interior.size else np.zeros(0)
    present = np.flatnonzero(sp[1:] > 0) + 1
    matched_p = dice[:, present].max(axis=0) >= 0.7 if present.size else np.zeros(0, bool)
    return {
        "found": 100.0 * float(np.mean(best_t >= 0.7)) if best_t.size else 100.0,
        "dice": float(np.median(best_t)) if best_t.size else 1.0,
        "spurious": 100.0 * float(np.mean(~matched_p)) if present.size else 0.0,
        "cells": int(interior.size),
        "regions": int(present.size),
    }


def border_cut_labelled(labels: np.ndarray, truth: np.ndarray,
                        border: tuple[int, ...]) -> np.ndarray:
    """Border-cut truth cells labelled as if enclosed.

    Parameters
    ----------
    labels, truth : ndarray of int
        Predicted and true label maps (0 is background).
    border : tuple of int
        Truth labels cut by the scan border.

    Returns
    -------
    ndarray of int
        For each predicted region whose best-matching truth cell (highest Dice) is in
        ``border`` at Dice >= 0.5, that truth label (its length is the count reported).
    """
    dice, _, sp = _dice_table(labels, truth)
    present = np.flatnonzero(sp[1:] > 0) + 1
    if not present.size or not border:
        return np.zeros(0, np.int64)
    best = dice[:, present].argmax(axis=0)
    hit = np.isin(best, np.asarray(border, np.int64)) & (dice[best, present] >= 0.5)
    return best[hit]


def border_contact(truth: np.ndarray) -> np.ndarray:
    """Voxels of each truth label on the faces of the array (index: label)."""
    shell = np.ones(truth.shape, bool)
    shell[(slice(1, -1),) * truth.ndim] = False
    return np.bincount(truth[shell].ravel(), minlength=int(truth.max()) + 1)


@dataclass(frozen=True)
class Outcome:
    """Scores of one label map against a scene's truth (see the module docstring).

    Attributes
    ----------
    found : float or None
        Percentage of inner truth cells matched one-to-one; None when there are none.
    dice : float or None
        Median best Dice of the inner truth cells; None when there are none.
    spurious : float
        Percentage of regions matched to no truth cell.
    border_cut : int
        Regions labelled as a border-cut truth cell (:func:`border_cut_labelled`).
    grazing : int
        Of those, the ones whose truth cell meets the border in at most
        :data:`GRAZING` voxels (cut by a hair: nearly enclosed in the image).
    cells : int
        Inner truth cells (not touching the border).
    regions : int
        Regions in the label map.
    """

    found: float | None
    dice: float | None
    spurious: float
    border_cut: int
    grazing: int
    cells: int
    regions: int

    def __str__(self) -> str:
        found = "-" if self.found is None else f"{self.found:.1f}%"
        dice = "-" if self.dice is None else f"{self.dice:.3f}"
        graze = f" ({self.grazing} grazing)" if self.grazing else ""
        return (f"found {found} dice {dice} spur {self.spurious:.1f}% "
                f"cut {self.border_cut}{graze} of {self.regions} regions")


def evaluate(labels: np.ndarray, scene: Scene) -> Outcome:
    """Score ``labels`` against ``scene`` (its truth and border-cut labels)."""
    s = score(labels, scene.truth, scene.border_labels)
    inner = s["cells"] > 0
    cut = border_cut_labelled(labels, scene.truth, scene.border_labels)
    grazing = int(np.count_nonzero(border_contact(scene.truth)[cut] <= GRAZING))
    return Outcome(found=s["found"] if inner else None, dice=s["dice"] if inner else None,
                   spurious=s["spurious"], border_cut=int(cut.size), grazing=grazing,
                   cells=s["cells"], regions=s["regions"])


def classical(image: np.ndarray, walls: str, sigma: float, h: float, q: float) -> np.ndarray:
    """Gaussian + h-minima watershed + a global wall threshold (quantile ``q``)."""
    from skimage.morphology import h_minima
    from skimage.segmentation import clear_border, watershed

    g = ndi.gaussian_filter(image.astype(np.float64) * (1 if walls == "bright" else -1), sigma)
    markers, _ = ndi.label(h_minima(g, h))
    lab = watershed(g, markers)
    return _cut(lab, g, q, clear_border)


def _cut(lab, g, q, clear_border):
    lab = np.where(g < np.quantile(g, q), lab, 0)
    return clear_border(lab)


def tuned_classical(scene, walls: str) -> tuple[dict, tuple]:
    """Grid search of (sigma, h, threshold quantile) on the truth; best by (found, Dice)."""
    best_score, params, _ = _tune(scene, walls)
    return best_score, params


def _tune(scene, walls: str) -> tuple[dict, tuple, np.ndarray]:
    """:func:`tuned_classical`, also returning the best label map."""
    from skimage.morphology import h_minima
    from skimage.segmentation import clear_border, watershed

    best = None
    for sigma in (0.5, 1.0, 1.5, 2.0):
        g = ndi.gaussian_filter(scene.image.astype(np.float64) * (1 if walls == "bright" else -1),
                                sigma)
        spread = float(np.quantile(g, 0.95) - np.quantile(g, 0.05))
        for hf in (0.05, 0.1, 0.2, 0.3):
            markers, _ = ndi.label(h_minima(g, hf * spread))
            lab = watershed(g, markers)
            for q in (0.5, 0.6, 0.7, 0.8, 0.9, 0.95, 0.98):
                cut = _cut(lab, g, q, clear_border)
                s = score(cut, scene.truth, scene.border_labels)
                key = (s["found"], s["dice"], -s["spurious"])
                if best is None or key > best[0]:
                    best = (key, s, (sigma, hf, q), cut)
    return best[1], best[2], best[3]


def run(args: argparse.Namespace) -> list[dict]:
    """Rows for ``python -m bench``: one per scene kind x noise x polarity, then noise only,
    then the hard set.

    ``args.hard`` (absent: both sets) picks the sets: True for the hard set only, False for
    the quick (or full) set and the noise-only rows only.
    """
    return list(_all_rows(args))


def _all_rows(args: argparse.Namespace) -> Iterator[dict]:
    """The rows :func:`run` returns, one at a time."""
    hard = getattr(args, "hard", None)
    if hard is not True:
        yield from _rows(args)
        yield from noise_only_rows()
    if hard is not False:
        yield from _hard_rows(args)


def _rows(args: argparse.Namespace):
    import cavitas

    full = bool(getattr(args, "full", False) or getattr(args, "large", False))
    seeds = range(int(getattr(args, "seeds", 1) or 1))
    only = set(getattr(args, "kind", None) or ())
    noises = set(getattr(args, "noise", None) or (0.1, 0.2, 0.3))
    for seed in seeds:
        for kind, (noise, walls), scene in _scenes(full, seed):
            if (only and kind not in only) or noise not in noises:
                continue
            t0 = time.perf_counter()
            seg = cavitas.segment(scene.volume, walls=walls)
            ours_t = time.perf_counter() - t0
            ours = score(seg.labels, scene.truth, scene.border_labels)
            ref, best = tuned_classical(scene, walls)
            key = f"{kind} noise={noise} {walls}"
            yield {
                "metric": key,
                "value": (f"ours found {ours['found']:.1f}% dice {ours['dice']:.3f} "
                          f"spur {ours['spurious']:.1f}% | tuned found {ref['found']:.1f}% "
                          f"dice {ref['dice']:.3f} spur {ref['spurious']:.1f}%"),
                "target": ">=97% (95% at 0.3), >= tuned, spur <=1%",
                "note": (f"{ours['cells']} cells, ours {ours_t:.1f}s, sigma="
                         f"{seg.params['smooth_sigma']:.2g} tuned={best}"),
            }


@dataclass(frozen=True)
class Trial:
    """One method run on one scene.

    Attributes
    ----------
    outcome : Outcome
        Its scores.
    seconds : float
        Wall-clock time (for the tuned watershed: the whole grid search).
    setting : str
        The parameters it used or chose.
    """

    outcome: Outcome
    seconds: float
    setting: str


def _ours(scene: Scene, walls: str) -> Trial:
    """cavitas in automatic mode on ``scene``."""
    import cavitas

    t0 = time.perf_counter()
    seg = cavitas.segment(scene.volume, walls=walls)
    seconds = time.perf_counter() - t0
    return Trial(evaluate(seg.labels, scene), seconds,
                 f"sigma={seg.params['smooth_sigma']:.2g}")


def _tuned(scene: Scene, walls: str) -> Trial:
    """The watershed tuned on the truth (:func:`tuned_classical`) on ``scene``."""
    t0 = time.perf_counter()
    _, params, labels = _tune(scene, walls)
    seconds = time.perf_counter() - t0
    return Trial(evaluate(labels, scene), seconds, f"tuned={params}")


def _found_target(case: Case) -> float:
    """The found % target of ``case``: 97, or 95 at noise 0.3 and above."""
    return 95.0 if case.noise >= 0.3 else 97.0


def _misses(ours: Outcome, ref: Outcome, case: Case) -> list[str]:
    """Names of the targets ``ours`` misses (``ref``: the tuned watershed's outcome)."""
    misses = []
    if ours.found is not None and ours.found < _found_target(case):
        misses.append("found")
    if ours.dice is not None and ref.dice is not None and ours.dice < ref.dice - 0.03:
        misses.append("dice")
    if ours.spurious > 1.0:
        misses.append("spurious")
    if ours.border_cut > 0:
        misses.append("border-cut")
    return misses


def _cell_summary(scene: Scene) -> str:
    """Inner and border-cut truth cells, and the inner cells' mean equivalent diameter."""
    truth = scene.truth
    border = np.asarray(scene.border_labels, np.int64)
    inner = np.setdiff1d(np.arange(1, scene.n_labels + 1), border)
    text = f"{inner.size} inner + {border.size} cut cells"
    if inner.size:
        size = np.bincount(truth.ravel(), minlength=scene.n_labels + 1)[inner]
        if truth.ndim == 2:
            diameter = np.sqrt(4.0 * size / np.pi)
        else:
            diameter = np.cbrt(6.0 * size / np.pi)
        text += f" (d={np.mean(diameter):.1f} {'px' if truth.ndim == 2 else 'vox'})"
    return text


def hard_row(name: str, case: Case, scene: Scene) -> dict:
    """One row of the hard set: cavitas and the tuned watershed on ``scene``.

    Parameters
    ----------
    name, case, scene
        As yielded by :func:`hard_scenes`.

    Returns
    -------
    dict
        ``metric``, ``value``, ``target`` and ``note`` (see :mod:`bench`).
    """
    ours, ref = _ours(scene, case.walls), _tuned(scene, case.walls)
    misses = _misses(ours.outcome, ref.outcome, case)
    return {
        "metric": f"hard {name} noise={case.noise} {case.walls}",
        "value": f"ours {ours.outcome} | tuned {ref.outcome}",
        "target": f">={_found_target(case):.0f}% dice>=tuned-0.03 spur<=1% cut 0",
        "note": (f"{_cell_summary(scene)}, ours {ours.seconds:.1f}s {ours.setting}, "
                 f"tuned {ref.seconds:.1f}s {ref.setting}; "
                 f"{'misses ' + ', '.join(misses) if misses else 'meets all'}"),
    }


def _hard_rows(args: argparse.Namespace) -> Iterator[dict]:
    """Rows of the hard set, filtered by ``args.kind`` and ``args.noise`` if given."""
    seeds = range(int(getattr(args, "seeds", 1) or 1))
    only = set(getattr(args, "kind", None) or ())
    noises = set(getattr(args, "noise", None) or HARD_NOISES)
    for seed in seeds:
        for name, case in _hard_cases():
            if (not only or name in only) and case.noise in noises:
                yield hard_row(name, case, _hard_scene(name, case, seed))


def noise_only_rows(n2d: int = 20, n3d: int = 10):
    """False positives of the automatic mode on white noise (invented data), many seeds."""
    import cavitas

    for shape, seeds in (((128, 128), n2d), ((32, 32, 32), n3d)):
        found = [int(cavitas.segment(np.random.default_rng(1000 + s).normal(100, 7, shape))
                     .labels.max()) for s in range(seeds)]
        yield {"metric": f"noise only {'x'.join(map(str, shape))}",
               "value": f"{sum(found)} regions in {seeds} images",
               "target": "0", "note": "white noise, automatic significance"}


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m bench.segment_accuracy",
                                     description=__doc__.splitlines()[0])
    parser.add_argument("--full", action="store_true", help="larger scenes")
    parser.add_argument("--quick", action="store_true", help="small scenes (the default)")
    parser.add_argument("--seeds", type=int, default=1, help="scene seeds per case")
    parser.add_argument("--kind", action="append", choices=KINDS + HARD_KINDS,
                        help="only this scene kind (repeatable)")
    parser.add_argument("--noise", action="append", type=float, help="only this noise level")
    parser.add_argument("--hard", action=argparse.BooleanOptionalAction, default=None,
                        help="--hard: the hard set only; --no-hard: the quick (or full) set "
                             "only; default: both")
    args = parser.parse_args(argv)
    for row in _all_rows(args):
        print(f"{row['metric']:<40} {row['value']}  [{row['note']}]", flush=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
