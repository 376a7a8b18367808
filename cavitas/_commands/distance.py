"""``cavitas distance``: how far apart the persistence diagrams of two or more scans are."""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from .._caution import RESEARCH_ONLY
from .._checks import WALLS
from .._errors import ParameterError
from ._reading import add_reading_options, reading_from_args

__all__ = ["register", "run"]

#: Files written into the output folder (plus one matching figure per later input).
TABLE, RECORD = "distances.csv", "distances.json"

DESCRIPTION = f"""\
Compare the structure of two or more scans through their persistence diagrams: wall
components (H0) and cavities (H1 in 2D, H2 in 3D), and on request (--dimensions) the
tunnels and loops of volumes (H1 in 3D). Each INPUT is an image or volume (any
format cavitas reads; its diagram is computed with the options below) or a diagram file
that `cavitas diagram` wrote (diagram.npz or diagram.csv, used as saved).

The distance between two diagrams is that of the best matching of their points, where
a point may also be matched with the diagonal (a feature that one scan has and the
other has not costs half its persistence). The bottleneck distance is the largest shift
that matching needs: no feature moves farther. The Wasserstein distance of order Q adds
up all the shifts (to the power Q, then the Q-th root): every feature counts. Both are
in the input's intensity units, per homology dimension. Classes that never die (the
outermost wall component) are matched only with each other, by their births; two
diagrams with different numbers of them are infinitely far apart, and the output says so.

Written to OUTDIR: distances.csv (one matrix per dimension: a row and a column per
input), distances.json (the same with the settings and notes) and, for each input after
the first, matching-1-K.png: the first input's diagram (filled) against input K's
(hollow), with the optimal matching drawn.

{RESEARCH_ONLY}
"""

EPILOG = """\
examples:
  cavitas distance day1.tif day2.tif -o drift
      bottleneck distance of the two scans' diagrams (bright walls, faces connected)
  cavitas distance ref.tif a.tif b.tif c.tif -o qc --metric wasserstein --order 2
      every pair compared; three figures: a, b and c each against ref
  cavitas distance run1/diagram.npz run2/diagram.npz -o cmp
      diagrams saved by `cavitas diagram`: walls and connectivity come from the files
  cavitas distance a.nii.gz b.nii.gz -o cmp --walls dark --smooth 1.5 --min-persistence 20
      dark walls; Gaussian smoothing sigma 1.5 (physical units) first; pairs of
      persistence under 20 left out (each moves the bottleneck distance by at most 10)
"""


def _dimensions(text: str) -> tuple[int, ...]:
    """An argparse type: homology dimensions as ``0`` or ``0,2``."""
    try:
        dims = tuple(sorted({int(part) for part in text.split(",") if part.strip()}))
    except ValueError as exc:
        raise argparse.ArgumentTypeError(
            f"expected dimensions such as 0 or 0,1; got {text!r}") from exc
    if not dims or min(dims) < 0 or max(dims) > 2:
        raise argparse.ArgumentTypeError(f"dimensions are 0, 1 or 2; got {text!r}")
    return dims


