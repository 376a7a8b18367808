"""One file in, every segmentation output out: what ``cavitas segment`` and the batch runner call.

:func:`segment_file` reads, segments, measures and writes into one folder. The outputs
are written into a hidden staging folder inside it and moved into place together once all
are written, ``run.json`` (the completion record) last, so an interrupted run leaves no set
that looks complete (:mod:`cavitas.io._staging`):

===================== ========================================================
``labels.<ext>``      chambers (int32; walls and outside 0), the input's geometry
``regions.csv``       one row per chamber, enclosure and border-cut region: the
                      topological columns and the measurements in physical units
``regions.json``      the same table with units and the global figures
``diagram.csv``       the cavity diagram with ``kept`` and ``margin`` columns
``diagram.png``       the diagram drawn, kept cavities filled, threshold shaded
``euler.csv``         the Euler characteristic of the walls at every level where it
                      changes (the image's own levels, the run's walls and
                      connectivity, inside the mask)
``report.html``       self-contained report (``report=False`` skips it)
``run.json``          every parameter, chosen values, version, input SHA-256,
                      timings, the outputs (relative to the folder) and the
                      research-only caution
``enclosures.<ext>``  enclosures label map (``enclosures=True``)
``partition.<ext>``   every voxel of the specimen given to a region, walls split at
                      their ridge line (``partition=True``)
``shells.<ext>``      shell label map (``shells`` given): walls near each region
``meshes/``           one surface mesh per chamber (``mesh="ply"|"stl"``, 3D)
===================== ========================================================

The last four are asked for with :class:`RunOptions`, which also names the mask file;
:class:`~cavitas.segment.SegmentParams` decides the regions and :class:`ReadOptions`
(or a plain mapping of :func:`cavitas.io.read` options) how the input is read.
:class:`Settings` bundles the three and reads them from a TOML parameter file.
"""

from __future__ import annotations

import os
import time
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from ._caution import RESEARCH_ONLY
from ._errors import InputFileError, OutputError, safe_text
from ._json import dumps
from ._run_options import ReadOptions, RunOptions
from ._settings import Settings
from ._shared.atomic import atomic_path, check_writable
from ._shared.memory import check_memory, out_of_memory, reset_memory_guard, set_memory_guard
from ._table import Table
from ._version import __version__
from .io._checksum import input_checksum
from .io._staging import discard_staging, open_staging, publish_staged

if TYPE_CHECKING:
    from .cubical import ConnectivityDensity, EulerCurve

__all__ = ["ReadOptions", "RunOptions", "Settings", "WallTopology", "segment_file",
           "wall_topology"]


def _label_suffix(source: Path, wanted: str | None) -> str:
    """The label maps' suffix: the one asked for (checked by RunOptions), else the input's."""
    from .io import WRITE_SUFFIXES

    if wanted:
        return wanted
    name = source.name.lower()
    for suffix in sorted(WRITE_SUFFIXES, key=len, reverse=True):
        if name.endswith(suffix):
            return suffix
    return ".tif"  # PNG, raw and slice folders: labels need more than 8/16 bits


def diagram_table(diagram: Any, kept: np.ndarray, margin: np.ndarray) -> Table:
    """diagram.csv: the cavity pairs with ``kept`` (a chamber of the result) and ``margin``
    (persistence minus the threshold)."""
    dim = diagram.cavity_dim
    rows = diagram.pairs(dim)
    return Table({
        "dim": np.full(len(rows), dim),
        "birth": rows["birth"], "death": rows["death"],
        "persistence": diagram.persistence(dim),
        "birth_voxel": rows["birth_voxel"], "death_voxel": rows["death_voxel"],
        "kept": kept, "margin": margin,
    }, meta={"caution": RESEARCH_ONLY})


def draw_diagram(path: Path, diagram: Any, kept: np.ndarray, *, threshold: float,
                 smooth_sigma: float | None, unit: str, force: bool) -> None:
    """diagram.png: the cavity diagram, kept features filled, the threshold band shaded (the
    report shows this picture too); ``smooth_sigma`` in ``unit``, named in the title."""
    from ._shared.units import length_unit
    from .report.diagram_plots import plot_diagram, save_figure, smoothing_phrase

    dim = diagram.cavity_dim
    fig = plot_diagram(diagram, dims=dim, highlight={dim: kept}, threshold=threshold)
    at = smoothing_phrase(smooth_sigma, length_unit(unit, len(diagram.shape)))
    fig.axes[0].set_title(f"Persistence diagram {at}".strip(), fontsize=10)
    save_figure(fig, path, force=force)


