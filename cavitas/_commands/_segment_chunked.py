"""``cavitas segment FILE --scheduler ADDRESS`` (or ``--dask-local``): a Zarr store, an
OME-Zarr image or an HDF5 file segmented chunk by chunk on Dask workers
(:func:`run_chunked`).

Only the mode :func:`cavitas.segment._chunked_segment.segment_in_chunks` computes is
taken: ``--region component`` with a hand threshold, or with the automatic one at the scale
``--smooth`` gives or chosen as in memory (no ``--mask``), with the polarity check.
Everything else is refused in one
sentence before any work starts (exit code 2), so nothing is written. The outputs go to a
staging folder published at the end (:mod:`cavitas.io._staging`): labels.zarr (and
enclosures.zarr) written chunk by chunk, regions.csv and regions.json (measured chunk by
chunk from labels.zarr and the image), diagram.csv and diagram.png (from the merged tree),
euler.csv (chunk by chunk), report.html (the label map and image read a slice or a slab
at a time), run.json last. The smoothed image is written there once too
(:data:`SMOOTHED_STORE`, in the work type: 4 bytes per voxel for data of up to 16 bits and
float32, 8 otherwise, before compression) and removed before the outputs are published.
"""

from __future__ import annotations

import argparse
import shutil
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from .._caution import RESEARCH_ONLY
from .._errors import InputFileError, OutputError, ParameterError
from .._table import Table
from ._cluster import dask_client

__all__ = ["NOT_MADE", "run_chunked"]

#: What the chunked route does not write (the run summary says so).
NOT_MADE = ("the wall-thickness columns of regions.csv (the local thickness of a wall voxel "
            "depends on the largest ball inside the walls, which no fixed chunk overlap "
            "bounds; the in-memory route leaves them out with --no-thickness)")
#: ... and, with the automatic threshold, does not check.
#: The smoothed image, stored once in the staging folder (which the workers write to
#: anyway) for every pass after the first to read; removed before the outputs are published,
#: and with the staging folder if the run fails.
SMOOTHED_STORE = "smoothed.zarr"
#: Command-line options this route refuses, with what each needs.
_WHOLE_VOLUME = {
    "level_fraction": ("--level-fraction", "breach regions"),
    "keep_border": ("--keep-border", "the border-cut check"),
    "shells": ("--shells", "the whole label map"),
    "partition": ("--partition", "the whole label map"),
    "mesh": ("--mesh", "the whole label map"),
    "label_format": ("--label-format", "the whole label map (labels.zarr is written)"),
}

#: Reading options for files without a header (raw, NumPy): not for this route's inputs.
_RAW_LAYOUT = ("key", "shape", "dtype", "byte_order", "offset")


def _refuse(args: argparse.Namespace, settings: Any) -> None:
    """Refuse, in one sentence each, what the chunked route does not compute."""
    name = args.file
    params, options = settings.params, settings.options
    if params.automatic and settings.options.mask:
        raise ParameterError(
            f"The automatic threshold chunk by chunk does not take a region of interest "
            f"yet (its two-class split subsamples the whole image): leave out --mask or "
            f"give --min-persistence to segment '{name}' with --scheduler or --dask-local.",
            parameters=("mask",))
    if params.region != "component":
        raise ParameterError(
            f"--region {params.region} needs the whole volume (basin flooding, the border-cut "
            f"check, islands filled): give --region component to segment '{name}' with "
            f"--scheduler or --dask-local.", parameters=("region",))
    given = {**params.to_dict(), **options.to_dict()}
    for key, (option, needs) in _WHOLE_VOLUME.items():
        value = given.get(key)
        if value is not None and value is not False:  # --shells alone gives 0.0
            raise ParameterError(f"{option} needs {needs}, not computed chunk by chunk yet: "
                                 f"leave it out to segment '{name}' with --scheduler or "
                                 f"--dask-local.", parameters=(key,))
    reading = settings.reading.kwargs()
    unused = [key for key in _RAW_LAYOUT if key in reading]
    if unused:
        raise ParameterError(f"--{unused[0].replace('_', '-')} does not apply with --scheduler "
                             f"or --dask-local, which read a Zarr store or an HDF5 file as "
                             f"stored ('{name}').", parameters=(unused[0],))


