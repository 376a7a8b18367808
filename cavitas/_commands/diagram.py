"""``cavitas diagram``: compute a persistence diagram and write it with its figures."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any

from .._caution import RESEARCH_ONLY
from .._checks import WALLS
from .._errors import InputFileError, ParameterError
from ._cluster import add_cluster_options, chunked_route, dask_client
from ._reading import add_reading_options, reading_from_args

__all__ = ["register", "run"]

#: Files written into the output folder.
OUTPUTS = ("diagram.npz", "diagram.csv", "diagram.png", "barcode.png")
#: Written as well with ``--euler``.
EULER_OUTPUTS = ("euler.csv", "euler.png")

DESCRIPTION = f"""\
Compute the persistence diagram of an image or volume: wall components (H0), cavities
(H1 in 2D, H2 in 3D) and, for a volume, loops of the walls (H1: tunnels and handles),
with the level at which each is born and dies, and write it to OUTDIR as diagram.npz
(exact, for Python), diagram.csv (one row per pair, voxel coordinates in z, y, x order),
diagram.png (birth against death) and barcode.png (the most persistent cavities).
Levels are in the input's intensity units.

{RESEARCH_ONLY}
"""

EPILOG = """\
examples:
  cavitas diagram foam.tif -o foam-diagram
      bright walls around dark pores (the default)
  cavitas diagram bubbles.nii.gz -o out --walls dark --connectivity 3
      dark walls, fully connected (voxels touching at corners join); cavities by faces only
  cavitas diagram cells.ome.tif -o out --channel 1 --time 0 --mask roi.tif --force
      one channel and time point, inside a region of interest, replacing earlier output
  cavitas diagram block.raw -o out --shape 64,256,256 --dtype uint16 --byte-order big
      a raw volume without a header: its layout
  cavitas diagram foam.tif -o out --euler
      also the Euler characteristic of the walls at every level (euler.csv, euler.png)
  cavitas diagram big.zarr -o out --dask-local 4
      a volume larger than memory: 4 local Dask workers compute it chunk by chunk (the
      chunks of the Zarr store); the diagram is the same, except that a volume's loops
      (H1) are not computed this way
  cavitas diagram big.h5 -o out --dataset /scan --scheduler tcp://10.0.0.5:8786
      the same on the workers of a running Dask scheduler (they read big.h5 themselves)
