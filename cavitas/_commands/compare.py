"""``cavitas compare``: score a label map against a reference, region by region."""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

from .._caution import RESEARCH_ONLY

__all__ = ["register", "run"]

DESCRIPTION = """\
Compare a label map (e.g. cavitas' labels) with a reference label map of the same shape
(a ground truth or a manual annotation). Each reference region is paired with the label
that overlaps it best; the pair is "found" when its Dice coefficient reaches --min-dice
(above 2/3 the pairing is one-to-one). A label paired with no reference region is
"spurious". Regions cut by the scan border can be left out of the score.
"""

EPILOG = """\
examples:
  cavitas compare out/labels.tif manual.tif
  cavitas compare out/labels.nii.gz truth.nii.gz --ignore-border --min-dice 0.8
  cavitas compare out/labels.tif truth.tif -o scores.csv --json
"""


def register(subparsers: Any, *, parents: list[argparse.ArgumentParser],
             formatter_class: type[argparse.HelpFormatter]) -> argparse.ArgumentParser:
    """Add the ``compare`` subcommand to ``subparsers``."""
    p = subparsers.add_parser(
        "compare", parents=parents, formatter_class=formatter_class,
        description=DESCRIPTION, epilog=EPILOG,
        help="score a label map against a reference (found, Dice, spurious)",
    )
    p.add_argument("labels", metavar="LABELS", help="the label map to score")
    p.add_argument("reference", metavar="REFERENCE", help="the reference label map")
    p.add_argument("--min-dice", type=float, default=0.7, metavar="D",
                   help="Dice a pair needs to count as found, in (2/3, 1]")
    p.add_argument("--ignore-border", action="store_true",
                   help="leave reference regions that touch the scan border out of the score")
    p.add_argument("-o", "--out", type=Path, metavar="TABLE.csv",
                   help="write one row per reference region (best label, Dice, found)")
    p.add_argument("--json", action="store_true", help="print the summary as JSON")
    p.add_argument("--force", action="store_true", help="replace an existing --out file")
    p.set_defaults(func=run)
    return p


def run(args: argparse.Namespace) -> int:
    """Run ``cavitas compare`` and print the summary."""
    import numpy as np

    from .._errors import InputFileError
    from .._json import dumps
    from ..compare import border_labels, compare_labels
    from ..io import read

    maps = []
    for path in (args.labels, args.reference):
        data = np.asarray(read(path).data)
        if data.dtype.kind not in "iu":
            raise InputFileError(f"'{path}' holds {data.dtype} values; a label map of "
                                 "integers was expected.")
        maps.append(data.astype(np.int64))
    ignore = border_labels(maps[1]) if args.ignore_border else ()
    table, summary = compare_labels(maps[0], maps[1], min_dice=args.min_dice, ignore=ignore)
    if args.out:
        table.to_csv(args.out, force=args.force)
    if args.json:
        print(dumps(summary))
    elif not args.quiet:
        print(f"reference regions scored: {summary['reference_regions']}"
              f"{' (border-cut left out)' if args.ignore_border else ''}")
        print(f"found (Dice ≥ {args.min_dice:g}): {summary['found']} "
              f"({summary['found_percent']:.1f} %); median Dice {summary['median_dice']:.3f}")
        print(f"labels: {summary['predicted_regions']}, spurious: {summary['spurious']} "
              f"({summary['spurious_percent']:.1f} %)")
        print(RESEARCH_ONLY)
    return 0
