"""``cavitas batch``: segment many files, each into its own folder, resumably."""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path
from typing import Any

from .._caution import RESEARCH_ONLY
from . import segment as _segment
from ._words import in_option_words

__all__ = ["register", "run"]

DESCRIPTION = f"""\
Segment many images or volumes with the same parameters. INPUT may be files, folders
(every image file directly inside) or glob patterns (quote them; ** matches any depth).
Each input gets its own folder in OUTDIR, named after the file plus a short code of its
full path, holding what `cavitas segment` writes and a done.json completion record.
OUTDIR also gets summary.csv (one row per input: status, regions, porosity, noise,
threshold, the Euler characteristic and connectivity density of the segmented walls,
time, problem; with --reference the distance of each input to a reference scan),
regions.csv (every region of every input, with its source file), index.html (links to
each report) and batch.json.

An input that cannot be read or fails is recorded with one sentence and the others go on;
the exit code is then 1 (3 when an input named on the command line does not exist).
Running the same command again skips every input whose outputs
are complete and whose parameters, file contents and cavitas version are unchanged, so an
interrupted batch (Ctrl-C, a killed process) resumes where it stopped. Unfinished work is
never left under a final name.

{RESEARCH_ONLY}
"""

EPILOG = """\
examples:
  cavitas batch scans/ -o results
      every image file in scans/, on all cores
  cavitas batch 'day*/*.tif' extra.nii.gz -o results --params params.toml --jobs 2
      a glob and a file, parameters from a TOML file, at most 2 at once
  cavitas batch scans/ -o results --walls dark --auto
      segment options as for `cavitas segment`
  cavitas batch scans/ -o results --no-report
      tables and label maps only: no report page per input
  cavitas batch 'series/*.tif' -o results --reference series/day0.tif
      each scan's distance to the day-0 scan in the summary (drift across a series)
  cavitas batch scans/ -o results --scheduler tcp://scheduler-host:8786
      send each input to a running Dask cluster (needs cavitas[cluster]; OUTDIR on a
      file system every worker can reach)
  cavitas batch scans/ -o results --dask-local --jobs 4
      the same through a local Dask cluster
"""


def register(subparsers: Any, *, parents: list[argparse.ArgumentParser],
             formatter_class: type[argparse.HelpFormatter]) -> argparse.ArgumentParser:
    """Add the ``batch`` subcommand to ``subparsers``."""
    parser = subparsers.add_parser(
        "batch", parents=parents, formatter_class=formatter_class,
        help="segment many files (folders, globs) in parallel, resumably",
        description=DESCRIPTION, epilog=EPILOG,
    )
    parser.add_argument("inputs", nargs="+", metavar="INPUT",
                        help="image files, folders of image files, or glob patterns")
    parser.add_argument("-o", "--out", metavar="OUTDIR", required=True, type=Path,
                        help="batch output folder (created if needed)")
    run_options = parser.add_argument_group("running")
    run_options.add_argument("-j", "--jobs", type=int, metavar="N",
                             help="most inputs processed at once (default: the usable "
                                  "cores); fewer run together when memory would not suffice")
    run_options.add_argument("--scheduler", metavar="ADDRESS",
                             help="address of a Dask scheduler to send the inputs to "
                                  "(e.g. tcp://host:8786); inputs are sent while their "
                                  "estimated memory fits 80%% of the workers' limits")
    run_options.add_argument("--dask-local", action="store_true",
                             help="run through a Dask cluster started on this machine")
    run_options.add_argument("--force", action="store_true",
                             help="redo every input and replace existing outputs")
    run_options.add_argument("--no-report", action="store_true",
                             help="write no report.html per input (tables, maps, run.json "
                                  "and the index are written); faster on large stacks")
    _segment.add_memory_option(run_options)
    compare = parser.add_argument_group("comparing every scan with one")
    compare.add_argument("--reference", metavar="FILE",
                         help="an image (or a diagram file `cavitas diagram` wrote) to compare "
                              "every input with: summary.csv and index.html get the bottleneck "
                              "distance between each input's persistence diagram and the "
                              "reference's, per dimension (columns to_reference_H0 ...), from "
                              "the unsmoothed images with the run's walls, connectivity, mask "
                              "and reading options; computed after the inputs, so changing it "
                              "never re-runs them")
    _segment.add_segment_options(parser)
    parser.add_argument("--config", dest="params", metavar="FILE.toml",
                        help="same as --params: segmentation parameters from a TOML file")
    parser.set_defaults(func=run)
    return parser


def run(args: argparse.Namespace) -> int:
    """Run the batch described by ``args``; return 0, or 1 if some inputs failed."""
    from ..batch import run_batch

    settings = _segment.settings_from_args(args)
    options = settings.options
    if options.mask:  # workers may run elsewhere: name the mask by its full path
        options = options.replace(mask=os.path.abspath(options.mask))
    result = run_batch(args.inputs, args.out, settings.params, options=options,
                       jobs=args.jobs, scheduler=args.scheduler, dask=args.dask_local,
                       force=args.force, progress=args.progress,
                       read_options=settings.reading.kwargs(),
                       skip_memory_check=args.skip_memory_check,
                       report=not args.no_report, reference=args.reference)
    counts = {s: sum(r["status"] == s for r in result.results)
              for s in ("done", "reused", "failed")}
    for failure in result.failed:
        where = "" if failure["input"] in failure["error"] else f"{failure['input']}: "
        sentence = in_option_words(failure["error"], failure.get("parameters", ()), args.options)
        print(f"cavitas batch: failed: {where}{sentence}", file=sys.stderr)
    if not args.quiet:
        print(f"{len(result.results)} inputs: {counts['done']} processed, {counts['reused']} "
              f"unchanged since an earlier run, {counts['failed']} failed.\n"
              f"Summary: {result.files['summary.csv']}\nIndex:   {result.files['index.html']}"
              f"\n{RESEARCH_ONLY}")
    return result.exit_code
