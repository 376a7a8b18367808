"""``cavitas info``: what a file holds, and what a segmentation of it would need."""

from __future__ import annotations

import argparse
import logging
import sys
from typing import TYPE_CHECKING, Any

from .._errors import EXIT_INTERNAL, CavitasError, ChoiceNeeded
from ._reading import add_reading_options, reading_from_args
from ._words import in_option_words

if TYPE_CHECKING:  # numpy and the readers are imported when a file is read (fast --help)
    from ..io import Volume

__all__ = ["describe", "register", "run"]

DESCRIPTION = """\
Show what each file holds: shape, data type, voxel spacing and unit, value range and
percentiles (1, 50, 99), NaN/Inf count, the memory a segmentation would need, and any
problem found in the metadata. Large files are read in chunks.

For a Zarr array or an HDF5 dataset it also says how its persistence diagram can be
computed chunk by chunk on Dask workers (`cavitas diagram FILE -o OUT --dask-local N` or
`--scheduler ADDRESS`; from Python, cavitas.persistence of the array opened with zarr or
h5py): the chunks and the memory each worker needs, the larger of one chunk's sweep (about
18 bytes per chunk voxel beyond the chunk) and the largest join of two blocks' seams (it
grows with the middle planes of the volume; bench/chunked.py). A segmentation reads the
file whole, except `cavitas segment FILE -o OUT --region component --min-persistence P
--dask-local N` (a plain Zarr array): chunk by chunk too, its label pass needing about 21
bytes per chunk voxel beyond the chunk, in the smoothing's type, with its halo.

Memory estimate = 340 MiB for the program (Python, the libraries, the compiled kernels) +
voxels x (bytes per input voxel + the working memory of a segmentation: 66 bytes when the
image is smoothed in float32 (data of 16 bits or less, float32), 96 in float64) + 40 bytes
per voxel for the first 2 million voxels (small volumes), measured with
bench/segment_scale.py and bench/memory_guard.py. `cavitas segment` refuses an input whose
estimate exceeds the memory available (--skip-memory-check to try anyway).
"""

EPILOG = """\
examples:
  cavitas info scan.tif
  cavitas info hyperstack.tif --channel 1 --time 0
  cavitas info brain.nii.gz cells.npy --json          one JSON object per line
  cavitas info "stack/slice_*.png"                     a glob of 2D slices (quote it)
  cavitas info block.raw --shape 64,256,256 --dtype uint16 --byte-order big --offset 512

A file with several channels, time points or arrays is described with the first of each
(and what it holds); --channel, --time and --key choose others.
Several files: one block each; a file that cannot be read is reported on stderr and the
others go on. Exit code 0 if all were read, else that of the worst failure (3 for an
unreadable file, 2 for a bad option).
"""


def register(subparsers: Any, *, parents: list[argparse.ArgumentParser],
             formatter_class: type[argparse.HelpFormatter]) -> argparse.ArgumentParser:
    """Add the ``info`` subcommand to ``subparsers``."""
    parser = subparsers.add_parser(
        "info", parents=parents, formatter_class=formatter_class, description=DESCRIPTION,
        epilog=EPILOG, help="what a file holds, and what a segmentation of it would need",
    )
    parser.add_argument("files", nargs="+", metavar="FILE",
                        help="image or volume files, folders of 2D slices or glob patterns")
    parser.add_argument("--json", action="store_true",
                        help="print one JSON object per file (keys: source, shape, dtype, "
                             "spacing, unit, min, max, percentiles, nonfinite, memory_bytes, "
                             "warnings, holds: the channels, time points or arrays of a file "
                             "that has several, chunked: for a Zarr array or an HDF5 "
                             "dataset, its chunks and what a Dask worker needs ...)")
    add_reading_options(parser)
    parser.set_defaults(func=run)
    return parser