@dataclass(frozen=True)
class WallTopology:
    """How the walls of one run connect.

    Attributes
    ----------
    curve : EulerCurve
        χ of the walls at every level of the unsmoothed image where it changes.
    walls : ConnectivityDensity
        Betti numbers, χ and loops per unit volume of the segmented walls.
    """

    curve: EulerCurve
    walls: ConnectivityDensity


def wall_topology(seg: Any, *, mask: np.ndarray | None = None) -> WallTopology:
    """The Euler characteristic curve of the image and the topology of the segmented walls.

    The curve is χ of the walls ``{image >= t}`` (bright walls; ``<=`` for dark) at every
    level ``t`` of the unsmoothed image, in the input's units
    (:func:`cavitas.cubical.euler_curve`, only the levels where χ changes). The segmented
    walls are every voxel inside the mask that no region holds (chambers and border-cut
    regions are not walls; a background that no region took is); their Betti numbers and
    loops per unit volume come from :func:`cavitas.cubical.connectivity_density`, with the
    run's connectivity.
    """
    from .cubical import connectivity_density, euler_curve
    from .io import Volume

    volume = seg.volume
    walls, connectivity = seg.params["walls"], seg.params["connectivity"]
    curve = euler_curve(volume.data, walls=walls, connectivity=connectivity,
                        mask=mask).changes()
    full = seg.labels if seg.all_labels is None else seg.all_labels
    wall_set = Volume(full == 0, spacing=volume.spacing, unit=volume.unit)
    return WallTopology(curve, connectivity_density(wall_set, connectivity=connectivity,
                                                    mask=mask))


def measured_regions(seg: Any, *, mask: np.ndarray | None = None, thickness: bool = True,
                     partition: bool = False) -> tuple[Table, dict[str, Any]]:
    """The regions table joined with measurements, and the global figures of the chambers.

    Chambers and border-cut regions are measured on the full label map
    (:func:`cavitas.measure.measure_regions`); enclosures keep their topological columns and
    have blanks for the measurements. Global figures (count, volumes, volume fraction =
    closed porosity) count the chambers only, and add the noise estimate and threshold.
    ``partition`` adds ``volume_with_wall``: each region's volume in
    :attr:`~cavitas.segment.Segmentation.partition` (its inside and its part of the walls).
    """
    from .measure import global_figures, measure_regions

    volume = seg.volume
    full = seg.all_labels if seg.all_labels is not None else seg.labels
    measured = measure_regions(full, spacing=volume.spacing, unit=volume.unit,
                               image=np.asarray(volume.data), roi=mask, thickness=thickness)
    regions = seg.regions
    added = measured_columns(regions, measured)
    if partition:
        from .segment._regions import label_counts

        counts = label_counts(seg.partition, len(regions) + 1)[regions["label"]]
        shown = np.isin(regions["label"], np.unique(seg.labels))
        added["volume_with_wall"] = np.where(shown, counts * volume.voxel_volume, np.nan)
        measured.units["volume_with_wall"] = measured.units.get("volume", "voxel")
    whole = whole_chamber_rows(regions, measured)
    touching = regions["label"][regions["touches_border"] & (regions["kind"] == "chamber")]
    whole_labels = (np.where(np.isin(seg.labels, touching), 0, seg.labels) if len(touching)
                    else seg.labels)
    figures = global_figures(measured.select(whole), labels=whole_labels,
                             spacing=volume.spacing, unit=volume.unit, roi=mask)
    return with_measurements(regions, added, measured.units, figures, noise=seg.noise,
                             threshold=seg.threshold), figures


