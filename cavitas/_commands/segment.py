"""``cavitas segment``: find the enclosed regions of one image and write labels and tables."""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

from .._caution import RESEARCH_ONLY
from .._checks import REGIONS, WALLS
from ._cluster import add_cluster_options, chunked_route
from ._reading import add_reading_options

__all__ = ["add_memory_option", "add_segment_options", "register", "run",
           "settings_from_args"]

DESCRIPTION = f"""\
Find the enclosed regions (cells, pores, vesicles, capsules, bubbles) of a 2D image or 3D
volume and write them to OUTDIR:

  labels.<ext>   one label per chamber (0 = walls, outside, border-cut regions), with the
                 input's format and geometry (--label-format to change the format)
  regions.csv    chambers, enclosures (groups of chambers inside a common wall) and
                 border-cut regions: parent, depth, persistence, margin, level, volumes
  diagram.csv    every cavity of the persistence diagram, with kept and margin columns
  diagram.png    the diagram drawn, kept cavities filled, the threshold band shaded
  run.json       every parameter and value chosen, the version, the input's SHA-256

By default the significance threshold is automatic: a cavity is kept when its
persistence (how much brighter its weakest wall point is than its darkest inside voxel)
stands clear of what noise alone produces (the noise level is estimated from the image),
its inside is dark and its wall bright compared with the image's two intensity classes
(so texture, an empty surround or the matrix between grains do not count), and, when
the diagram shows a gap between the crowd of small cavities and the large ones, it lies
above the gap. The smoothing is chosen from the data too.

{RESEARCH_ONLY}
"""

EPILOG = """\
examples:
  cavitas segment foam.tif -o foam-out
      bright walls, everything automatic
  cavitas segment cells.ome.tif -o out --walls dark --min-volume 20 --shells 0.5
      dark membranes; drop regions under 20 µm² (or µm³); shells 0.5 µm thick
  cavitas segment capsules.nii.gz -o out --top 10 --enclosures --mesh ply
      the ten most persistent chambers, the enclosures map, one PLY surface per chamber
  cavitas segment scan.tif -o out --min-persistence 40 --region breach --level-fraction 0.8
      a fixed threshold in intensity units; strict regions cut at 80 % of their level
  cavitas segment cells.png -o out --spacing 0.2,0.2 --unit um --min-volume 5
      a file without calibration: give the pixel size to select by area in µm²
  cavitas segment block.raw -o out --shape 64,256,256 --dtype uint16 --spacing 2,1,1
      a raw volume: its layout (and --byte-order, --offset if needed) and voxel size
  cavitas segment scan.tif -o out --params settings.toml --force
      parameters from a TOML file (options on the command line win), replacing output
  cavitas segment big.zarr -o out --dask-local 4 --region component --min-persistence 40
      a volume larger than memory: 4 local Dask workers segment it chunk by chunk (the
      chunks of the Zarr store, OME-Zarr image or HDF5 file) and labels.zarr is written
      chunk by chunk, then the tables, diagram files, report and run.json: the same
      labels, rows and diagram as without --dask-local with --no-thickness. Only this
      mode is computed this way so far: --region component, a threshold given by hand
      (--min-persistence or --relative-persistence) with --smooth given or none
  cavitas segment big.zarr -o out --dask-local 4 --region component
      the same with the automatic threshold (at the scale --smooth gives, or the one the
      run without --dask-local chooses): the scale, threshold, its rule, the polarity
      check and the regions of the run without --dask-local. What needs the whole
      volume (the automatic threshold with --mask, basin and breach regions,
      --keep-border, shells, partition, meshes) is refused in one sentence, and the wall
      thickness is not made. With smoothing, the output folder also holds the smoothed
      image while the run lasts (4 bytes per voxel for data of up to 16 bits and
      float32, 8 otherwise, before compression)

parameter file (--params): the options' names with underscores, at the top level or in
tables; types are strict (true/false, quoted texts, numbers, [lists] of numbers):
  walls = "dark"            # or in a [segment] table, with every other name
  min_volume = 20
  [reading]                 # reading options and the mask (relative to this file)
  spacing = [2.0, 0.5, 0.5]
  mask = "roi.tif"
  [outputs]                 # shells, enclosures, partition, mesh, label_format
  shells = 0.5
  partition = true
"""