def _targets(args: argparse.Namespace, settings: Any) -> dict[str, Path]:
    """The output paths, checked before any work (an existing one needs --force)."""
    from .._shared.atomic import check_writable

    names = {"labels": "labels.zarr", "regions": "regions.csv", "regions_json": "regions.json",
             "diagram": "diagram.csv", "diagram_plot": "diagram.png", "euler": "euler.csv",
             "run": "run.json"}
    if settings.options.enclosures:
        names["enclosures"] = "enclosures.zarr"
    if not args.no_report:
        names["report"] = "report.html"
    targets = {key: args.out / name for key, name in names.items()}
    inputs = tuple(p for p in (args.file, settings.options.mask) if p)
    for path in targets.values():
        if not path.name.endswith(".zarr"):
            check_writable(path, force=args.force, inputs=inputs)
        elif any(Path(p).resolve() == path.resolve() for p in inputs):
            raise OutputError(f"Refusing to overwrite the input '{path}'.")
        elif path.exists() and not args.force:
            raise OutputError(f"Output '{path}' already exists; use --force to replace it.",
                              parameters=("force",))
    return targets


def _write_labels(labels: Any, path: Path, volume: Any) -> None:
    """A label map (Dask array) into a Zarr array at ``path`` chunk by chunk, with the
    input's voxel size, unit and the research-only caution as attributes."""
    import zarr

    from ..io._staging import write_failure

    try:
        labels.to_zarr(str(path))
    except OSError as exc:  # raised on a worker
        failure = write_failure(exc, path, "the label map")
        if failure is None:
            raise
        raise failure from exc
    zarr.open_array(str(path), mode="r+").attrs.update(
        {"spacing": list(volume.spacing), "unit": volume.unit, "source": volume.name,
         "caution": RESEARCH_ONLY})


@dataclass(frozen=True)
class Tables:
    """What the tables hand on to the report."""

    regions: Table           # with the measurements and the global figures in its meta
    figures: dict[str, Any]  # the global figures
    cavities: Any            # segment._result.CavityDiagram
    euler: Any               # cubical.EulerCurve, the levels where χ changes
    walls: Any               # cubical.ConnectivityDensity of the segmented walls


def _write_tables(seg: Any, staging: Path, targets: dict[str, Path], *, image: Any,
                  mask: Any, volume: Any, walls: str) -> Tables:
    """regions.csv and regions.json (the regions with their measurements, which read the
    label map just written and the image chunk by chunk), diagram.csv and diagram.png (from
    the merged tree) and euler.csv (the image's Euler characteristic curve chunk by chunk),
    as the in-memory route writes them; the segmented walls' topology."""
    import dask.array as da

    from ..cubical._chunked_euler import euler_curve_in_chunks
    from ..measure._chunked import measure_in_chunks
    from ..measure._global import figures_from_counts
    from ..segment._chunked_topology import walls_in_chunks
    from ..segment._result import cavity_diagram
    from ..workflow import (
        diagram_table,
        draw_diagram,
        measured_columns,
        whole_chamber_rows,
        with_measurements,
    )

    regions = seg.table
    labels = da.from_zarr(str(staging / targets["labels"].name))
    measured = measure_in_chunks(labels, spacing=volume.spacing, unit=volume.unit,
                                 image=image, roi=mask)
    whole = whole_chamber_rows(regions, measured.table)
    figures = figures_from_counts(measured.table.select(whole),
                                  measured.roi_counts(whole, mask), spacing=volume.spacing,
                                  unit=volume.unit)
    table = with_measurements(regions, measured_columns(regions, measured.table),
                              measured.table.units, figures, noise=seg.noise.amplitude,
                              threshold=seg.threshold)
    table.to_csv(staging / targets["regions"].name)
    table.to_json(staging / targets["regions_json"].name)
    cavities = cavity_diagram(seg.tree, seg.chamber_nodes, shape=volume.shape, walls=walls,
                              connectivity=seg.connectivity,
                              masked=measured.roi_voxels < int(np.prod(volume.shape)),
                              threshold=seg.threshold)
    diagram_table(cavities.diagram, cavities.kept, cavities.margin).to_csv(
        staging / targets["diagram"].name)
    draw_diagram(staging / targets["diagram_plot"].name, cavities.diagram, cavities.kept,
                 threshold=seg.threshold, smooth_sigma=seg.smooth_sigma, unit=volume.unit,
                 force=False)
    curve = euler_curve_in_chunks(image, walls=walls, connectivity=seg.connectivity,
                                  mask=mask)
    Table({"level": curve.levels, "euler_characteristic": curve.chi},
          meta={"caution": RESEARCH_ONLY}).to_csv(staging / targets["euler"].name)
    walls_topology = walls_in_chunks(labels, connectivity=seg.connectivity,
                                     spacing=volume.spacing, unit=volume.unit, mask=mask)
    return Tables(table, figures, cavities, curve, walls_topology)


