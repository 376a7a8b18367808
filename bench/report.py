"""Report: time to write report.html as a ratio to the segmentation, and its size at 512³.

Inputs: the bundled samples (invented scenes, sample_volumes/), segmented with the default
parameters. Reference: ``cavitas.segment.segment`` on the same input, in the same process;
the ratio is report time / segmentation time. Target: ≤ 1 (the page should not cost more
than the work it shows; most of it is drawing the Matplotlib figures). With ``--large``,
the size of the page for a 512³ scan (invented foam of Voronoi cells with Gaussian noise at
full resolution, the hard case for compression). Target: ≤ 15 MB.
"""

from __future__ import annotations

import tempfile
import time
from pathlib import Path

import numpy as np
from scipy import ndimage

from cavitas import io
from cavitas._table import Table
from cavitas.report import write_report
from cavitas.segment import segment
from cavitas.workflow import measured_regions, run_notes

NAME = "report"
SAMPLES = Path(__file__).resolve().parent.parent / "sample_volumes"


def foam(side: int, *, cells: int = 300, seed: int = 7) -> tuple[np.ndarray, np.ndarray]:
    """Invented foam: (image float32, labels int32) of shape (side,) * 3."""
    rng = np.random.default_rng(seed)
    coarse = max(side // 4, 16)
    seeds = np.zeros((coarse,) * 3, np.int32)
    where = rng.integers(0, coarse, size=(cells, 3))
    seeds[tuple(where.T)] = np.arange(1, cells + 1)
    _, nearest = ndimage.distance_transform_edt(seeds == 0, return_indices=True)
    cell = seeds[tuple(nearest)]
    wall = np.zeros(cell.shape, bool)
    for axis in range(3):
        wall |= np.diff(cell, axis=axis, append=np.take(cell, [-1], axis=axis)) != 0
    labels = np.where(wall, 0, cell).astype(np.int32)
    reps = side // coarse
    labels = labels.repeat(reps, 0).repeat(reps, 1).repeat(reps, 2)
    image = np.where(labels == 0, 1.0, 0.2).astype(np.float32)
    image += rng.normal(0.0, 0.15, image.shape).astype(np.float32)
    return image, labels


def _ratio(name: str, folder: Path) -> dict:
    volume = io.read(SAMPLES / name)
    start = time.perf_counter()
    seg = segment(volume)
    segment_s = time.perf_counter() - start
    regions, figures = measured_regions(seg)
    start = time.perf_counter()
    write_report(folder / f"{name}.html", image=np.asarray(volume.data),
                 labels=seg.labels if seg.all_labels is None else seg.all_labels,
                 spacing=volume.spacing, unit=volume.unit, regions=regions,
                 diagram=seg.diagram, kept=seg.kept, threshold=seg.threshold,
                 params=seg.params, figures=figures, source=name,
                 notes=[n for n in run_notes(seg).values() if n])
    report_s = time.perf_counter() - start
    return {"metric": f"report / segmentation time, {name} {volume.shape}",
            "value": f"{report_s / segment_s:.2f} ({report_s:.1f} s / {segment_s:.1f} s)",
            "target": "≤ 1", "note": f"{len(regions)} rows"}


def _size(side: int, folder: Path) -> dict:
    image, labels = foam(side)
    ids = np.unique(labels[labels > 0])
    volume = ndimage.sum_labels(np.ones(labels.shape, np.float32), labels, ids)
    regions = Table({"label": ids, "volume": volume}, units={"volume": "µm³"})
    out = folder / f"foam{side}.html"
    start = time.perf_counter()
    write_report(out, image=image, labels=labels, spacing=(1.0, 1.0, 1.0), unit="µm",
                 regions=regions, params={}, figures={})
    took = time.perf_counter() - start
    return {"metric": f"report size, {side}³ noisy foam", "value":
            f"{out.stat().st_size / 1e6:.1f} MB", "target": "≤ 15 MB",
            "note": f"{len(ids)} regions, written in {took:.0f} s"}


def run(args) -> list[dict]:
    """Time the report against the segmentation on each sample; the 512³ size if large."""
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        segment(np.random.default_rng(0).random((12, 12)).astype(np.float32))  # compile
        rows = [_ratio(name, folder) for name in ("cell_sheet.tif", "foam.nii.gz")]
        if getattr(args, "large", False):
            rows.append(_size(512, folder))
    return rows
