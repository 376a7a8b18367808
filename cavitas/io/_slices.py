"""A folder (or glob pattern) of 2D slices, TIFF or PNG, stacked into a 3D volume.

Slices are sorted naturally (``slice_2`` before ``slice_10``); all must have the same shape
and type. Hidden files and files of other types in a folder are skipped. The pixel size is
the first slice's; the slice distance comes from an ImageJ ``spacing`` entry of the first
slice, else it is assumed equal to the pixel width (with a warning) — give ``spacing=``
to state it.
"""

from __future__ import annotations

import glob
import re
from pathlib import Path
from typing import Any

import numpy as np

from .._errors import InputFileError
from ._assemble import Decoded, note
from ._png import read_png
from ._tiff import read_tiff

__all__ = ["SLICE_SUFFIXES", "is_pattern", "natural_key", "read_slices", "slice_files"]

#: File types accepted as slices.
SLICE_SUFFIXES = (".tif", ".tiff", ".png")


def is_pattern(text: str) -> bool:
    """True when ``text`` is a glob pattern (holds ``*``, ``?`` or ``[``)."""
    return any(c in text for c in "*?[")


def natural_key(name: str) -> tuple[Any, ...]:
    """Sort key that orders numbers by value: ``slice_2`` before ``slice_10``.

    Examples
    --------
    >>> sorted(["s10.tif", "s2.tif", "s1.tif"], key=natural_key)
    ['s1.tif', 's2.tif', 's10.tif']
    """
    return tuple((0, int(part), "") if part.isdigit() else (1, 0, part.lower())
                 for part in re.split(r"(\d+)", name))


def slice_files(source: str) -> list[Path]:
    """The slice files of a folder or glob pattern, naturally sorted.

    An existing folder is a folder even when its name looks like a pattern.
    """
    pattern = is_pattern(source) and not Path(source).is_dir()
    if pattern:
        files = [Path(p) for p in glob.glob(source) if Path(p).is_file()]
        odd = [p for p in files if p.suffix.lower() not in SLICE_SUFFIXES]
        if odd:
            raise InputFileError(
                f"'{odd[0]}' (matched by '{source}') is not a slice type; slices must be "
                f"{', '.join(SLICE_SUFFIXES)} files."
            )
    else:
        files = [p for p in Path(source).iterdir() if p.is_file()
                 and not p.name.startswith(".") and p.suffix.lower() in SLICE_SUFFIXES]
    if not files:
        where = "is no file, and as a glob pattern matches" if pattern else "holds"
        raise InputFileError(
            f"'{source}' {where} no slice files ({', '.join(SLICE_SUFFIXES)})."
        )
    return sorted(files, key=lambda p: natural_key(p.name))


def _read_slice(path: Path, channel: int | None) -> Decoded:
    if path.suffix.lower() == ".png":
        return read_png(path, channel=channel)
    return read_tiff(path, channel=channel, mmap=False)


def read_slices(source: str, *, channel: int | None = None) -> Decoded:
    """Read and stack the 2D slices of a folder or glob pattern; see the module notes."""
    files = slice_files(source)
    first = _read_slice(files[0], channel)
    if first.data.ndim != 2:
        raise InputFileError(
            f"'{files[0]}' holds a {first.data.ndim}D image; slices must be 2D images."
        )
    stack = np.empty((len(files), *first.data.shape), dtype=first.data.dtype)
    stack[0] = first.data
    for index, path in enumerate(files[1:], start=1):
        data = _read_slice(path, channel).data
        if data.shape != first.data.shape or data.dtype != first.data.dtype:
            raise InputFileError(
                f"'{path}' is {data.shape} {data.dtype} but the first slice '{files[0].name}' "
                f"is {first.data.shape} {first.data.dtype}; all slices must match."
            )
        stack[index] = data
    meta: dict[str, Any] = {"format": f"{len(files)} slices", "files": [str(p) for p in files],
                            "channel": first.meta.get("channel"),
                            "warnings": list(first.meta.get("warnings", []))}
    spacing = None
    if first.spacing is not None:
        z = first.meta.get("slice_spacing")
        if z is None:
            note(meta, source, "no slice distance is stated; assuming it equals the pixel width")
            z = first.spacing[1]
        spacing = (float(z), *first.spacing)
    return Decoded(stack, spacing, first.unit, None, meta)