def _write_report(path: Path, tables: Tables, *, labels: Any, image: Any, volume: Any,
                  parameters: dict[str, Any], source: str, diagram_png: bytes) -> None:
    """report.html from the tables, the merged tree's diagram, the Euler characteristic
    curve, the walls' topology and the label map and image read a slice or a slab at a time
    (the slice browser's slabs reduced on the workers): the in-memory route's page."""
    from .._errors import safe_text
    from ..report import write_report
    from ..workflow import border_note, threshold_basis

    notes = [note for note in (parameters.get("polarity_hint"), threshold_basis(parameters),
                               border_note(tables.regions)) if note]
    write_report(path, image=image, labels=labels, spacing=volume.spacing, unit=volume.unit,
                 regions=tables.regions, diagram=tables.cavities.diagram,
                 kept=tables.cavities.kept, threshold=parameters["threshold"],
                 params=parameters, figures=tables.figures, title=safe_text(Path(source).name),
                 source=safe_text(source), notes=notes, euler=tables.euler,
                 wall_topology=tables.walls,
                 diagram_png=diagram_png)


def _noise_record(noise: Any) -> dict[str, float]:
    """The noise figures as ``segment()`` records them (``_segment.segment``'s chosen
    values)."""
    return {"noise_sigma": noise.amplitude, "noise_pixel_sigma": noise.pixel,
            "noise_level_ratio": noise.ratio, "noise_correlation": noise.correlation}