def measured_columns(regions: Table, measured: Table) -> dict[str, np.ndarray]:
    """The columns of ``measured`` that ``regions`` lacks, one value per row of
    ``regions`` (matched by label): blank (NaN, or None for integers and flags) for a row
    that was not measured (enclosures)."""
    row_of = {int(lab): i for i, lab in enumerate(measured["label"])}
    rows = np.array([row_of.get(int(lab), -1) for lab in regions["label"]], np.int64)
    present = rows >= 0
    added = {}
    for name in measured.names:
        if name in regions:
            continue
        values = measured[name]
        if present.all():
            added[name] = values[rows]
        elif not len(values):  # nothing in the label map was measured (a tiny image)
            added[name] = np.full(len(rows), np.nan if values.dtype.kind == "f" else None)
        elif values.dtype.kind == "f":
            added[name] = np.where(present, values[np.maximum(rows, 0)], np.nan)
        else:  # ints and flags stay exact; a blank where nothing was measured
            added[name] = np.array([values[r].item() if r >= 0 else None for r in rows],
                                   dtype=object)
    return added


def whole_chamber_rows(regions: Table, measured: Table) -> np.ndarray:
    """The rows of ``measured`` that the global figures count: chambers not touching the
    border (kept with keep_border, listed and labelled but left out; border_note says
    so)."""
    chambers = regions["kind"] == "chamber"
    whole = regions["label"][chambers & ~regions["touches_border"]]
    return np.isin(measured["label"], whole)


def with_measurements(regions: Table, added: dict[str, np.ndarray], units: dict[str, str],
                      figures: dict[str, Any], *, noise: float, threshold: float) -> Table:
    """regions.csv / regions.json: the regions with their measured columns; ``figures``
    (the global figures) gain the noise estimate and the threshold and go into the
    table's meta with the caution."""
    figures["noise_sigma"] = noise
    figures["persistence_threshold"] = threshold
    table = regions.with_columns(added, units)
    table.meta.update(regions.meta)
    table.meta.update({"global": {k: v for k, v in figures.items() if k != "units"},
                       "global_units": figures.get("units", {}), "caution": RESEARCH_ONLY})
    return table