def register(subparsers: Any, *, parents: list[argparse.ArgumentParser],
             formatter_class: type[argparse.HelpFormatter]) -> argparse.ArgumentParser:
    """Add the ``segment`` subcommand to ``subparsers``."""
    p = subparsers.add_parser(
        "segment", parents=parents, formatter_class=formatter_class,
        help="segment the enclosed regions of one image: labels, tables, shells",
        description=DESCRIPTION, epilog=EPILOG,
    )
    p.add_argument("file", metavar="FILE", help="the 2D image or 3D volume to segment")
    p.add_argument("-o", "--out", metavar="OUTDIR", required=True, type=Path,
                   help="folder for the outputs (created if needed)")
    add_segment_options(p)
    p.add_argument("--no-report", action="store_true",
                   help="do not write report.html (tables, maps and run.json are written)")
    p.add_argument("--no-thickness", action="store_true",
                   help="skip the wall-thickness measurement (slow on thick walls)")
    p.add_argument("--force", action="store_true", help="replace outputs that already exist")
    add_memory_option(p)
    add_cluster_options(p, what="the segmentation (so far only --region component with a "
                             "threshold given by hand or --smooth given: see the "
                             "examples)")
    p.set_defaults(func=run)
    return p


def add_memory_option(p: argparse.ArgumentParser | Any) -> None:
    """Add ``--skip-memory-check`` (shared by ``segment`` and ``batch``)."""
    p.add_argument("--skip-memory-check", action="store_true",
                   help="run even when the memory estimate (see cavitas info) exceeds the "
                        "memory available; by default such an input is refused up front "
                        "in one sentence (exit 3; in a batch that input fails and the others "
                        "go on) instead of failing or being killed half-way")


def add_segment_options(p: argparse.ArgumentParser) -> None:
    """Add the segmentation and reading options (shared by ``segment`` and ``batch``)."""
    p.add_argument("--params", metavar="FILE.toml",
                   help="read parameters, reading options and outputs from a TOML file "
                        "(see below; options given here win)")
    g = p.add_argument_group("what a wall is")
    g.add_argument("--walls", choices=WALLS,
                   help="polarity of the walls around the regions (default: bright)")
    g.add_argument("--connectivity", type=int, metavar="N",
                   help="connectivity of the wall set: 1 = faces only (default), 2 in 2D / 3 "
                        "in 3D = full; regions use the complementary rule")
    g.add_argument("--mask", metavar="MASKFILE",
                   help="region of interest, same shape as the image: nonzero voxels are "
                        "analysed, the rest counts as outside the scan")
    g = p.add_argument_group("which regions to keep (criteria combine)")
    g.add_argument("--auto", dest="auto", action="store_true", default=None,
                   help="automatic significance (the default unless a persistence threshold "
                        "is given; with one, the stricter of both applies)")
    g.add_argument("--no-auto", dest="auto", action="store_false",
                   help="no automatic significance: keep every cavity passing the others")
    g.add_argument("--min-persistence", type=float, metavar="P",
                   help="minimum persistence in the image's intensity units")
    g.add_argument("--relative-persistence", type=float, metavar="F",
                   help="minimum persistence as a fraction (0-1] of the image's robust range "
                        "(0.5th to 99.5th percentile)")
    g.add_argument("--top", type=int, metavar="K", help="keep at most the K most persistent")
    g.add_argument("--min-volume", type=float, metavar="V",
                   help="smallest region volume (area in 2D) in physical units; needs spacing")
    g.add_argument("--max-volume", type=float, metavar="V",
                   help="largest region volume (area in 2D) in physical units")
    g.add_argument("--smooth", type=float, metavar="SIGMA",
                   help="Gaussian smoothing σ in physical units before detection (0 = none; "
                        "default: chosen from the data in automatic mode)")
    g.add_argument("--safety", type=float, metavar="S",
                   help="factor on the noise-only persistence in automatic mode, used when the "
                        "diagram shows no gap between noise and cavities (default 1.25)")
    g = p.add_argument_group("what a region is")
    g.add_argument("--split-fraction", type=float, metavar="F",
                   help="an inner wall splits a region into two only if it closes at least "
                        "F (0-1) of the way from the shallower side's core level up to the "
                        "level where the surrounding wall opens; lower (a wall with a wide "
                        "hole, e.g. a broken foam wall) keeps both sides as one region, "
                        "and so does a hole the smoothing closed if the two sides touch "
                        "through it at the fine scale (default 0.15; 0 = every significant "
                        "inner wall splits)")
    g.add_argument("--region", choices=REGIONS,
                   help="basin (default): flooding partition minus each basin's wall, what "
                        "you measure; breach: the strict component below the chamber's "
                        "level; component: that component exactly, without the border-cut "
                        "check and without filling wall specks inside it (the mode "
                        "--scheduler / --dask-local compute)")
    g.add_argument("--level-fraction", type=float, metavar="F",
                   help="breach regions: cut at this fraction [0-1] of the way from the core "
                        "level to the chamber's level")
    g.add_argument("--keep-border", action="store_true", default=None,
                   help="label the cells cut by the scan border too: the faces count as a "
                        "wall, so cut cells are delineated like whole ones; they are flagged "
                        "(touches_border in regions.csv) and left out of the porosity, count "
                        "and mean size")
    g = p.add_argument_group("extra outputs")
    g.add_argument("--shells", nargs="?", type=float, const=0.0, metavar="THICKNESS",
                   help="write shells.<ext>: the wall voxels around each region, thickened "
                        "by THICKNESS in physical units (default 0: touching voxels only)")
    g.add_argument("--enclosures", action="store_true", default=None,
                   help="write enclosures.<ext>: groups of chambers inside a common wall")
    g.add_argument("--partition", action="store_true", default=None,
                   help="write partition.<ext>: every voxel of the specimen given to a region, "
                        "the walls split along their ridge line (cells that tile the tissue), "
                        "and each region's volume with its part of the walls in regions.csv")
    g.add_argument("--mesh", choices=("ply", "stl"),
                   help="write a surface mesh per chamber into meshes/ (3D only)")
    g.add_argument("--label-format", metavar="EXT",
                   help="file format of the label maps, e.g. .tif, .ome.tif, .nii.gz, .h5 "
                        "(default: the input's; PNG and raw input give .tif)")
    add_reading_options(p)


