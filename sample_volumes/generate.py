"""Regenerate the bundled sample volumes, bit for bit (invented data, for the demo only).

Three scenarios of our own, made with :mod:`cavitas.scenes` at fixed seeds and written with
``cavitas.write`` (NIfTI gzip streams carry no time stamp; the TIFF files carry no date tag):

- ``foam.nii.gz``: micro-CT-like closed-cell polymer foam, uint16, with Poisson-like noise;
- ``capsules.tif``: confocal-like stack of hollow fluorescent microcapsules, uint8, ImageJ;
- ``cell_sheet.tif``: 2D membrane-stained cell sheet, uint8, ImageJ;

each with its ground-truth chamber labels (``*_truth.*``, uint16, 0 = walls and medium).
``sample_volumes/README.md`` lists the facts of each one.

Usage::

    python sample_volumes/generate.py [--out DIR] [--force]
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from cavitas import RESEARCH_ONLY
from cavitas.scenes.samples import CAPSULES, FOAM, SAMPLES, SHEET, write_samples

__all__ = ["CAPSULES", "FOAM", "SAMPLES", "SHEET", "main", "write_samples"]

HERE = Path(__file__).resolve().parent


def main(argv: list[str] | None = None) -> int:
    """Command line: ``python sample_volumes/generate.py [--out DIR] [--force]``."""
    parser = argparse.ArgumentParser(
        description="Regenerate the bundled sample volumes of cavitas bit for bit "
                    "(invented data, for the demo only). " + RESEARCH_ONLY,
        epilog="example: python sample_volumes/generate.py --out /tmp/samples",
    )
    parser.add_argument("--out", default=str(HERE),
                        help="folder to write into (default: the sample_volumes folder)")
    parser.add_argument("--force", action="store_true",
                        help="replace files that already exist")
    args = parser.parse_args(argv)
    import cavitas

    try:
        scenes = write_samples(args.out, force=args.force)
    except cavitas.CavitasError as exc:
        print(f"generate.py: {exc}", file=sys.stderr)
        return exc.exit_code
    for name, scene in scenes.items():
        print(f"{name}: {scene.description}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
