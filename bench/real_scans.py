"""Real scans: cavitas with defaults vs what a user does without it, tuned on the reference.

Reads the public scans in ``../shared/realdata/`` (next to the repository; or the folder
named by ``CAVITAS_REALDATA``) and only reads them: their licences forbid copying them into
the repository. That folder's ``README.md`` describes each scan (polarity, spacing,
reference, source, licence) and how to score; the values used here come from it.

Per scan, in one process:

* **cavitas**: ``cavitas.segment(volume, walls=...)`` with defaults, no tuning (timed after a
  warm-up call, so compilation is not counted).
* **Otsu + label**: Gaussian smoothing, Otsu threshold (the cells are the side away from the
  walls), connected components (``scipy.ndimage.label``, default cross structure), components
  touching the border dropped; sigma tuned on the reference.
* **h-minima watershed**: Gaussian smoothing, h-minima markers
  (``skimage.morphology.h_minima``), ``skimage.segmentation.watershed``, one global wall
  threshold (a quantile of the smoothed image), border components dropped; sigma, h and the
  quantile tuned on the reference.

The two baselines are tuned by a grid search scored on the reference itself (best F), so
they are optimistic references. On the EM set one parameter set serves all ten slices, as a
user would choose it.

Scoring (realdata README, "How a fair score works"): a reference cell is *found* when one
region matches it one-to-one with Dice >= 0.7; a region that is nobody's match at that
level is *spurious*; reference cells touching the image border are don't-care: not to be
found, and a region lying mostly (> 50 % of its pixels) inside one is not spurious.
F = harmonic mean of found / reference and found / (found + spurious); median Dice is over
the scored reference cells, each with its best region (0 if none).

Scans without a reference are described by counts: the *Arabidopsis* embryo (regions in the
embryo vs in its empty surround) and the concrete micro-CT (regions vs dark air voids found
by a simple independent threshold).

``em_variants`` remakes the EM slices as other scans of the same kind would show them (half
and double the pixel density, a 300² crop, added noise) and scores cavitas with its defaults
against the watershed tuned again on each: the same kind of data, not the same file.

Run: ``python -m bench --only real_scans`` or
``python -m bench.real_scans [--only-scan NAME] [--quick] [--verbose] [--figures DIR]``.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
from scipy import ndimage as ndi

if TYPE_CHECKING:
    from cavitas.io import Volume

NAME = "real_scans"

#: Env var naming the realdata folder (overrides the default next to the repository).
REALDATA_ENV = "CAVITAS_REALDATA"

#: Dice a match needs (realdata README, "How a fair score works").
MIN_DICE = 0.7
#: "Mostly inside": more than this share of a region's pixels (realdata README).
MAJORITY = 0.5
#: In-plane spacing of the cells3d slice, µm (realdata README, from the scikit-image
#: ``cells3d`` docstring). The EM spacing (4.6 nm) is read from the files themselves.
CELLS3D_SPACING_UM = 0.26
#: Expected content of the embryo (realdata README; Moukhtar et al. 2019).
EMBRYO_EXPECTED = "~16-32 cells plus suspensor cells, empty black surround"
#: Smoothing (voxels) for the embryo and concrete specimen masks: common practice, chosen
#: here (wide enough to close the thin bright cell walls into one body).
MASK_SIGMA = 3.0
#: Smallest air void counted in the concrete, voxels (a 2x2x2 cube): common practice,
#: chosen here.
VOID_MIN_VOXELS = 8
#: Smoothing (voxels) of the untuned Otsu baseline on scans without a reference: common
#: practice (there is no reference to tune it on).
UNTUNED_SIGMA = 1.0

#: Grids of the tuned baselines (sigma in pixels, h as a share of the smoothed image's
#: 5-95 % spread, quantile = share of pixels kept as cell interior); "quick" is smaller. The
#: full grid brackets the EM optimum (measured: h 0.6 best, 0.8 and 1.0 much worse).
OTSU_SIGMAS = {"full": (0.0, 0.5, 1.0, 1.5, 2.0, 3.0, 4.0, 6.0), "quick": (0.0, 1.0, 2.0, 4.0)}
WATERSHED_SIGMAS = {"full": (1.0, 2.0, 3.0, 4.0, 6.0), "quick": (1.0, 2.0, 4.0)}
H_FRACTIONS = {"full": (0.05, 0.1, 0.2, 0.3, 0.45, 0.6, 0.8), "quick": (0.05, 0.1, 0.2)}
QUANTILES = {"full": (0.5, 0.6, 0.7, 0.8, 0.85, 0.9, 0.95, 1.0), "quick": (0.6, 0.8, 0.9, 1.0)}
#: EM slices scored (all ten; three with --quick).
EM_SLICES = {"full": 10, "quick": 3}

CAVITAS = "cavitas (defaults)"
OTSU = "Otsu + label (tuned)"
WATERSHED = "h-minima watershed (tuned)"


# --------------------------------------------------------------------------- options, data

@dataclass(frozen=True)
class Options:
    """What to run.

    Attributes
    ----------
    root : Path
        The realdata folder.
    scans : tuple of str
        Scans to run (names of :data:`SCANS`).
    quick : bool
        Smaller baseline grids and three EM slices.
    verbose : bool
        Print per-slice lines for the EM set.
    figures : Path
        Folder for the PNG pictures.
    """

    root: Path
    scans: tuple[str, ...]
    quick: bool
    verbose: bool
    figures: Path

    @property
    def size(self) -> str:
        """Key of the grids: ``"quick"`` or ``"full"``."""
        return "quick" if self.quick else "full"


def realdata_dir() -> Path:
    """The realdata folder: ``$CAVITAS_REALDATA``, else ``../shared/realdata`` of the repository.

    Returns
    -------
    Path
        The folder (it may not exist).
    """
    env = os.environ.get(REALDATA_ENV)
    if env:
        return Path(env).expanduser()
    return Path(__file__).resolve().parents[1].parent / "shared" / "realdata"


def read_scan(path: Path) -> Volume:
    """Read a TIFF as a :class:`cavitas.Volume` (cavitas' reader, tifffile as fallback).

    Parameters
    ----------
    path : Path
        The file.

    Returns
    -------
    cavitas.Volume
        Data in memory, with the spacing stated in the file (1 voxel when none is).
    """
    import cavitas

    try:
        return cavitas.read(path, mmap=False)
    except cavitas.CavitasError:
        import tifffile

        return cavitas.Volume(tifffile.imread(path))


def as_float(volume: Volume) -> np.ndarray:
    """The data of ``volume`` as native float64 (the baselines' input)."""
    return np.asarray(volume.data, dtype=np.float64)


# --------------------------------------------------------------------------- scoring

@dataclass(frozen=True, eq=False)
class Score:
    """Score of one label map (or the total of several) against a reference.

    Attributes
    ----------
    reference : int
        Scored reference cells (border-cut ones excluded).
    found : int
        Reference cells matched one-to-one at Dice >= :data:`MIN_DICE`.
    spurious : int or None
        Regions matched to no reference cell (see :func:`count_spurious`); None when the
        reference is too sparse to judge it.
    regions : int
        Regions in the label map(s).
    dice : ndarray
        Per scored reference cell, Dice with its best region (0 if none).
    """

    reference: int
    found: int
    spurious: int | None
    regions: int
    dice: np.ndarray

    @property
    def recall(self) -> float:
        """found / reference."""
        return self.found / self.reference if self.reference else float("nan")

    @property
    def precision(self) -> float:
        """found / (found + spurious); nan when spurious cannot be judged."""
        if self.spurious is None:
            return float("nan")
        judged = self.found + self.spurious
        return self.found / judged if judged else float("nan")

    @property
    def f(self) -> float:
        """Harmonic mean of recall and precision (0 when nothing is found)."""
        if self.spurious is None:
            return float("nan")
        return 2 * self.found / (self.reference + self.found + self.spurious) if self.found \
            else 0.0

    @property
    def median_dice(self) -> float:
        """Median of :attr:`dice` (nan without scored cells)."""
        return float(np.median(self.dice)) if self.dice.size else float("nan")

    def rank(self) -> tuple[float, float]:
        """Key of the grid search: (F, median Dice), or (recall, median Dice) without F."""
        first = self.recall if self.spurious is None else self.f
        return (first, self.median_dice)


def total(scores: Sequence[Score]) -> Score:
    """Sum of several scores (counts added, Dice values pooled)."""
    judged = all(s.spurious is not None for s in scores)
    return Score(reference=sum(s.reference for s in scores),
                 found=sum(s.found for s in scores),
                 spurious=sum(s.spurious for s in scores) if judged else None,
                 regions=sum(s.regions for s in scores),
                 dice=np.concatenate([s.dice for s in scores]))


def count_spurious(labels: np.ndarray, truth: np.ndarray, matched: np.ndarray,
                   dont_care: np.ndarray) -> int:
    """Regions that are nobody's match and do not lie mostly inside a don't-care cell.

    The realdata README's rule: a region is spurious when no reference cell is matched to it
    at Dice >= :data:`MIN_DICE`, unless more than :data:`MAJORITY` of its pixels lie inside
    one reference cell that touches the border (those cells are a don't-care zone).

    Parameters
    ----------
    labels, truth : ndarray of int
        Predicted and reference label maps (0 = background).
    matched : ndarray of int
        Predicted labels matched to a scored reference cell.
    dont_care : ndarray of int
        Reference labels of the don't-care cells.

    Returns
    -------
    int
        Number of spurious regions.

    Examples
    --------
    >>> truth = np.array([[1, 1, 0, 2, 2, 2]])
    >>> labels = np.array([[5, 5, 0, 6, 6, 0]])
    >>> count_spurious(labels, truth, np.array([], int), np.array([1])), \
count_spurious(labels, truth, np.array([], int), np.array([], int))
    (1, 2)
    """
    pred = labels.ravel()
    ids, index = np.unique(pred, return_inverse=True)
    size = np.bincount(index, minlength=ids.size)
    inside_best = np.zeros(ids.size, np.int64)
    if dont_care.size:
        ref = truth.ravel()
        care = np.isin(ref, dont_care) & (pred > 0)
        ref_index = np.searchsorted(dont_care, ref[care])
        joint = np.bincount(index[care] * dont_care.size + ref_index,
                            minlength=ids.size * dont_care.size)
        inside_best = joint.reshape(ids.size, dont_care.size).max(axis=1)
    candidate = (ids > 0) & ~np.isin(ids, matched)
    return int(np.count_nonzero(candidate & (inside_best <= MAJORITY * size)))


def score_labels(labels: np.ndarray, truth: np.ndarray, *, judge_spurious: bool = True) -> Score:
    """Score a label map against a reference (realdata README rule).

    Parameters
    ----------
    labels, truth : ndarray of int
        Predicted and reference label maps, same shape (0 = background / not annotated).
    judge_spurious : bool
        False for a sparse reference, where unmatched regions may be unannotated cells.

    Returns
    -------
    Score
    """
    from cavitas.compare import border_labels, compare_labels

    dont_care = np.sort(border_labels(truth)).astype(np.int64)
    table, summary = compare_labels(labels, truth, min_dice=MIN_DICE, ignore=dont_care)
    found = np.asarray(table["found"], bool)
    matched = np.asarray(table["label"], np.int64)[found]
    spurious = count_spurious(labels, truth, matched, dont_care) if judge_spurious else None
    return Score(reference=summary["reference_regions"], found=int(found.sum()),
                 spurious=spurious, regions=summary["predicted_regions"],
                 dice=np.asarray(table["dice"], np.float64))


# --------------------------------------------------------------------------- methods

@dataclass(frozen=True, eq=False)
class Run:
    """One method on one or more images.

    Attributes
    ----------
    method : str
        Which method.
    labels : list of ndarray
        Its label maps, one per image.
    seconds : float
        Time of the method at the chosen setting (tuning not included).
    setting : str
        Parameters used or chosen, plus the tuning time for tuned baselines.
    """

    method: str
    labels: list[np.ndarray]
    seconds: float
    setting: str
    partitions: list[np.ndarray] = field(default_factory=list)


def run_cavitas(volumes: Sequence[Volume], walls: str) -> Run:
    """``cavitas.segment`` with defaults on each volume, timed.

    Parameters
    ----------
    volumes : sequence of cavitas.Volume
        Images (each segmented on its own).
    walls : {"bright", "dark"}
        Polarity, from the realdata README.

    Returns
    -------
    Run
        Setting: the smoothing chosen (pixels; several values when they differ per image)
        and the persistence threshold (range over images).
    """
    import cavitas

    labels, partitions, sigmas, thresholds, seconds = [], [], set(), [], 0.0
    for volume in volumes:
        t0 = time.perf_counter()
        seg = cavitas.segment(volume, walls=walls)
        seconds += time.perf_counter() - t0
        labels.append(np.asarray(seg.labels))
        partitions.append(seg.partition)  # computed on use: not in the time
        step = float(np.min(volume.spacing))
        sigmas.add(round(float(seg.params["smooth_sigma"]) / step, 2))
        thresholds.append(float(seg.params["threshold"]))
    sigma = "/".join(f"{s:g}" for s in sorted(sigmas))
    lo, hi = min(thresholds), max(thresholds)
    threshold = f"{lo:.4g}" if lo == hi else f"{lo:.4g}-{hi:.4g}"
    return Run(CAVITAS, labels, seconds, f"sigma={sigma} px, threshold={threshold}",
               partitions)


def warm_up() -> None:
    """Run cavitas once on small 2D and 3D noise so compilation is not timed."""
    import cavitas

    rng = np.random.default_rng(0)
    for shape in ((48, 48), (16, 16, 16)):
        cavitas.segment(rng.normal(100.0, 5.0, shape))


def wall_image(image: np.ndarray, walls: str, sigma: float) -> np.ndarray:
    """Gaussian-smoothed image with the walls bright (``walls="dark"`` flips the sign)."""
    signed = image if walls == "bright" else -image
    return ndi.gaussian_filter(signed, sigma) if sigma > 0 else signed


def otsu_label(image: np.ndarray, walls: str, sigma: float) -> np.ndarray:
    """Gaussian + Otsu + connected components, border-touching components dropped.

    Parameters
    ----------
    image : ndarray
        2D or 3D image.
    walls : {"bright", "dark"}
        Polarity; the cells are the side of the Otsu threshold away from the walls.
    sigma : float
        Gaussian sigma, pixels (0 = none).

    Returns
    -------
    ndarray of int
    """
    from skimage.filters import threshold_otsu
    from skimage.segmentation import clear_border

    g = wall_image(image, walls, sigma)
    labels, _ = ndi.label(g < threshold_otsu(g))
    return clear_border(labels)


def basins(g: np.ndarray, h_fraction: float) -> np.ndarray:
    """Watershed of ``g`` from its h-minima, h a share of the 5-95 % spread of ``g``."""
    from skimage.morphology import h_minima
    from skimage.segmentation import watershed

    spread = float(np.quantile(g, 0.95) - np.quantile(g, 0.05))
    markers, _ = ndi.label(h_minima(g, h_fraction * spread))
    return watershed(g, markers)


def cut_walls(labels: np.ndarray, g: np.ndarray, quantile: float) -> np.ndarray:
    """Zero the pixels of ``g`` at or above its ``quantile``, then drop border components."""
    from skimage.segmentation import clear_border

    return clear_border(np.where(g < np.quantile(g, quantile), labels, 0))


def watershed_label(image: np.ndarray, walls: str, sigma: float, h_fraction: float,
                    quantile: float) -> np.ndarray:
    """Gaussian + h-minima markers + watershed + global wall threshold, border dropped.

    Parameters
    ----------
    image : ndarray
        2D or 3D image.
    walls : {"bright", "dark"}
        Polarity.
    sigma : float
        Gaussian sigma, pixels.
    h_fraction : float
        Marker depth h as a share of the smoothed image's 5-95 % spread.
    quantile : float
        Share of pixels (darkest on the wall-bright image) kept as cell interior.

    Returns
    -------
    ndarray of int
    """
    g = wall_image(image, walls, sigma)
    return cut_walls(basins(g, h_fraction), g, quantile)


#: A grid: yields (parameters, one label map per image).
Grid = Iterator[tuple[tuple[float, ...], list[np.ndarray]]]


def otsu_grid(images: Sequence[np.ndarray], walls: str, sigmas: Sequence[float]) -> Grid:
    """Every sigma of the Otsu baseline on every image."""
    for sigma in sigmas:
        yield (sigma,), [otsu_label(image, walls, sigma) for image in images]


def watershed_grid(images: Sequence[np.ndarray], walls: str, sigmas: Sequence[float],
                   h_fractions: Sequence[float], quantiles: Sequence[float]) -> Grid:
    """Every (sigma, h, quantile) of the watershed baseline, sharing the work across levels."""
    for sigma in sigmas:
        smooth = [wall_image(image, walls, sigma) for image in images]
        for h_fraction in h_fractions:
            regions = [basins(g, h_fraction) for g in smooth]
            for quantile in quantiles:
                yield ((sigma, h_fraction, quantile),
                       [cut_walls(lab, g, quantile) for lab, g in zip(regions, smooth,
                                                                        strict=True)])


@dataclass(frozen=True)
class Tuned:
    """Best point of a grid search.

    Attributes
    ----------
    params : tuple of float
        The parameters.
    score : Score
        Its total score over the images.
    tried : int
        Grid points scored.
    seconds : float
        Time of the whole search.
    """

    params: tuple[float, ...]
    score: Score
    tried: int
    seconds: float


def tune(grid: Grid, truths: Sequence[np.ndarray], *, judge_spurious: bool = True) -> Tuned:
    """Score every grid point on all images jointly; keep the best by :meth:`Score.rank`."""
    t0 = time.perf_counter()
    best: tuple[tuple[float, ...], Score] | None = None
    tried = 0
    for params, labels in grid:
        tried += 1
        score = total([score_labels(lab, truth, judge_spurious=judge_spurious)
                       for lab, truth in zip(labels, truths, strict=True)])
        if best is None or score.rank() > best[1].rank():
            best = (params, score)
    return Tuned(best[0], best[1], tried, time.perf_counter() - t0)


def run_tuned(method: str, label_fn: Callable[..., np.ndarray], names: Sequence[str],
              images: Sequence[np.ndarray], walls: str, tuned: Tuned) -> Run:
    """Rerun a baseline at its tuned parameters, timed, as a :class:`Run`."""
    t0 = time.perf_counter()
    labels = [label_fn(image, walls, *tuned.params) for image in images]
    seconds = time.perf_counter() - t0
    setting = ", ".join(f"{n}={p:g}" for n, p in zip(names, tuned.params, strict=True))
    return Run(method, labels, seconds,
               f"{setting} (best of {tuned.tried}, search {tuned.seconds:.0f} s)")


def tuned_baselines(images: Sequence[np.ndarray], truths: Sequence[np.ndarray], walls: str,
                    size: str, *, judge_spurious: bool = True) -> list[Run]:
    """Both baselines, each tuned jointly on all images against their references."""
    otsu = tune(otsu_grid(images, walls, OTSU_SIGMAS[size]), truths,
                judge_spurious=judge_spurious)
    shed = tune(watershed_grid(images, walls, WATERSHED_SIGMAS[size], H_FRACTIONS[size],
                               QUANTILES[size]), truths, judge_spurious=judge_spurious)
    return [run_tuned(OTSU, otsu_label, ("sigma",), images, walls, otsu),
            run_tuned(WATERSHED, watershed_label, ("sigma", "h", "q"), images, walls, shed)]


# --------------------------------------------------------------------------- report

@dataclass
class ScanReport:
    """What one scan prints: a table (one line per method), notes and bench rows.

    Attributes
    ----------
    scan : str
        Scan name (folder in realdata).
    title : str
        One line describing the scan and how it is scored.
    columns : tuple of str
        Table header.
    lines : list of tuple of str
        One per method, aligned with ``columns``; the first cell is the method.
    targets : list of str
        Per line, the target (with its source) for the bench table.
    notes : list of str
        Extra lines printed under the table.
    details : list of str
        Lines printed only with ``--verbose``.
    """

    scan: str
    title: str
    columns: tuple[str, ...]
    lines: list[tuple[str, ...]] = field(default_factory=list)
    targets: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    details: list[str] = field(default_factory=list)

    def add(self, line: tuple[str, ...], target: str) -> None:
        """Append one method's line and its target."""
        self.lines.append(line)
        self.targets.append(target)

    def text(self, verbose: bool = False) -> str:
        """The report as aligned text."""
        table = [self.columns, *self.lines]
        widths = [max(len(row[i]) for row in table) for i in range(len(self.columns))]
        out = [f"\n== {self.scan}: {self.title} =="]
        for k, row in enumerate(table):
            out.append("  ".join(c.ljust(w) for c, w in zip(row, widths, strict=True)).rstrip())
            if k == 0:
                out.append("  ".join("-" * w for w in widths))
        out += [f"  {n}" for n in self.notes]
        if verbose:
            out += [f"  {d}" for d in self.details]
        return "\n".join(out)

    def rows(self) -> list[dict]:
        """Rows for ``python -m bench`` (metric, value, target, note)."""
        rows = []
        for line, target in zip(self.lines, self.targets, strict=True):
            cells = dict(zip(self.columns, line, strict=True))
            setting = cells.pop("setting", "")
            method = cells.pop(self.columns[0])
            value = " ".join(f"{k} {v}" for k, v in cells.items())
            rows.append({"metric": f"{self.scan} | {method}", "value": value,
                         "target": target, "note": setting})
        return rows


def _fmt(x: float, digits: int = 3) -> str:
    """A number for the table; a dash for nan."""
    return "-" if np.isnan(x) else f"{x:.{digits}f}"


SCORED_COLUMNS = ("method", "cells", "regions", "found", "spurious", "median Dice", "F",
                  "time", "setting")


def scored_line(run: Run, score: Score) -> tuple[str, ...]:
    """A table line of a method scored against a reference."""
    spurious = "n/a" if score.spurious is None else str(score.spurious)
    return (run.method, str(score.reference), str(score.regions), str(score.found), spurious,
            _fmt(score.median_dice), _fmt(score.f), f"{run.seconds:.2f} s", run.setting)


def scored_target(method: str) -> str:
    """Target of a scored line (the README asks for both side by side)."""
    if method == CAVITAS:
        return "F >= tuned baselines (realdata README: compare side by side)"
    return "optimistic reference (tuned on the reference itself)"


# --------------------------------------------------------------------------- pictures

def save_outlines(image: np.ndarray, labels: np.ndarray, path: Path, title: str,
                  contours: Sequence[tuple[np.ndarray, str]] = ()) -> Path:
    """Save a PNG of a 2D image with the outlines of its labelled regions (Agg backend).

    Parameters
    ----------
    image : ndarray
        2D image (shown in grey, 0.5-99.5 % percentile range).
    labels : ndarray of int
        Regions to outline (red), same shape.
    path : Path
        PNG file to write (its folder is created).
    title : str
        Figure title.
    contours : sequence of (mask, colour)
        Extra boolean masks to outline (e.g. the reference, a specimen mask).

    Returns
    -------
    Path
        ``path``.
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    from skimage.segmentation import find_boundaries

    lo, hi = np.percentile(image, (0.5, 99.5))
    grey = np.clip((image - lo) / max(hi - lo, 1e-12), 0, 1)
    rgb = np.repeat(grey[..., None], 3, axis=2)
    rgb[find_boundaries(labels, mode="inner") & (labels > 0)] = (1.0, 0.1, 0.1)
    fig = Figure(figsize=(6, 6.4), dpi=110)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    ax.imshow(rgb, interpolation="nearest")
    for mask, colour in contours:
        ax.contour(mask.astype(float), levels=[0.5], colors=colour, linewidths=0.8)
    ax.set_title(title, fontsize=9)
    ax.set_axis_off()
    path.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(path, bbox_inches="tight")
    return path


# --------------------------------------------------------------------------- scans with a reference

def em_nerve_cord(opts: Options) -> ScanReport:
    """Drosophila VNC serial-section TEM: ten 512² slices, dark membranes, full reference.

    Reference instances are the 4-connected components of ``membranes == 0`` (realdata
    README); each slice is its own 2D image; one baseline setting serves all slices.
    """
    folder = opts.root / "em_nerve_cord"
    images = sorted(p for p in folder.glob("slice??.tif"))[:EM_SLICES[opts.size]]
    volumes = [read_scan(p) for p in images]
    truths = [ndi.label(np.asarray(read_scan(p.with_name(p.stem + "_membranes.tif")).data)
                        == 0)[0] for p in images]
    walls = "dark"  # realdata README
    pixels = [as_float(v) for v in volumes]
    runs = [run_cavitas(volumes, walls), *tuned_baselines(pixels, truths, walls, opts.size)]
    report = ScanReport("em_nerve_cord",
                        f"{len(images)} TEM slices 512x512, dark walls, 4.6 nm px; totals over "
                        "slices; reference = 4-connected interiors (Gerhard et al. 2013)",
                        SCORED_COLUMNS)
    for run in runs:
        per_slice = [score_labels(lab, truth) for lab, truth in zip(run.labels, truths,
                                                                    strict=True)]
        score = total(per_slice)
        report.add(scored_line(run, score), scored_target(run.method))
        report.details += [f"{run.method:<27} {p.stem}: found {s.found}/{s.reference} "
                           f"spurious {s.spurious} median Dice {_fmt(s.median_dice)} "
                           f"F {_fmt(s.f)}" for p, s in zip(images, per_slice, strict=True)]
    report.notes.append(partition_note(runs[0], truths))
    picture = save_outlines(pixels[0], runs[0].labels[0], opts.figures / "em_slice00.png",
                            f"{images[0].name}: cavitas regions (red), reference cells (cyan)",
                            [(truths[0] > 0, "cyan")])
    report.notes += ["border-cut reference cells are don't-care; times are totals over the "
                     "slices, the baselines' without their grid search (given in setting)",
                     f"picture: {picture}"]
    return report


def partition_note(run: Run, truths: Sequence[np.ndarray]) -> str:
    """cavitas's partition scored against the reference partition, and the wall's share.

    The reference partition gives every membrane pixel to the nearest reference cell
    (``skimage.segmentation.expand_labels`` without a distance bound): the tiling a
    partition should reproduce. The wall's share is the median, over the reference cells
    found by both maps, of (area in the partition) / (area in the label map) - 1: how much
    a cell grows when it takes its half of the walls; the reference's own ratio is given
    beside it.
    """
    from skimage.segmentation import expand_labels

    grown = [expand_labels(t, distance=max(t.shape)) for t in truths]
    score = total([score_labels(p, g) for p, g in zip(run.partitions, grown, strict=True)])
    ours, theirs = [], []
    for lab, part, truth, whole in zip(run.labels, run.partitions, truths, grown, strict=True):
        for cell in np.unique(truth[truth > 0]):
            inside = truth == cell
            ids, counts = np.unique(lab[inside], return_counts=True)
            best = ids[np.argmax(counts)]
            if best == 0 or counts.max() < 0.7 * inside.sum():
                continue
            ours.append(np.count_nonzero(part == best) / np.count_nonzero(lab == best) - 1)
            theirs.append(np.count_nonzero(whole == cell) / inside.sum() - 1)
    return (f"partition (cells grown to the wall ridge) vs the reference cells grown over "
            f"the membranes: found {score.found}/{score.reference}, spurious {score.spurious},"
            f" median Dice {_fmt(score.median_dice)}, F {_fmt(score.f)}; a cell's half of "
            f"the walls adds a median {np.median(ours):.0%} to its area (reference "
            f"{np.median(theirs):.0%})")


#: Variants of the EM slices that stand for other scans of the same kind (another pixel
#: size, a smaller field, more noise): name -> (what it is, zoom of the pixel grid).
EM_VARIANTS = {
    "half": ("2x2 block means (9.2 nm px)", 0.5),
    "double": ("linear 2x upsampling (2.3 nm px)", 2.0),
    "crop": ("central 300x300 crop", 1.0),
    "noisier": ("added Gaussian noise, sd 20 grey levels", 1.0),
}
#: Smoothing grid (pixels of the slices as they are) of the watershed on the variants.
VARIANT_SIGMAS = (2.0, 3.0, 4.0)


def em_variant(image: np.ndarray, membranes: np.ndarray, name: str
               ) -> tuple[np.ndarray, np.ndarray]:
    """One EM slice and its membrane mask as :data:`EM_VARIANTS` ``name`` makes them.

    Halving keeps a membrane pixel wherever any of its 2x2 block was one (so no reference
    membrane breaks); doubling repeats the mask's pixels (nearest neighbour); the added
    noise has a fixed seed.
    """
    image = image.astype(np.float64)
    if name == "half":
        h, w = (n // 2 * 2 for n in image.shape)
        image = image[:h, :w].reshape(h // 2, 2, w // 2, 2).mean(axis=(1, 3))
        membranes = membranes[:h, :w].reshape(h // 2, 2, w // 2, 2).max(axis=(1, 3))
    elif name == "double":
        image = ndi.zoom(image, 2, order=1)
        membranes = np.repeat(np.repeat(membranes, 2, axis=0), 2, axis=1)
    elif name == "crop":
        image, membranes = image[106:406, 106:406], membranes[106:406, 106:406]
    elif name == "noisier":
        image = image + np.random.default_rng(0).normal(0.0, 20.0, image.shape)
    else:
        raise ValueError(f"unknown EM variant {name!r}; known: {tuple(EM_VARIANTS)}")
    return image, membranes


def em_variants(opts: Options) -> ScanReport:
    """The EM slices at another pixel size, cropped and noisier: the same kind of scan as
    other labs take it. cavitas keeps its defaults; the watershed is tuned again on each
    variant (its smoothing grid scaled by the zoom), so it is the optimistic reference.
    """
    from cavitas.io import Volume

    folder = opts.root / "em_nerve_cord"
    images = sorted(p for p in folder.glob("slice??.tif"))[:EM_SLICES[opts.size]]
    raw = [(np.asarray(read_scan(p).data),
            np.asarray(read_scan(p.with_name(p.stem + "_membranes.tif")).data) > 0)
           for p in images]
    report = ScanReport("em_variants",
                        f"the {len(images)} EM slices remade as other scans of the kind; "
                        "scored like em_nerve_cord", ("variant", *SCORED_COLUMNS))
    for name, (what, zoom) in EM_VARIANTS.items():
        made = [em_variant(image, membranes, name) for image, membranes in raw]
        pixels = [image for image, _ in made]
        truths = [ndi.label(~membranes)[0] for _, membranes in made]
        cavitas_run = run_cavitas([Volume(image) for image in pixels], "dark")
        shed = tune(watershed_grid(pixels, "dark", [s * zoom for s in VARIANT_SIGMAS],
                                   H_FRACTIONS[opts.size], QUANTILES[opts.size]), truths)
        shed_run = run_tuned(WATERSHED, watershed_label, ("sigma", "h", "q"), pixels, "dark",
                             shed)
        for run in (cavitas_run, shed_run):
            score = total([score_labels(lab, truth) for lab, truth in zip(run.labels, truths,
                                                                          strict=True)])
            report.add((f"{name}: {what}", *scored_line(run, score)),
                       scored_target(run.method))
    report.notes.append(f"the watershed's sigmas: {VARIANT_SIGMAS} px times the zoom (around "
                        "its optimum on the slices as they are)")
    return report


def cells3d_membrane_slice(opts: Options) -> ScanReport:
    """cells3d membrane slice: bright walls, 0.26 µm, three annotated cells.

    Only three cells are annotated (0 = not annotated), so spurious regions cannot be judged;
    the baselines are tuned on found, then median Dice.
    """
    import cavitas

    folder = opts.root / "cells3d_membrane_slice"
    raw = read_scan(folder / "membranes_2d.tif")
    volume = cavitas.Volume(np.asarray(raw.data), spacing=(CELLS3D_SPACING_UM,) * 2, unit="µm")
    truth = np.asarray(read_scan(folder / "membranes_2d_sparse_labels.tif").data).astype(np.int64)
    walls = "bright"  # realdata README
    image = as_float(volume)
    runs = [run_cavitas([volume], walls),
            *tuned_baselines([image], [truth], walls, opts.size, judge_spurious=False)]
    report = ScanReport("cells3d_membrane_slice",
                        "256x256 membrane stain, bright walls, 0.26 um px; sparse reference "
                        "(3 annotated cells)", SCORED_COLUMNS)
    for run in runs:
        score = score_labels(run.labels[0], truth, judge_spurious=False)
        report.add(scored_line(run, score),
                   "found 3 of 3 (annotation: BioImageAnalysisNotebooks sparse labels)")
    picture = save_outlines(image, runs[0].labels[0], opts.figures / "cells3d_slice.png",
                            "cells3d membranes: cavitas regions (red), annotated cells (cyan)",
                            [(truth > 0, "cyan")])
    report.notes += ["spurious cannot be judged: unannotated pixels are not background "
                     "(realdata README); baselines tuned on found, then median Dice, F is n/a",
                     f"picture: {picture}"]
    return report


# --------------------------------------------------------------------------- scans without one

def body_mask(image: np.ndarray, *, per_slice_fill: bool = False) -> np.ndarray:
    """The specimen: Gaussian (:data:`MASK_SIGMA`), Otsu, fill holes, largest component.

    Parameters
    ----------
    image : ndarray
        3D image of a bright body in a dark surround.
    per_slice_fill : bool
        Fill holes slice by slice along axis 0 (for a cylinder cut by the top and bottom
        faces, whose pores are not closed in 3D there); else in 3D.

    Returns
    -------
    ndarray of bool
    """
    from skimage.filters import threshold_otsu

    g = ndi.gaussian_filter(image, MASK_SIGMA)
    body = g > threshold_otsu(g)
    if per_slice_fill:
        body = np.stack([ndi.binary_fill_holes(s) for s in body])
    else:
        body = ndi.binary_fill_holes(body)
    parts, n = ndi.label(body)
    if n == 0:
        return body
    sizes = np.bincount(parts.ravel())
    sizes[0] = 0
    return parts == sizes.argmax()


def share_inside(labels: np.ndarray, mask: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per region 1..n: voxel count and share of its voxels inside ``mask``.

    Returns
    -------
    sizes, share : ndarray
        Indexed by label - 1, for the labels present (absent labels have size 0).
    """
    flat = labels.ravel()
    sizes = np.bincount(flat)[1:]
    inside = np.bincount(flat, weights=mask.ravel().astype(np.float64))[1:]
    present = sizes > 0
    return sizes[present], inside[present] / sizes[present]


def _sizes(sizes: np.ndarray) -> str:
    """Median and range of region sizes, voxels."""
    if not sizes.size:
        return "-"
    return f"median {np.median(sizes):.0f} ({sizes.min()}-{sizes.max()})"


def untuned_otsu_run(image: np.ndarray, why: str) -> Run:
    """Otsu + label at :data:`UNTUNED_SIGMA`, bright walls: the baseline of a 3D scan
    without a reference (``why`` says so in the setting column)."""
    t0 = time.perf_counter()
    labels = otsu_label(image, "bright", UNTUNED_SIGMA)
    return Run("Otsu + label (untuned)", [labels], time.perf_counter() - t0,
               f"sigma={UNTUNED_SIGMA:g} vx ({why})")


def arabidopsis_embryo(opts: Options) -> ScanReport:
    """Arabidopsis embryo (3D, bright walls, no reference): regions in the embryo vs outside.

    A region is *in the surround* when more than :data:`MAJORITY` of its voxels lie outside
    the embryo mask (:func:`body_mask`). The README states the surround is black and empty,
    so every region there is a false one.
    """
    volume = read_scan(opts.root / "arabidopsis_embryo" / "arabidopsis-embryo.tif")
    image = as_float(volume)
    embryo = body_mask(image)
    runs = [run_cavitas([volume], "bright"), untuned_otsu_run(image, "no reference to tune on")]
    report = ScanReport("arabidopsis_embryo",
                        f"106x112x109 confocal, bright walls, no reference; expected "
                        f"{EMBRYO_EXPECTED} (realdata README)",
                        ("method", "regions", "in embryo", "in surround", "sizes in embryo",
                         "sizes in surround", "time", "setting"))
    for run in runs:
        sizes, share = share_inside(run.labels[0], embryo)
        inner = share > MAJORITY
        report.add((run.method, str(sizes.size), str(int(inner.sum())), str(int((~inner).sum())),
                    _sizes(sizes[inner]), _sizes(sizes[~inner]), f"{run.seconds:.2f} s",
                    run.setting),
                   "in embryo ~16-32 + suspensor, surround 0 (realdata README)")
    z = image.shape[0] // 2
    picture = save_outlines(image[z], runs[0].labels[0][z], opts.figures / "embryo_mid.png",
                            f"embryo z={z}: cavitas regions (red), embryo mask (yellow)",
                            [(embryo[z], "yellow")])
    report.notes += [f"embryo mask: Gaussian sigma {MASK_SIGMA:g} vx + Otsu + fill holes + "
                     f"largest component, {int(embryo.sum())} voxels; sizes in voxels "
                     "(spacing about 0.8 um, not in the file)",
                     f"picture: {picture}"]
    return report


@dataclass(frozen=True, eq=False)
class Voids:
    """Air voids of the concrete by a simple threshold, independent of cavitas.

    Attributes
    ----------
    labels : ndarray of int
        Void components (>= :data:`VOID_MIN_VOXELS` voxels), 0 elsewhere.
    count : int
        Number of voids.
    threshold : float
        Grey level below which a specimen voxel is void.
    outside, mortar : float
        The two levels it lies half-way between.
    """

    labels: np.ndarray
    count: int
    threshold: float
    outside: float
    mortar: float


def find_voids(image: np.ndarray, specimen: np.ndarray) -> Voids:
    """Voxels of the specimen darker than half-way between the outside and mortar levels.

    The outside (air) level is the median of the voxels outside the specimen mask and below
    its Otsu threshold; the mortar level the median inside the mask (mortar is the bulk,
    realdata README). Half-way between two phases is the usual CT surface level (the
    "ISO-50 %" value; common practice, from memory). Components (6-connected) of at least
    :data:`VOID_MIN_VOXELS` voxels are voids.
    """
    from skimage.filters import threshold_otsu

    cut = threshold_otsu(ndi.gaussian_filter(image, MASK_SIGMA))
    outside = float(np.median(image[~specimen & (image < cut)]))
    mortar = float(np.median(image[specimen]))
    threshold = (outside + mortar) / 2
    parts, _ = ndi.label(specimen & (image < threshold))
    sizes = np.bincount(parts.ravel())
    keep = sizes >= VOID_MIN_VOXELS
    keep[0] = False
    kept_ids = np.flatnonzero(keep)
    relabel = np.zeros(sizes.size, np.int64)
    relabel[kept_ids] = np.arange(1, kept_ids.size + 1)
    return Voids(relabel[parts], int(kept_ids.size), threshold, outside, mortar)


def voids_hit(labels: np.ndarray, void_labels: np.ndarray) -> int:
    """Voids with more than :data:`MAJORITY` of their voxels inside regions of ``labels``."""
    _, covered = share_inside(void_labels, labels > 0)
    return int(np.count_nonzero(covered > MAJORITY))


def concrete_xray(opts: Options) -> ScanReport:
    """Concrete micro-CT (3D, bright walls, no reference): regions vs dark air voids.

    Per method: regions, those mostly inside the specimen, their volume fraction of the
    specimen, regions lying mostly on void voxels ("void-like"), and voids of
    :func:`find_voids` covered more than half by regions ("voids hit").
    """
    volume = read_scan(opts.root / "concrete_xray" / "concrete_x-ray-bin16.tif")
    image = as_float(volume)
    specimen = body_mask(image, per_slice_fill=True)
    voids = find_voids(image, specimen)
    runs = [run_cavitas([volume], "bright"),
            untuned_otsu_run(image, "no reference; close to the void rule")]
    report = ScanReport("concrete_xray",
                        "100^3 micro-CT bin 16, bright walls, no reference; the wanted regions "
                        "are the small dark air voids (realdata README)",
                        ("method", "regions", "in specimen", "volume fraction", "void-like",
                         "voids hit", "time", "setting"))
    void_voxels = voids.labels > 0
    for run in runs:
        labels = run.labels[0]
        sizes, share = share_inside(labels, specimen)
        _, on_void = share_inside(labels, void_voxels)
        fraction = np.count_nonzero((labels > 0) & specimen) / np.count_nonzero(specimen)
        hits = voids_hit(labels, voids.labels)
        report.add((run.method, str(sizes.size), str(int((share > MAJORITY).sum())),
                    f"{100 * fraction:.1f} %", str(int((on_void > MAJORITY).sum())),
                    f"{hits}/{voids.count}", f"{run.seconds:.2f} s", run.setting),
                   f"regions ~ voids ({voids.count} by the threshold rule), few others")
    z = image.shape[0] // 2
    picture = save_outlines(image[z], runs[0].labels[0][z], opts.figures / "concrete_mid.png",
                            f"concrete z={z}: cavitas regions (red), specimen (yellow), "
                            "voids (cyan)", [(specimen[z], "yellow"), (void_voxels[z], "cyan")])
    report.notes += [f"specimen mask: Gaussian sigma {MASK_SIGMA:g} vx + Otsu + per-slice fill "
                     f"+ largest component, {int(specimen.sum())} voxels",
                     f"voids: specimen voxels below {voids.threshold:.0f} (half-way between "
                     f"outside {voids.outside:.0f} and mortar {voids.mortar:.0f}), 6-connected, "
                     f">= {VOID_MIN_VOXELS} voxels: {voids.count} voids, "
                     f"{100 * void_voxels.sum() / specimen.sum():.2f} % of the specimen",
                     f"picture: {picture}"]
    return report




# --------------------------------------------------------------------------- driver

#: Scans, in the order they run.
SCANS: dict[str, Callable[[Options], ScanReport]] = {
    "em_nerve_cord": em_nerve_cord,
    "cells3d_membrane_slice": cells3d_membrane_slice,
    "arabidopsis_embryo": arabidopsis_embryo,
    "concrete_xray": concrete_xray,
    "em_variants": em_variants,
}


def reports(opts: Options) -> Iterator[ScanReport]:
    """Run the chosen scans (after one cavitas warm-up) and yield their reports."""
    warm_up()
    for name in opts.scans:
        yield SCANS[name](opts)


def options(args: argparse.Namespace) -> Options | None:
    """Options from parsed arguments (any missing one takes its default); None without data."""
    root = realdata_dir()
    if not root.is_dir():
        print(f"real_scans: no realdata folder at {root} ({REALDATA_ENV} names another); skipped")
        return None
    figures = getattr(args, "figures", None)
    if figures is None:
        figures = tempfile.mkdtemp(prefix="cavitas-real-scans-")
    return Options(root=root, scans=tuple(getattr(args, "only_scan", None) or SCANS),
                   quick=bool(getattr(args, "quick", False)),
                   verbose=bool(getattr(args, "verbose", False)), figures=Path(figures))


def run(args: argparse.Namespace) -> list[dict]:
    """Rows for ``python -m bench``: one per scan and method (none without the data)."""
    opts = options(args)
    if opts is None:
        return []
    rows = [row for report in reports(opts) for row in report.rows()]
    rows.append({"metric": "pictures", "value": str(opts.figures), "target": "",
                 "note": "cavitas outlines on a middle slice per scan"})
    return rows


def main(argv: list[str] | None = None) -> int:
    """``python -m bench.real_scans``: print one table per scan."""
    parser = argparse.ArgumentParser(prog="python -m bench.real_scans",
                                     description=__doc__.splitlines()[0])
    parser.add_argument("--only-scan", metavar="NAME", action="append", choices=tuple(SCANS),
                        help="run only this scan (repeatable); default: all")
    parser.add_argument("--quick", action="store_true",
                        help="smaller baseline grids and 3 EM slices instead of 10")
    parser.add_argument("--verbose", action="store_true", help="per-slice lines for the EM set")
    parser.add_argument("--figures", metavar="DIR", type=Path,
                        help="folder for the PNG pictures (default: a new temporary folder)")
    args = parser.parse_args(argv)
    opts = options(args)
    if opts is None:
        return 0
    print(f"realdata: {opts.root}; pictures: {opts.figures}", flush=True)
    for report in reports(opts):
        print(report.text(opts.verbose), flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