def register(subparsers: Any, *, parents: list[argparse.ArgumentParser],
             formatter_class: type[argparse.HelpFormatter]) -> argparse.ArgumentParser:
    """Add the ``distance`` subcommand to ``subparsers``."""
    parser = subparsers.add_parser(
        "distance", parents=parents, formatter_class=formatter_class,
        help="distances between the persistence diagrams of two or more scans",
        description=DESCRIPTION, epilog=EPILOG,
    )
    parser.add_argument("inputs", nargs="+", metavar="INPUT",
                        help="two or more images, volumes or saved diagram files")
    parser.add_argument("-o", "--out", metavar="OUTDIR", required=True, type=Path,
                        help="folder for the table, record and figures (created if needed)")
    how = parser.add_argument_group("the distance")
    how.add_argument("--metric", choices=("bottleneck", "wasserstein"), default="bottleneck",
                     help="bottleneck: the largest shift of the best matching; wasserstein: "
                          "the shifts of the best matching added up (order --order)")
    how.add_argument("--order", type=float, metavar="Q",
                     help="exponent of the Wasserstein distance, Q >= 1: 1 adds the shifts, "
                          "2 adds their squares (a large shift weighs more) (default: 1)")
    how.add_argument("--dimensions", type=_dimensions, metavar="D[,D]",
                     help="homology dimensions to compare, e.g. 0 or 0,2; 1 for volumes "
                          "computes their tunnels and loops too, which costs more (default: "
                          "every dimension all inputs have: components and cavities for "
                          "images)")
    how.add_argument("--min-persistence", type=float, metavar="P",
                     help="leave out pairs of persistence below P (intensity units) first: "
                          "noise near the diagonal; the exact Wasserstein distance handles "
                          "at most 8000 pairs per comparison")
    wall = parser.add_argument_group("how images become diagrams (saved diagrams are used "
                                     "as they are)")
    wall.add_argument("--walls", choices=WALLS,
                      help="polarity of the walls: bright (superlevel filtration) or dark "
                           "(sublevel); default: that of the saved diagrams given, else "
                           "bright")
    wall.add_argument("--connectivity", type=int, metavar="N",
                      help="connectivity of the wall set: 1 = faces only, 2 (2D) or 3 (3D) = "
                           "full; default: that of the saved diagrams given, else 1")
    wall.add_argument("--mask", metavar="MASKFILE",
                      help="region of interest for every image (same shape as each): "
                           "nonzero voxels are analysed, the rest counts as outside")
    wall.add_argument("--smooth", type=float, default=0.0, metavar="SIGMA",
                      help="Gaussian smoothing sigma in physical units before the diagram "
                           "(0 = none; images only)")
    parser.add_argument("--force", action="store_true",
                        help="replace output files that already exist")
    add_reading_options(parser)
    parser.set_defaults(func=run)
    return parser


def _labels(paths: Sequence[str]) -> list[str]:
    """Column names: the file names, or the paths as given when two names are alike.

    Examples
    --------
    >>> _labels(["a/scan.tif", "b/other.tif"]), _labels(["a/scan.tif", "b/scan.tif"])
    (['scan.tif', 'other.tif'], ['a/scan.tif', 'b/scan.tif'])
    """
    names = [Path(p).name or str(p) for p in paths]
    if len(set(names)) == len(names):
        return names
    return [str(p) for p in paths]


def _common_dims(sources: Sequence[Any], asked: tuple[int, ...] | None) -> tuple[int, ...]:
    have = set.intersection(*(set(s.diagram.dims) for s in sources))
    if asked is None:
        return tuple(sorted(have))
    for dim in asked:
        if dim not in have:
            lacking = next(s for s in sources if dim not in s.diagram.dims)
            raise ParameterError(
                f"dimensions= asks for H{dim}, which '{lacking.path}' does not have "
                f"(it has {', '.join(f'H{d}' for d in lacking.diagram.dims)}).",
                parameters=("dimensions",))
    return asked


def _infinite_notes(sources: Sequence[Any], dims: tuple[int, ...],
                    labels: Sequence[str]) -> list[str]:
    """One sentence per dimension whose inputs do not all have as many essential classes."""
    notes = []
    for dim in dims:
        counts = [int(s.diagram.essential(dim).sum()) for s in sources]
        if len(set(counts)) > 1:
            listed = ", ".join(f"{label} {count}"
                               for label, count in zip(labels, counts, strict=True))
            notes.append(f"H{dim}: the inputs do not have the same number of classes that "
                         f"never die ({listed}); those of different counts are infinitely "
                         "far apart (inf in the table, null in the JSON).")
    return notes


def _table(matrix: Any, labels: Sequence[str]) -> Any:
    import numpy as np

    from .._table import Table

    rows = len(matrix.dims) * len(labels)
    columns: dict[str, Any] = {
        "dimension": np.repeat(np.array(matrix.dims), len(labels)),
        "input": np.array(list(labels) * len(matrix.dims), dtype=object),
    }
    for j, label in enumerate(labels):
        columns[label] = matrix.values[:, :, j].reshape(rows)
    return Table(columns, meta={"caution": RESEARCH_ONLY})