def describe(volume: Volume, *, progress: Any = None) -> dict[str, Any]:
    """The facts ``cavitas info`` shows about a volume, as a JSON-ready dict.

    Examples
    --------
    >>> import numpy as np
    >>> from cavitas.io import Volume
    >>> facts = describe(Volume(np.arange(8, dtype=np.uint8).reshape(2, 4)))
    >>> facts["shape"], facts["min"], facts["max"], facts["memory_bytes"]
    ([2, 4], 0, 7, 356516696)
    """
    from ..io import estimate_memory_bytes, summarize

    stats = summarize(volume.data, progress=progress)
    return {
        "source": volume.source,
        "format": volume.meta.get("format"),
        "shape": list(volume.shape),
        "dtype": str(volume.dtype),
        "spacing": list(volume.spacing),
        "unit": volume.unit,
        "channel": volume.meta.get("channel"),
        "time": volume.meta.get("time"),
        "min": stats["min"],
        "max": stats["max"],
        "percentiles": stats["percentiles"],
        "percentiles_exact": stats["exact"],
        "nonfinite": stats["nonfinite"],
        "memory_bytes": estimate_memory_bytes(volume.shape, volume.dtype),
        "warnings": list(volume.meta.get("warnings", [])),
    }


def _size(count: float) -> str:
    for unit in ("B", "KiB", "MiB", "GiB", "TiB"):
        if count < 1024 or unit == "TiB":
            return f"{count:.0f} {unit}" if unit == "B" else f"{count:.1f} {unit}"
        count /= 1024
    raise AssertionError("unreachable")  # pragma: no cover


def _number(value: Any) -> str:
    return "n/a" if value is None else f"{value:g}"


#: Option -> what the file holds several of.
_HELD = {"channel": "channels", "time": "time points", "key": "arrays"}


def _listing(choices: list) -> str:
    if all(isinstance(c, int) for c in choices):
        return f"{choices[0]} to {choices[-1]}"
    return ", ".join(map(str, choices))


def _text(facts: dict[str, Any]) -> str:
    axes = "(z, y, x)" if len(facts["shape"]) == 3 else "(y, x)"
    voxels = 1
    for n in facts["shape"]:
        voxels *= n
    spacing = " × ".join(f"{s:g}" for s in facts["spacing"])
    chosen = ", ".join(f"{k} {facts[k]}" for k in ("channel", "time") if facts[k] is not None)
    pct = ", ".join(f"{k} %: {_number(v)}" for k, v in facts["percentiles"].items())
    approx = "" if facts["percentiles_exact"] else " (from a histogram)"
    lines = [
        facts["source"],
        f"  format      {facts['format']}" + (f" ({chosen})" if chosen else ""),
        f"  shape       {axes} = {' × '.join(map(str, facts['shape']))} ({voxels:,} voxels)",
        f"  dtype       {facts['dtype']}",
        f"  spacing     {axes} = {spacing} {facts['unit']}",
        f"  values      min {_number(facts['min'])}, max {_number(facts['max'])}",
        f"  percentiles {pct}{approx}",
        f"  NaN / Inf   {facts['nonfinite']:,} voxels",
        f"  memory      about {_size(facts['memory_bytes'])} for a segmentation",
    ]
    lines[2:2] = [f"  {_HELD[option]:<11} {len(choices)}: {_listing(choices)}; shown: "
                  f"{choices[0]} (--{option} to choose)"
                  for option, choices in facts.get("holds", {}).items()]
    chunked = facts.get("chunked")
    if chunked:
        lines += [
            "  path        segment: whole, in memory, but --region component with "
            "--min-persistence and --dask-local or --scheduler: chunk by chunk on Dask "
            "workers (plain Zarr arrays); diagram with --dask-local or --scheduler, and "
            "cavitas.persistence (Python): chunk by chunk",
            f"  per worker  about {_size(chunked['worker_bytes'])} beyond the program "
            f"(chunk sweep {_size(chunked['chunk_sweep_bytes'])}, largest join "
            f"{_size(chunked['largest_join_bytes'])}; {chunked['chunks']:,} chunks of "
            f"{' × '.join(map(str, chunked['chunk_shape']))})"]
    lines += [f"  warning     {w}" for w in facts["warnings"]] or ["  warnings    none"]
    return "\n".join(lines)


def _progress(quiet: bool) -> Any:
    from tqdm import tqdm

    def wrap(chunks: Any, total: int) -> Any:
        return tqdm(chunks, total=total, desc="statistics", unit="chunk", leave=False,
                    file=sys.stderr, disable=quiet or total < 2)

    return wrap