def segment_file(path: str | os.PathLike, outdir: str | os.PathLike, params: Any = None, *,
                 options: RunOptions | None = None, force: bool = False, progress: bool = True,
                 read_options: ReadOptions | Mapping[str, Any] | None = None,
                 report: bool = True, thickness: bool = True,
                 input_sha256: str | None = None,
                 skip_memory_check: bool = False) -> dict[str, Any]:
    """Segment one file and write every output into ``outdir``; return a summary dict.

    Parameters
    ----------
    path : path-like
        Input image or volume (any format :func:`cavitas.io.read` reads).
    outdir : path-like
        Output folder (created if needed).
    params : SegmentParams, optional
        Segmentation parameters (defaults: automatic significance, basin regions).
    options : RunOptions, optional
        The mask file and the outputs beside labels and tables (shells, enclosures,
        partition, meshes, the label format).
    force : bool
        Replace existing outputs.
    progress : bool
        Show a progress bar on stderr.
    read_options : ReadOptions or mapping, optional
        How to read the input: the options of :func:`cavitas.io.read` (``channel``,
        ``time``, ``spacing``, ``unit``, raw ``shape`` and ``dtype`` ...).
    report : bool
        Write ``report.html``.
    thickness : bool
        Measure wall thickness (local thickness; the slowest measurement on thick walls).
    input_sha256 : str, optional
        The input's SHA-256 checksum (recorded in ``run.json``) when the caller has it
        already, as the batch runner does; it is computed otherwise.
    skip_memory_check : bool
        Run even when the estimated memory (:func:`cavitas.io.estimate_memory_bytes`)
        exceeds the memory available; by default such an input is refused before the
        computation starts (:class:`~cavitas._errors.InputFileError`), as is a file that
        declares more voxels than memory holds. A ``MemoryError`` that still happens
        becomes the same kind of sentence.

    Returns
    -------
    dict
        ``regions`` (chambers kept), ``border_cut``, ``enclosures``, ``threshold``,
        ``noise``, ``smooth_sigma``, ``porosity`` (volume fraction of the chambers),
        ``mean_volume``, ``walls_euler``, ``walls_loops`` and ``connectivity_density``
        (χ, β1 and β1 per ``unit**ndim`` of the segmented walls, see
        :func:`wall_topology`), ``unit``, ``outputs`` (paths), ``message`` and
        ``caution``.

    Examples
    --------
    >>> import tempfile, numpy as np, cavitas
    >>> folder = tempfile.mkdtemp()
    >>> img = np.zeros((24, 24), np.uint8); img[4:20, 4:20] = 200; img[7:17, 7:17] = 10
    >>> _ = cavitas.write(f"{folder}/ring.tif", img, spacing=(0.5, 0.5))
    >>> summary = segment_file(f"{folder}/ring.tif", f"{folder}/out", progress=False,
    ...                        report=False)
    >>> summary["regions"], round(summary["porosity"], 3)
    (1, 0.174)
    >>> np.save(f"{folder}/ring.npy", img)  # no calibration: give it while reading
    >>> summary = segment_file(f"{folder}/ring.npy", f"{folder}/npy", progress=False,
    ...                        report=False, options=RunOptions(shells=0.5),
    ...                        read_options=ReadOptions(spacing=(0.5, 0.5)))
    >>> summary["unit"], "shells" in summary["outputs"]
    ('µm', True)
    """
    from tqdm import tqdm

    from . import io
    from .segment import SegmentParams, segment

    params, options = params or SegmentParams(), options or RunOptions()
    if isinstance(read_options, ReadOptions):
        read_options = read_options.kwargs()
    source, outdir = Path(path), Path(outdir)
    started = time.perf_counter()
    planned = _planned_outputs(source, outdir, options, report=report)
    for target in planned.values():  # fail before computing, not half-way through writing
        check_writable(target, force=force, inputs=(source,))
    if options.mesh and (outdir / "meshes").is_symlink():
        raise OutputError(f"'{outdir / 'meshes'}' is a symbolic link; cavitas does not write "
                          "through links in its output folder (remove it).")
    steps = tqdm(total=5 + bool(options.mesh), disable=not progress, unit="step",
                 desc=f"cavitas segment {source.name}", leave=False)
    timings: dict[str, float] = {}

    def stage(text: str) -> None:
        steps.set_postfix_str(text)

    def done(step: str, since: float) -> float:
        now = time.perf_counter()
        timings[step] = round(now - since, 3)
        steps.update()
        return now

    guard = set_memory_guard(not skip_memory_check)
    staging = None
    try:
        tick = started
        stage("reading")
        volume = io.read(source, **dict(read_options or {}))
        check_memory(source, volume.shape, volume.dtype)
        params.check_image(volume)  # before the kernels are loaded: fail fast
        options.check_image(volume)
        mask = _read_mask(options.mask, volume, source)
        checksum = input_sha256 or input_checksum(source)
        tick = done("read", tick)
        if progress:
            _prepare_kernels(stage)
        seg = segment(volume, params=params, mask=mask, stage=stage)
        tick = done("segment", tick)
        stage("measuring")
        regions, figures = measured_regions(seg, mask=mask, thickness=thickness,
                                            partition=options.partition)
        notes = run_notes(seg)
        topology = wall_topology(seg, mask=mask)
        tick = done("measure", tick)
        stage("writing")
        made = not outdir.exists()
        staging = open_staging(outdir)  # published together at the end (io/_staging.py)
        staged = {key: staging / path.name for key, path in planned.items()}
        written = _write_maps(seg, staged, options, force=force)
        regions.to_csv(staged["regions"], force=force)
        regions.to_json(staged["regions_json"], force=force)
        diagram_table(seg.diagram, seg.kept, seg.margin).to_csv(staged["diagram"],
                                                                 force=force)
        draw_diagram(staged["diagram_plot"], seg.diagram, seg.kept, threshold=seg.threshold,
                     smooth_sigma=seg.params.get("smooth_sigma"), unit=volume.unit,
                     force=force)
        Table({"level": topology.curve.levels, "euler_characteristic": topology.curve.chi},
              meta={"caution": RESEARCH_ONLY}).to_csv(staged["euler"], force=force)
        for key in ("regions", "regions_json", "diagram", "diagram_plot", "euler"):
            written[key] = staged[key]
        if options.mesh:
            written["meshes"] = _write_meshes(seg, staging, options.mesh, force=force)
        tick = done("write", tick)
        if report:
            from .report import write_report

            stage("report")
            written["report"] = write_report(
                staged["report"], image=np.asarray(volume.data),
                labels=seg.labels if seg.all_labels is None else seg.all_labels,
                spacing=volume.spacing, unit=volume.unit, regions=regions,
                diagram=seg.diagram, kept=seg.kept, threshold=seg.threshold,
                params=seg.params, figures=figures, title=safe_text(source.name),
                source=safe_text(str(source)),
                notes=[note for note in notes.values() if note],
                euler=topology.curve, wall_topology=topology.walls, force=force,
                diagram_png=staged["diagram_plot"].read_bytes())
        tick = done("report", tick)
        summary = _summary(seg, source, figures, written, notes, topology)
        relative = _relative(summary["outputs"], staging)
        record = {
            "cavitas_version": __version__,
            "input": str(source),
            "input_sha256": checksum,
            "shape": list(volume.shape),
            "spacing": list(volume.spacing),
            "unit": volume.unit,
            "read_options": dict(read_options or {}),
            "parameters": seg.params,
            "options": options.to_dict(),
            "summary": {k: v for k, v in summary.items() if k != "outputs"},
            "global_figures": figures,
            "outputs": relative,
            "timings_s": timings,
            "elapsed_s": round(time.perf_counter() - started, 3),
            "caution": RESEARCH_ONLY,
        }
        with atomic_path(staged["run"], force=force) as tmp:
            tmp.write_text(dumps(record, indent=1, ensure_ascii=False, default=str),
                           encoding="utf-8")
        publish_staged(staging, outdir)
        staging = None
        summary["outputs"] = {key: str(outdir / name) for key, name in relative.items()}
        summary["outputs"]["run"] = str(planned["run"])
        steps.update()
    except MemoryError as exc:
        raise out_of_memory(source) from exc
    finally:
        steps.close()
        reset_memory_guard(guard)
        if staging is not None:
            discard_staging(staging, outdir, made=made)
    return summary