def _check_args(args: argparse.Namespace) -> None:
    if len(args.inputs) < 2:
        raise ParameterError(f"distance needs two or more inputs to compare; got "
                             f"{len(args.inputs)}.")
    if args.order is not None and args.metric != "wasserstein":
        raise ParameterError("order= is the exponent of the Wasserstein distance; give it "
                             "with metric='wasserstein'.", parameters=("order", "metric"))


def run(args: argparse.Namespace) -> int:
    """Read or compute each input's diagram, write the distance matrix and the figures."""
    from tqdm import tqdm

    from .._diagram_sources import DiagramRecipe, diagram_sources
    from .._json import dumps
    from .._shared.atomic import atomic_path, check_writable
    from ..cubical import distance_matrix, drop_shallow
    from ..report.diagram_plots import save_figure
    from ..report.matching_plot import plot_matching

    _check_args(args)
    figures = [f"matching-1-{k + 1}.png" for k in range(1, len(args.inputs))]
    targets = {name: check_writable(args.out / name, force=args.force, inputs=args.inputs)
               for name in (TABLE, RECORD, *figures)}
    recipe = DiagramRecipe(walls=args.walls, connectivity=args.connectivity,
                           smooth=args.smooth, mask=args.mask,
                           read_options=reading_from_args(args).kwargs(),
                           dims=args.dimensions)
    with tqdm(total=3, desc="distance", unit="step", file=sys.stderr,
              disable=not args.progress, delay=1.0, leave=False) as bar:
        bar.set_postfix_str(f"diagrams of {len(args.inputs)} inputs")
        sources = diagram_sources(args.inputs, recipe)
        diagrams = [s.diagram for s in sources]
        if args.min_persistence is not None:
            diagrams = [drop_shallow(d, args.min_persistence) for d in diagrams]
        dims = _common_dims(sources, args.dimensions)
        bar.update()
        bar.set_postfix_str("distances")
        matrix = distance_matrix(diagrams, dims, metric=args.metric, order=args.order)
        bar.update()
        bar.set_postfix_str("writing")
        labels = _labels(args.inputs)
        _table(matrix, labels).to_csv(targets[TABLE], force=args.force)
        for k, name in enumerate(figures, start=1):
            save_figure(plot_matching(diagrams[0], diagrams[k], matrix.against_first[k],
                                      names=(labels[0], labels[k])),
                        targets[name], force=args.force)
        notes = _infinite_notes(sources, dims, labels)
        record = {
            "metric": matrix.metric, "order": matrix.order,
            "dimensions": list(dims), "units": "input intensity",
            "walls": diagrams[0].walls, "connectivity": diagrams[0].connectivity,
            "smooth": args.smooth, "min_persistence": args.min_persistence,
            "inputs": [{"file": s.path, "label": label, "from": s.kind,
                        "shape": list(s.diagram.shape),
                        "pairs": {f"H{d}": len(s.diagram.pairs(d)) for d in dims}}
                       for s, label in zip(sources, labels, strict=True)],
            "distances": {f"H{d}": matrix.of(d).tolist() for d in dims},
            "notes": notes, "caution": RESEARCH_ONLY,
        }
        with atomic_path(targets[RECORD], force=args.force) as tmp:
            tmp.write_text(dumps(record, indent=1, ensure_ascii=False), encoding="utf-8")
        bar.update()
    if not args.quiet:
        name = ("bottleneck" if matrix.order is None
                else f"{matrix.order:g}-Wasserstein")
        for dim in dims:
            values = matrix.of(dim)
            pairs = [f"{labels[0]}–{labels[k]} {values[0, k]:.4g}"
                     for k in range(1, len(labels))]
            print(f"H{dim} {name} distance (intensity units): " + "; ".join(pairs))
        for note in notes:
            print(note)
        print(f"wrote {TABLE}, {RECORD} and {len(figures)} matching figure"
              f"{'s' if len(figures) > 1 else ''} to {args.out}")
        print(RESEARCH_ONLY)
    return 0