def settings_from_args(args: argparse.Namespace) -> Any:
    """The :class:`~cavitas.workflow.Settings` of ``args``: the ``--params`` file, then
    every option given on the command line on top (its destination is the setting's name)."""
    from ..workflow import Settings

    base = Settings.from_toml(args.params) if args.params else Settings()
    given = {name: getattr(args, name) for name in sorted(Settings.names())
             if getattr(args, name, None) is not None}
    return base.replace(**given)


def run(args: argparse.Namespace) -> int:
    """Run ``cavitas segment`` and print a short summary."""
    from ..workflow import segment_file

    settings = settings_from_args(args)
    if chunked_route(args):
        from ._segment_chunked import run_chunked

        return run_chunked(args, settings)
    params = settings.params
    summary = segment_file(args.file, args.out, params, options=settings.options,
                           force=args.force, progress=args.progress,
                           read_options=settings.reading, report=not args.no_report,
                           thickness=not args.no_thickness,
                           skip_memory_check=args.skip_memory_check)
    if not args.quiet:
        unit = summary["unit"]
        enclosures = summary["enclosures"]
        extra = f", {enclosures} enclosures" if enclosures else ""
        print(f"{args.file}: {summary['message']}{extra}.")
        if summary["border_cut"] or not params.keep_border:
            print(f"  border-cut regions (listed in regions.csv, "
                  f"{'kept' if params.keep_border else 'not'} in labels): "
                  f"{summary['border_cut']}")
        from .._shared.units import length_unit
        from ..segment._noise import NEGLIGIBLE_CORRELATION

        element = "pixel" if len(summary["shape"]) == 2 else "voxel"
        correlated = (f", correlated over {summary['noise_correlation']:.2g} {element}s (as "
                      f"white noise of σ {summary['noise']:.4g} blurred that much)"
                      if summary["noise_correlation"] >= NEGLIGIBLE_CORRELATION else "")
        print(f"  noise σ {summary['noise_pixel']:.4g} per {element}{correlated}, persistence "
              f"threshold "
              f"{summary['threshold']:.4g} (intensity units), smoothing σ "
              f"{summary['smooth_sigma']:.3g} {length_unit(unit, len(summary['shape']))}")
        for note in (summary["polarity_hint"], summary["threshold_basis"],
                     summary["scale_note"], summary["border_note"], summary["image_note"]):
            if note:
                print(f"  {note}")
        if summary["porosity"] is not None and summary["regions"]:
            from .._shared.units import size_unit
            from ..report._words import Words

            words = Words(len(summary["shape"]))
            size = size_unit(unit, words.ndim)
            porosity = " (closed porosity)" if words.ndim == 3 else ""
            print(f"  {words.fraction} of the regions{porosity} {summary['porosity']:.4f}; "
                  f"mean region {words.size} {summary['mean_volume']:.4g} {size}")
        print(f"  outputs in {args.out}: " + ", ".join(
            Path(p).name for p in summary["outputs"].values()))
        print(RESEARCH_ONLY)
    return 0