def _relative(outputs: dict[str, str], outdir: Path) -> dict[str, str]:
    """Output paths relative to ``outdir`` (run.json stays right when the folder moves, as a
    batch's staging folder does when it is published).

    Examples
    --------
    >>> _relative({"labels": "out/labels.tif"}, Path("out"))
    {'labels': 'labels.tif'}
    """
    return {key: Path(path).relative_to(outdir).as_posix() for key, path in outputs.items()}


def _prepare_kernels(stage: Any) -> None:
    """Build (or load from numba's cache) the compiled kernels under a label that says so.

    They are compiled on their first use: the first run on a machine spends several
    seconds building them, later runs load them. Done on a small image first, the wait
    shows as what it is rather than as the first smoothing scale.
    """
    from .cubical._kernels import h0_sweep
    from .segment import segment

    if h0_sweep.signatures:  # already loaded in this process
        return
    stage("loading kernels (compiled on the first run)")
    segment(np.random.default_rng(0).random((12, 12)).astype(np.float32))


def _planned_outputs(source: Path, outdir: Path, options: RunOptions, *,
                     report: bool) -> dict[str, Path]:
    suffix = _label_suffix(source, options.label_format)
    planned = {"labels": outdir / f"labels{suffix}", "regions": outdir / "regions.csv",
               "regions_json": outdir / "regions.json", "diagram": outdir / "diagram.csv",
               "diagram_plot": outdir / "diagram.png", "euler": outdir / "euler.csv",
               "run": outdir / "run.json"}
    if report:
        planned["report"] = outdir / "report.html"
    if options.enclosures:
        planned["enclosures"] = outdir / f"enclosures{suffix}"
    if options.partition:
        planned["partition"] = outdir / f"partition{suffix}"
    if options.shells is not None:
        planned["shells"] = outdir / f"shells{suffix}"
    return planned


def _read_mask(mask_path: str | None, volume: Any, source: Path) -> np.ndarray | None:
    from . import io

    if not mask_path:
        return None
    mask = np.asarray(io.read(mask_path).data) != 0
    if mask.shape != volume.shape:
        raise InputFileError(f"Mask '{mask_path}' has shape {mask.shape}; the image "
                             f"'{source}' has shape {volume.shape}.")
    return mask


def _write_maps(seg: Any, planned: dict[str, Path], options: RunOptions, *,
                force: bool) -> dict[str, Path]:
    from . import io
    from .segment._shells import shell_labels

    volume = seg.volume
    written = {"labels": io.write(planned["labels"], seg.labels, like=volume, force=force)}
    if options.enclosures:
        written["enclosures"] = io.write(planned["enclosures"], seg.enclosure_labels(),
                                         like=volume, force=force)
    if options.partition:
        written["partition"] = io.write(planned["partition"], seg.partition, like=volume,
                                        force=force)
    if options.shells is not None:
        shells = shell_labels(seg.labels, volume.spacing, options.shells,
                              walls=seg.all_labels == 0)
        written["shells"] = io.write(planned["shells"], shells, like=volume, force=force)
    return written