def read_first_choice(name: str, options: dict[str, Any]) -> tuple[Volume, dict[str, list]]:
    """Read ``name``, taking the first channel, time point or array where none was chosen.

    Returns the volume and, per option the file needed but was not given (``"channel"``,
    ``"time"``, ``"key"``), the choices the file holds.

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np
    >>> target = pathlib.Path(tempfile.mkdtemp()) / "two.npz"
    >>> np.savez(target, a=np.zeros((2, 3)), b=np.ones((4, 5)))
    >>> volume, held = read_first_choice(str(target), {})
    >>> volume.shape, held
    ((2, 3), {'key': ['a', 'b']})
    """
    from ..io import read

    options, held = dict(options), dict[str, list]()
    while True:
        try:
            return read(name, **options), held
        except ChoiceNeeded as exc:
            option = exc.parameters[0] if exc.parameters else None
            if option is None or not exc.choices or options.get(option) is not None:
                raise
            held[option] = exc.choices
            options[option] = exc.choices[0]


def _stored_chunks(name: str, volume: Volume) -> tuple[int, ...] | None:
    """The chunk shape of a plain Zarr array or an HDF5 dataset (None: another format,
    or an HDF5 dataset stored whole, which is read in 64-plane slabs)."""
    meta = volume.meta
    if meta.get("format") == "zarr":
        import zarr

        node: Any = zarr.open(name, mode="r")
        array: Any = node[meta["array"]] if "array" in meta else node
        return tuple(array.chunks)
    if "dataset" in meta:
        import h5py

        with h5py.File(name, "r") as handle:
            chunks = handle[meta["dataset"]].chunks
        return tuple(chunks) if chunks else (64,) + tuple(volume.shape[1:])
    return None


def chunked_facts(name: str, volume: Volume) -> dict[str, Any] | None:
    """For a Zarr array or an HDF5 dataset: its chunks and what a Dask worker needs when
    ``cavitas.persistence`` computes its diagram chunk by chunk (None for other formats).

    Examples
    --------
    >>> import tempfile, zarr, numpy as np
    >>> from cavitas.io import read
    >>> store = tempfile.mkdtemp() + "/cube.zarr"
    >>> zarr.open_array(store, mode="w", shape=(8, 8, 8), chunks=(4, 8, 8), dtype="uint16")[:] = 1
    >>> chunked_facts(store, read(store))["chunk_shape"]
    [4, 8, 8]
    """
    chunk = _stored_chunks(name, volume)
    if chunk is None:
        return None
    from ..cubical._chunk_memory import worker_need  # loads numba: only for chunked files

    chunk = tuple(min(c, s) for c, s in zip(chunk, volume.shape, strict=True))
    per_axis = [(c,) * (s // c) + ((s % c,) if s % c else ())
                for s, c in zip(volume.shape, chunk, strict=True)]
    need = worker_need(volume.shape, per_axis, volume.dtype.itemsize)
    return {"chunk_shape": list(chunk), "chunks": need.chunks,
            "worker_bytes": need.peak_bytes, "chunk_sweep_bytes": need.sweep_bytes,
            "largest_join_bytes": need.join_bytes}


def _describe_file(name: str, options: dict[str, Any], quiet: bool) -> dict[str, Any]:
    volume, held = read_first_choice(name, options)
    facts = describe(volume, progress=_progress(quiet))
    facts["holds"] = held
    facts["chunked"] = chunked_facts(name, volume)
    return facts


def run(args: argparse.Namespace) -> int:
    """Describe each file; carry on past failures; return the worst exit code."""
    from .._json import dumps

    options = reading_from_args(args).kwargs()
    failed = 0
    reader_log = logging.getLogger("cavitas.io")
    level = reader_log.level
    shown = 0
    for name in args.files:
        reader_log.setLevel(logging.ERROR)  # metadata warnings are shown in the block
        try:
            facts = _describe_file(name, options, not args.progress)
        except CavitasError as exc:
            if args.debug:
                raise
            print(f"cavitas info: error: "
                  f"{in_option_words(str(exc), exc.parameters, args.options)}", file=sys.stderr)
            failed = max(failed, exc.exit_code)
            continue
        except (KeyboardInterrupt, BrokenPipeError):
            raise
        except Exception as exc:  # a bug on one file: say so, and describe the others
            if args.debug:
                raise
            print(f"cavitas info: internal error on '{name}': {type(exc).__name__}: {exc} "
                  "(run again with --debug for the traceback, and please report it)",
                  file=sys.stderr)
            failed = max(failed, EXIT_INTERNAL)
            continue
        finally:
            reader_log.setLevel(level)
        if args.json:
            print(dumps(facts, ensure_ascii=False), flush=True)
        else:
            print(("\n" if shown else "") + _text(facts), flush=True)
        shown += 1
    return failed