"""


def register(subparsers: Any, *, parents: list[argparse.ArgumentParser],
             formatter_class: type[argparse.HelpFormatter]) -> argparse.ArgumentParser:
    """Add the ``diagram`` subcommand to ``subparsers``."""
    parser = subparsers.add_parser(
        "diagram", parents=parents, formatter_class=formatter_class,
        help="compute and plot the persistence diagram of one image",
        description=DESCRIPTION, epilog=EPILOG,
    )
    parser.add_argument("file", metavar="FILE",
                        help="the 2D image or 3D volume to analyse")
    parser.add_argument("-o", "--out", metavar="OUTDIR", required=True, type=Path,
                        help="folder for the diagram files and figures (created if needed)")
    parser.add_argument("--walls", choices=WALLS, default="bright",
                        help="polarity of the walls that enclose the cavities: bright "
                             "(superlevel filtration) or dark (sublevel filtration)")
    parser.add_argument("--connectivity", type=int, default=1, metavar="N",
                        help="connectivity of the wall set: 1 = faces only, 2 (2D) or 3 (3D) "
                             "= full; cavities use the complementary rule")
    parser.add_argument("--mask", metavar="MASKFILE",
                        help="region of interest, same shape as the image: nonzero voxels "
                             "are analysed, the rest counts as outside")
    parser.add_argument("--one-thread", action="store_true",
                        help="run the steps one after the other instead of two at a time: "
                             "slower; a 2D image then needs about 6 instead of 10 bytes per "
                             "pixel beyond it (a volume's whole diagram about 17 bytes per "
                             "voxel either way)")
    parser.add_argument("--bars", type=int, default=50, metavar="K",
                        help="number of cavity bars drawn in barcode.png, longest first")
    parser.add_argument("--euler", action="store_true",
                        help="also write euler.csv and euler.png: the Euler characteristic "
                             "of the walls (components - loops + enclosed cavities) at every "
                             "level, one row per level where it changes")
    parser.add_argument("--force", action="store_true",
                        help="replace output files that already exist")
    add_reading_options(parser)
    add_cluster_options(parser, what="the diagram")
    parser.set_defaults(func=run)
    return parser


def _read_mask(path: str, shape: tuple[int, ...], read: Any) -> Any:
    import numpy as np

    mask = np.asarray(read(path).data) != 0
    if mask.shape != shape:
        raise InputFileError(
            f"Mask '{path}' has shape {mask.shape}; the image has shape {shape}."
        )
    return mask


def _write_euler(image: Any, args: argparse.Namespace, mask: Any, targets: list[Path]) -> None:
    """Write the Euler characteristic curve of the walls as a table and a figure."""
    from .._table import Table
    from ..cubical import euler_curve
    from ..report.diagram_plots import save_figure
    from ..report.euler_plot import plot_euler_curve

    curve = euler_curve(image, walls=args.walls, connectivity=args.connectivity,
                        mask=mask).changes()
    Table({"level": curve.levels, "euler_characteristic": curve.chi}).to_csv(
        targets[0], force=args.force)
    save_figure(plot_euler_curve(curve), targets[1], force=args.force)


def run(args: argparse.Namespace) -> int:
    """Read ``args.file``, compute its diagram, write the outputs, print the summary."""
    from tqdm import tqdm

    from .._shared.atomic import check_writable
    from ..cubical import format_summary, persistence, save_diagram
    from ..io import read
    from ..report.diagram_plots import plot_barcode, plot_diagram, save_figure

    if args.bars < 1:
        raise ParameterError(f"--bars must be a positive number of bars; got {args.bars}.")
    inputs = tuple(p for p in (args.file, args.mask) if p)
    names = OUTPUTS + (EULER_OUTPUTS if args.euler else ())
    targets = [check_writable(args.out / name, force=args.force, inputs=inputs)
               for name in names]
    options = reading_from_args(args).kwargs()
    if chunked_route(args):
        return _run_chunked(args, options, targets, names)
    with tqdm(total=6 if args.euler else 5, desc="diagram", unit="step", file=sys.stderr,
              disable=not args.progress, delay=1.0, leave=False) as bar:
        bar.set_postfix_str(f"reading {Path(args.file).name}")
        vol = read(args.file, **options)
        mask = _read_mask(args.mask, vol.shape, read) if args.mask else None
        bar.update()
        bar.set_postfix_str(f"persistence of {' x '.join(map(str, vol.shape))} voxels")
        dgm = persistence(vol, walls=args.walls, connectivity=args.connectivity,
                          mask=mask, dims=range(vol.ndim),
                          parallel=False if args.one_thread else None)
        bar.update()
        bar.set_postfix_str("writing")
        save_diagram(dgm, targets[0], force=args.force)
        save_diagram(dgm, targets[1], force=args.force)
        bar.update()
        bar.set_postfix_str("drawing")
        save_figure(plot_diagram(dgm), targets[2], force=args.force)
        bar.update()
        save_figure(plot_barcode(dgm, dim=dgm.cavity_dim, top=args.bars), targets[3],
                    force=args.force)
        bar.update()
        if args.euler:
            bar.set_postfix_str("Euler characteristic")
            _write_euler(vol.data, args, mask, targets[4:])
            bar.update()
    if not args.quiet:
        print(f"{vol.name}: {format_summary(dgm)}")
        print(f"wrote {', '.join(names)} to {args.out}")
        print(RESEARCH_ONLY)
    return 0


#: Reading options that only raw, NumPy or calibration-less files need (the chunked route
#: reads Zarr and HDF5 only, and the diagram's levels and voxels need no spacing).
_NOT_CHUNKED_OPTIONS = ("key", "shape", "dtype", "byte_order", "offset", "spacing", "unit")


def _run_chunked(args: argparse.Namespace, options: dict[str, Any], targets: list[Path],
                 names: tuple[str, ...]) -> int:
    """The diagram of a Zarr or HDF5 input, chunk by chunk on Dask workers."""
    from ..cubical import format_summary, save_diagram
    from ..cubical._chunked import chunked_persistence
    from ..io._lazy import open_chunked
    from ..report.diagram_plots import plot_barcode, plot_diagram, save_figure

    for option, given in (("--euler", args.euler), ("--one-thread", args.one_thread)):
        if given:
            raise ParameterError(f"{option} applies to an image read whole; leave it out with "
                                 "--scheduler or --dask-local.")
    unused = [name for name in _NOT_CHUNKED_OPTIONS if name in options]
    if unused:
        raise ParameterError(f"{unused[0]}= does not apply with --scheduler or --dask-local, "
                             "which read a Zarr store or an HDF5 file as stored.",
                             parameters=(unused[0],))
    image = open_chunked(args.file, **options)
    mask = None
    if args.mask:
        mask = open_chunked(args.mask, role="Mask").data != 0
        if tuple(mask.shape) != tuple(image.data.shape):
            raise InputFileError(f"Mask '{args.mask}' has shape {tuple(mask.shape)}; the "
                                 f"image has shape {tuple(image.data.shape)}.")
    ndim = image.data.ndim
    with dask_client(args, image.name) as client:
        workers = len(client.scheduler_info().get("workers", {}))
        dgm = chunked_persistence(image.data, walls=args.walls,
                                  connectivity=args.connectivity, mask=mask,
                                  dims=(0, ndim - 1))
    save_diagram(dgm, targets[0], force=args.force)
    save_diagram(dgm, targets[1], force=args.force)
    save_figure(plot_diagram(dgm), targets[2], force=args.force)
    save_figure(plot_barcode(dgm, dim=dgm.cavity_dim, top=args.bars), targets[3],
                force=args.force)
    if not args.quiet:
        shape = " x ".join(map(str, image.chunk_shape))
        print(f"{image.name}: {format_summary(dgm)}")
        print(f"computed chunk by chunk on {workers} Dask worker(s), chunks of {shape} voxels"
              + ("; the loops of the walls (H1) are not computed this way (leave out "
                 "--scheduler / --dask-local for them)" if ndim == 3 else ""))
        print(f"wrote {', '.join(names)} to {args.out}")
        print(RESEARCH_ONLY)
    return 0