def _write_meshes(seg: Any, outdir: Path, kind: str, *, force: bool) -> Path:
    from scipy import ndimage as ndi

    from .segment._mesh import region_mesh, write_mesh

    chambers = seg.regions.select(seg.regions["kind"] == "chamber")["label"]
    boxes = ndi.find_objects(seg.labels)
    for label in chambers:
        verts, faces = region_mesh(seg.labels, int(label), seg.volume.spacing,
                                   box=boxes[label - 1])
        write_mesh(outdir / "meshes" / f"region_{int(label):05d}.{kind}", verts, faces,
                   force=force, comment=f"cavitas region {label}; {RESEARCH_ONLY}")
    return outdir / "meshes"


def threshold_basis(params: dict[str, Any]) -> str | None:
    """One sentence on what set the threshold, and at which scale a hand threshold applies.

    Examples
    --------
    >>> threshold_basis({"automatic": True, "threshold_rule": "gap"})[:30]
    'The threshold lies in the gap '
    >>> threshold_basis({"automatic": False, "scale_basis": "none"})[:64]
    'The persistence threshold was given by hand and applies to the i'
    >>> threshold_basis({"automatic": False, "scale_basis": "given"}) is None
    True
    """
    if not params.get("automatic"):
        if params.get("scale_basis") != "none":
            return None
        return ("The persistence threshold was given by hand and applies to the image "
                "without smoothing, as drawn in this run's diagram.png; a threshold read off "
                "the diagram of an automatic run applies to that run's smoothing: give it "
                "with --smooth (smooth_sigma in that run's run.json).")
    return _RULE_SENTENCES.get(params.get("threshold_rule") or "noise null",
                               _RULE_SENTENCES["noise null"])


#: The sentence of each automatic threshold rule (cavitas.segment THRESHOLD_RULES).
_RULE_SENTENCES = {
    "gap": ("The threshold lies in the gap of the persistence diagram, between the crowd of "
            "small cavities (noise, texture) and the large ones."),
    "empty stretch": ("The threshold lies in an empty stretch of the persistence diagram "
                      "below the noise-only level: the cavities above it form one population "
                      "with almost nothing beneath."),
    "false discovery rate": ("The threshold keeps the expected share of noise among the "
                             "regions at 1 % (many cavities stand a little above the noise, "
                             "whose level is uniform): a few regions near it may be noise "
                             "(see their margin)."),
    "noise null": ("The persistence diagram shows no gap between noise and cavities: the "
                   "threshold is the noise-only level times the safety factor, and regions "
                   "near it are uncertain (see their margin)."),
}


def border_note(regions: Any) -> str | None:
    """One sentence on labelled regions that touch the border (None when there are none).

    Examples
    --------
    >>> from cavitas._table import Table
    >>> rows = Table({"kind": np.array(["chamber", "chamber", "cut"], object),
    ...               "touches_border": np.array([False, True, True])})
    >>> border_note(rows).split(":")[0]
    '1 labelled region touches the scan border'
    """
    if not len(regions):
        return None
    n = int(np.count_nonzero((regions["kind"] == "chamber") & regions["touches_border"]))
    if n == 0:
        return None
    return (f"{n} labelled region{'s touch' if n > 1 else ' touches'} the scan border: "
            f"{'they are' if n > 1 else 'it is'} listed (touches_border) but left out of the "
            "global figures (porosity, count, mean size).")


#: Voxels an axis needs for a region to be enclosed inside the scan: the scan's own edge,
#: a wall, the inside, a wall and the other edge (the scan's faces are open, not walls).
ENCLOSING_VOXELS = 5


