"""``cavitas diagram``: compute a persistence diagram and write it with its figures."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any

from .._caution import RESEARCH_ONLY
from .._checks import WALLS
from .._errors import InputFileError, ParameterError
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
