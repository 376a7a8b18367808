"""``cavitas demo``: the whole job on the bundled samples, with the figures to look at first."""

from __future__ import annotations

import argparse
import math
import time
from pathlib import Path
from typing import Any

from .._caution import RESEARCH_ONLY

__all__ = ["register", "run", "sample_folder"]

DESCRIPTION = f"""\
Run the whole job on the three bundled samples (invented scenes of our own, with ground
truth): a micro-CT-like closed-cell foam (3D, anisotropic voxels), a confocal-like stack of
hollow microcapsules (3D, some nested), and a membrane-stained cell sheet (2D).

For each sample it segments with the default automatic settings, measures the regions,
writes labels, tables and an HTML report into OUTDIR/<sample>/, and compares the labels
with the shipped ground truth (cells found one-to-one at Dice >= 0.7, median Dice);
OUTDIR/demo.json holds these figures.
It finishes in about a minute on a 2-core machine.

{RESEARCH_ONLY}
"""

EPILOG = """\
examples:
  cavitas demo                         writes ./cavitas-demo/
  cavitas demo --out /tmp/demo --force replace an earlier demo run
  cavitas demo --only cell_sheet       one sample (foam, capsules or cell_sheet)
Open OUTDIR/<sample>/report.html in a browser to see the diagram, the slice browser and
the region table.
"""

SAMPLE_NAMES = ("cell_sheet", "capsules", "foam")


def register(subparsers: Any, *, parents: list[argparse.ArgumentParser],
             formatter_class: type[argparse.HelpFormatter]) -> argparse.ArgumentParser:
    """Add the ``demo`` subcommand to ``subparsers``."""
    p = subparsers.add_parser(
        "demo", parents=parents, formatter_class=formatter_class, description=DESCRIPTION,
        epilog=EPILOG, help="run the whole job on the bundled samples and show the figures",
    )
    p.add_argument("-o", "--out", type=Path, default=Path("cavitas-demo"), metavar="OUTDIR",
                   help="folder for the outputs")
    p.add_argument("--only", choices=SAMPLE_NAMES, action="append", metavar="SAMPLE",
                   help="run only this sample (repeatable): foam, capsules or cell_sheet")
    p.add_argument("--no-report", action="store_true", help="skip the HTML reports")
    p.add_argument("--force", action="store_true", help="replace outputs that already exist")
    p.set_defaults(func=run)
    return p


def sample_folder(out: Path, names: tuple[str, ...], *, force: bool) -> Path:
    """The folder holding the samples: the source tree's copy, else freshly generated ones.

    An installed (non-editable) package has no ``sample_volumes/``; the recipes in
    :mod:`cavitas.scenes.samples` then write identical files into ``out/samples``.
    """
    from ..scenes.samples import SAMPLES, write_samples

    wanted = [s for s in SAMPLES if s.name in names]
    tree = Path(__file__).resolve().parents[2] / "sample_volumes"
    if all((tree / f).is_file() for s in wanted for f in s.files):
        return tree
    folder = out / "samples"
    missing = tuple(s.name for s in wanted if not all((folder / f).is_file() for f in s.files))
    if missing:
        write_samples(folder, force=force, names=missing)
    return folder


def run(args: argparse.Namespace) -> int:
    """Run ``cavitas demo``: segment, measure, report and score every sample."""
    from tqdm import tqdm

    from .._shared.atomic import check_writable
    from ..compare import border_labels, compare_labels
    from ..io import read
    from ..scenes.samples import SAMPLES
    from ..workflow import segment_file

    check_writable(args.out / "demo.json", force=args.force)  # fail now, not after the work
    names = tuple(args.only or SAMPLE_NAMES)
    samples = [s for s in SAMPLES if s.name in names]
    folder = sample_folder(args.out, names, force=args.force)
    rows = []
    bar = tqdm(samples, desc="cavitas demo", unit="sample", disable=not args.progress)
    for sample in bar:
        bar.set_postfix_str(sample.name)
        image_file, truth_file = (folder / f for f in sample.files)
        started = time.perf_counter()
        summary = segment_file(image_file, args.out / sample.name, force=args.force,
                               progress=False, report=not args.no_report)
        labels = read(summary["outputs"]["labels"]).data
        truth = read(truth_file).data
        _, score = compare_labels(labels.astype("int64"), truth.astype("int64"),
                                  ignore=border_labels(truth))
        rows.append((sample.name, summary, score, time.perf_counter() - started))
    _write_record(rows, args.out / "demo.json", force=args.force)
    if not args.quiet:
        _print_table(rows, args.out)
    return 0


def _write_record(rows: list[tuple[str, dict, dict, float]], path: Path, *,
                  force: bool) -> None:
    """``demo.json``: per sample, the run summary and the score against the ground truth."""
    from .._json import dumps
    from .._shared.atomic import atomic_path

    record = {"samples": {name: {"summary": summary, "score": score, "seconds": seconds}
                          for name, summary, score, seconds in rows},
              "caution": RESEARCH_ONLY}
    with atomic_path(path, force=force) as tmp:
        tmp.write_text(dumps(record, indent=1, ensure_ascii=False, default=str),
                       encoding="utf-8")


def _print_table(rows: list[tuple[str, dict, dict, float]], out: Path) -> None:
    header = (f"{'sample':<11} {'regions':>7} {'border-cut':>10} {'porosity':>8} "
              f"{'threshold':>9} {'noise σ':>8} {'found (Dice≥0.7)':>17} {'median Dice':>11} "
              f"{'spurious':>8} {'time':>6}")
    print(header)
    print("-" * len(header))
    for name, summary, score, seconds in rows:
        found = f"{score['found']}/{score['reference_regions']}"
        porosity = summary["porosity"]
        print(f"{name:<11} {summary['regions']:>7} {summary['border_cut']:>10} "
              f"{_fmt(porosity, '.3f'):>8} {_fmt(summary['threshold'], '.4g'):>9} "
              f"{_fmt(summary['noise'], '.4g'):>8} {found:>17} "
              f"{_fmt(score['median_dice'], '.3f'):>11} {score['spurious']:>8} "
              f"{seconds:>5.1f}s")
    print()
    for name, summary, _, _ in rows:
        target = summary["outputs"].get("report") or summary["outputs"]["regions"]
        print(f"{name}: {target}")
    print("porosity = volume fraction of the found regions in the scan; threshold = the "
          "persistence a cavity needed (intensity units); found = truth cells not cut by "
          "the border matched one-to-one; spurious = regions matching no truth cell.")
    print(RESEARCH_ONLY)


def _fmt(value: Any, spec: str) -> str:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "–"
    return format(value, spec)