def run_chunked(args: argparse.Namespace, settings: Any) -> int:
    """Segment ``args.file`` chunk by chunk on Dask workers and write its outputs."""
    from .. import __version__
    from .._json import dumps
    from .._shared.atomic import atomic_path
    from ..io._checksum import input_checksum
    from ..io._lazy import open_chunked
    from ..io._staging import discard_staging, open_staging, publish_staged
    from ..segment._chunked_segment import segment_in_chunks

    started = time.perf_counter()
    _refuse(args, settings)
    options = settings.options
    reading = settings.reading.kwargs()
    targets = _targets(args, settings)
    with_geometry = {key: reading[key] for key in ("spacing", "unit") if key in reading}
    image = open_chunked(args.file, **{key: value for key, value in reading.items()
                                       if key not in with_geometry})
    volume = image.volume(**with_geometry)  # the voxels stay on disk
    params = settings.params
    params.check_image(volume)
    mask = None
    if options.mask:
        mask = open_chunked(options.mask, role="Mask").data != 0
        if tuple(mask.shape) != volume.shape:
            raise InputFileError(f"Mask '{options.mask}' has shape {tuple(mask.shape)}; the "
                                 f"image '{args.file}' has shape {volume.shape}.")
    spacing, unit = np.asarray(volume.spacing, float), volume.unit
    outdir = args.out
    made = not outdir.exists()
    staging = None
    try:
        with dask_client(args, image.name) as client:
            workers = len(client.scheduler_info().get("workers", {}))
            staging = open_staging(outdir)
            smoothed = staging / SMOOTHED_STORE
            seg = segment_in_chunks(image.data, params=params, spacing=spacing, unit=unit,
                                    mask=mask, name=volume.name, smoothed_store=smoothed)
            maps = {"labels": seg.labels}
            if "enclosures" in targets:
                maps["enclosures"] = (seg.enclosure_labels if seg.enclosure_labels is not None
                                      else seg.labels * 0)
            for key, labels in maps.items():
                _write_labels(labels, staging / targets[key].name, volume)
            if smoothed.exists():  # read by the label maps just written; not an output
                shutil.rmtree(smoothed)
            tables = _write_tables(seg, staging, targets, image=image.data, mask=mask,
                                   volume=volume, walls=params.walls)
            parameters = {**params.to_dict(), "threshold": seg.threshold,
                          "robust_range": seg.robust_range, **_noise_record(seg.noise),
                          "smooth_sigma": seg.smooth_sigma, "automatic": params.automatic,
                          "scale_basis": ("given" if params.smooth is not None else
                                          "data" if params.automatic else "none"),
                          "scales_tried": seg.choice.scales_tried, "gap": seg.choice.gap,
                          "threshold_rule": seg.choice.rule,
                          "polarity_hint": seg.choice.polarity_hint,
                          "splits_joined": seg.choice.splits_joined,
                          "texture_pieces_joined": seg.choice.texture_joined,
                          "cell_sized_splits": seg.choice.cell_sized,
                          "connectivity": seg.connectivity, "unit": unit}
            if "report" in targets:
                import dask.array as da

                _write_report(staging / targets["report"].name, tables,
                              labels=da.from_zarr(str(staging / targets["labels"].name)),
                              image=image.data, volume=volume,
                              parameters={**parameters, "caution": RESEARCH_ONLY},
                              source=str(args.file), diagram_png=(
                                  staging / targets["diagram_plot"].name).read_bytes())
        counts = {kind: int(np.count_nonzero(seg.table["kind"] == kind))
                  for kind in ("chamber", "enclosure")}
        record = {
            "cavitas_version": __version__,
            "input": str(args.file),
            "input_sha256": input_checksum(args.file),
            "shape": list(image.data.shape),
            "chunks": list(image.chunk_shape),
            "spacing": spacing.tolist(),
            "unit": unit,
            "route": f"chunk by chunk on {workers} Dask worker(s)",
            "not_made": NOT_MADE,
            "read_options": reading,
            "parameters": parameters,
            "options": options.to_dict(),
            "summary": {"regions": counts["chamber"], "enclosures": counts["enclosure"],
                        "cavities": int(np.count_nonzero(seg.tree.persistence[1:] > 0)),
                        "walls_euler": tables.walls.chi, "walls_loops": tables.walls.betti1,
                        "connectivity_density": tables.walls.density},
            "global_figures": tables.figures,
            "outputs": {key: path.name for key, path in targets.items()},
            "elapsed_s": round(time.perf_counter() - started, 3),
            "caution": RESEARCH_ONLY,
        }
        with atomic_path(staging / targets["run"].name) as tmp:
            tmp.write_text(dumps(record, indent=1, ensure_ascii=False, default=str),
                           encoding="utf-8")
        publish_staged(staging, outdir)
        staging = None
    finally:
        if staging is not None:
            discard_staging(staging, outdir, made=made)
    if not args.quiet:
        shape = " x ".join(map(str, image.chunk_shape))
        rule = f", set by the {seg.choice.rule}" if seg.choice.rule else ""
        print(f"{args.file}: {counts['chamber']} regions (component mode), "
              f"{counts['enclosure']} enclosures; persistence threshold "
              f"{seg.threshold:.4g} (intensity units{rule}), smoothing σ "
              f"{seg.smooth_sigma:.3g}")
        if seg.choice.polarity_hint:
            print(f"  {seg.choice.polarity_hint}")
        print(f"  computed chunk by chunk on {workers} Dask worker(s), chunks of {shape} "
              f"voxels; not made on this route: {NOT_MADE}")
        print(f"  outputs in {args.out}: " + ", ".join(p.name for p in targets.values()))
        print(RESEARCH_ONLY)
    return 0