def image_note(image: np.ndarray, regions: int) -> str | None:
    """One sentence on an image that holds no regions by its nature, or can only hold
    regions of one persistence (None for an ordinary image).

    Examples
    --------
    >>> image_note(np.full((8, 8), 7, np.uint8), 0)
    'The image is constant (every voxel is 7): it has no walls, so it encloses no region.'
    >>> image_note(np.zeros((1, 1)), 0).startswith("The image is too small")
    True
    >>> image_note(np.eye(9), 2).startswith("The image is binary")
    True
    """
    shape = image.shape
    if image.ndim == 3 and 1 in shape and regions == 0:
        return (f"The volume has a single slice along one axis (shape {shape}): every "
                "region touches the scan's faces there and counts as border-cut; analyse "
                "it as a 2D image, or count the faces as walls (the keep-border option).")
    if min(shape) < ENCLOSING_VOXELS and regions == 0:
        return (f"The image is too small to enclose a region: that takes at least "
                f"{ENCLOSING_VOXELS} voxels along every axis (edge, wall, inside, wall, "
                f"edge); its shape is {shape}.")
    low, high = image.min(), image.max()
    if low == high:
        return (f"The image is constant (every voxel is {low.item():g}): it has no walls, so "
                "it encloses no region.")
    if not np.any((image != low) & (image != high)):
        return (f"The image is binary (values {low.item():g} and {high.item():g}): every "
                "cavity has the same persistence, so persistence cannot tell cells from "
                "specks; a minimum volume can drop the small ones.")
    return None


def scale_note(params: dict[str, Any]) -> str | None:
    """One sentence on regions taken from another smoothing scale (None when there are none).

    Examples
    --------
    >>> scale_note({"regions_from_other_scales": {"split": 2, "pieces": 5, "added": 1},
    ...             "smooth_sigma": 1.5, "unit": "µm"})[:62]
    '2 regions that the smoothing (σ 1.5 µm) merged were separated '
    >>> scale_note({"regions_from_other_scales": {"split": 0, "pieces": 0, "added": 0}})
    """
    taken = params.get("regions_from_other_scales") or {}
    split, pieces, added = (int(taken.get(k, 0)) for k in ("split", "pieces", "added"))
    if not (split or added):
        return None
    parts = []
    if split:
        parts.append(f"{split} region{'s' if split > 1 else ''} that the smoothing "
                     f"(σ {params.get('smooth_sigma', 0):.3g} {params.get('unit', '')}) merged "
                     f"{'were' if split > 1 else 'was'} separated into {pieces} at a finer "
                     "one")
    if added:
        parts.append(f"{added} region{'s' if added > 1 else ''} that only another "
                     f"smoothing found clearly {'were' if added > 1 else 'was'} added")
    sentence = "; ".join(parts)
    return (sentence[0].upper() + sentence[1:] + " (each region's scale is its "
            "detection_scale in regions.csv).")


def run_notes(seg: Any) -> dict[str, str | None]:
    """The sentences a run adds to its summary and report (None where there is nothing)."""
    chambers = int(np.count_nonzero(seg.regions["kind"] == "chamber")) if len(seg.regions) else 0
    return {"polarity_hint": seg.params.get("polarity_hint"),
            "threshold_basis": threshold_basis(seg.params),
            "scale_note": scale_note(seg.params),
            "border_note": border_note(seg.regions),
            "image_note": image_note(np.asarray(seg.volume.data), chambers)}


def _summary(seg: Any, source: Path, figures: dict[str, Any],
             written: dict[str, Path], notes: dict[str, str | None],
             topology: WallTopology) -> dict[str, Any]:
    kinds = seg.regions["kind"] if len(seg.regions) else np.array([], object)
    n_regions = int((kinds == "chamber").sum())
    return {
        "input": str(source),
        "shape": list(seg.volume.shape),
        "regions": n_regions,
        "border_cut": int((kinds == "cut").sum()),
        "enclosures": int((kinds == "enclosure").sum()),
        "threshold": seg.threshold,
        "noise": seg.noise,
        "noise_pixel": seg.params.get("noise_pixel_sigma", seg.noise),
        "noise_correlation": seg.params.get("noise_correlation", 0.0),
        "smooth_sigma": seg.params["smooth_sigma"],
        "porosity": figures.get("volume_fraction"),
        "mean_volume": figures.get("mean_volume"),
        "walls_euler": topology.walls.chi,
        "walls_loops": topology.walls.betti1,
        "connectivity_density": topology.walls.density,
        "unit": seg.volume.unit,
        "outputs": {k: str(v) for k, v in written.items()},
        **notes,
        "message": ("no region passed the selection; empty outputs were written"
                    if n_regions == 0 else f"{n_regions} regions found"),
        "caution": RESEARCH_ONLY,
    }

