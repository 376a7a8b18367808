"""Expand batch inputs (files, folders, globs) into a sorted list with unique output names."""

from __future__ import annotations

import glob
import hashlib
import logging
import os
import re
from dataclasses import dataclass
from pathlib import Path

from .._errors import InputFileError, ParameterError
from ..io import READ_SUFFIXES
from ..io._zarr import is_zarr_store

__all__ = ["BatchInput", "expand_inputs", "missing_sentence", "natural_key", "output_name"]

log = logging.getLogger(__name__)

#: File name endings a folder is searched for: what ``cavitas.io.read`` reads, plus Zarr
#: stores; longest first, so ``.nii.gz`` wins over ``.gz``.
SUFFIXES: tuple[str, ...] = tuple(sorted({*READ_SUFFIXES, ".zarr", ".ome.zarr"}, key=len,
                                         reverse=True))
_GLOB_CHARS = re.compile(r"[*?\[]")
_UNSAFE = re.compile(r"[^A-Za-z0-9._-]+")
#: Longest part of an input's name kept in its output folder's name: with the hash and
#: the staging marker, the folder's names stay well within the 255 bytes file systems allow.
_STEM_LENGTH = 100


@dataclass(frozen=True)
class BatchInput:
    """One input of a batch: its absolute path and the name of its output folder."""

    path: Path
    name: str


def natural_key(text: str) -> tuple:
    """Sort key that orders embedded numbers by value (``scan2`` before ``scan10``).

    Examples
    --------
    >>> sorted(["scan10.tif", "scan2.tif", "Scan1.tif"], key=natural_key)
    ['Scan1.tif', 'scan2.tif', 'scan10.tif']
    """
    parts = re.split(r"(\d+)", text)
    return tuple((0, int(p), p) if p.isdigit() else (1, p.casefold(), p) for p in parts if p)


def _suffix(path: Path) -> str:
    name = path.name.lower()
    return next((s for s in SUFFIXES if name.endswith(s)), "")


def output_name(path: str | os.PathLike) -> str:
    """Name of the output folder of one input: its stem plus a short hash of its absolute path.

    The hash keeps two inputs with the same file name in different folders apart, and is
    the same on every run, so a re-run finds its earlier outputs.

    Examples
    --------
    >>> a, b = output_name("/data/day1/scan.tif"), output_name("/data/day2/scan.tif")
    >>> a.startswith("scan-"), a != b, len(a) == len("scan-") + 8
    (True, True, True)
    >>> output_name("/data/brain.nii.gz").split("-")[0]
    'brain'
    """
    path = Path(os.path.abspath(path))
    suffix = _suffix(path) or path.suffix
    stem = path.name[: len(path.name) - len(suffix)] if suffix else path.name
    stem = _UNSAFE.sub("_", stem).strip("._")[:_STEM_LENGTH] or "input"
    digest = hashlib.sha256(str(path).encode("utf-8", "surrogateescape")).hexdigest()[:8]
    return f"{stem}-{digest}"


def _folder_members(folder: Path) -> list[Path]:
    found = []
    for entry in sorted(folder.iterdir()):
        if entry.name.startswith("."):
            continue
        if entry.suffix.lower() == ".img" and entry.with_suffix(".hdr").exists():
            continue  # the image half of an Analyze pair: its .hdr is the input
        if is_zarr_store(entry) or (entry.is_file() and _suffix(entry)):
            found.append(entry)
        else:
            log.info("Skipping '%s' in folder '%s': not an image file cavitas reads.",
                     entry.name, folder)
    return found


def missing_sentence(text: str) -> str:
    """The sentence for an input named on the command line that does not exist."""
    return f"Input '{text}' does not exist (expected a file, folder or glob pattern)."


def expand_inputs(items: list[str | os.PathLike], *,
                  missing: list[str] | None = None) -> list[BatchInput]:
    """Expand files, folders and glob patterns into a sorted list of unique inputs.

    A folder contributes the image files directly inside it (hidden files and files of
    unknown type are skipped); a Zarr store, although a folder, is one input. Glob patterns
    (``*``, ``?``, ``[...]``; ``**`` for any depth) are expanded. Each file appears once
    even if several items name it. The result is in natural order of the paths.
    An item that names nothing that exists is added to ``missing`` when that list is given.

    Raises
    ------
    InputFileError
        If an item names nothing that exists and ``missing`` is not given.
    ParameterError
        If nothing at all is found.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> for n in ("b10.tif", "b2.tif", "notes.txt"): _ = (d / n).write_bytes(b"")
    >>> [i.path.name for i in expand_inputs([d])]
    ['b2.tif', 'b10.tif']
    >>> [i.path.name for i in expand_inputs([str(d / "b1*.tif")])]
    ['b10.tif']
    """
    paths: dict[Path, None] = {}
    for item in items:
        text = os.fspath(item)
        path = Path(text)
        if path.exists():
            members = [path] if path.is_file() or is_zarr_store(path) else _folder_members(path)
        elif _GLOB_CHARS.search(text):
            members = [Path(p) for p in glob.glob(text, recursive=True)]
            members = [p for p in members if p.is_file() or is_zarr_store(p)]
        elif missing is not None:
            missing.append(text)
            continue
        else:
            raise InputFileError(missing_sentence(text))
        if not members:
            log.warning("Input '%s' matched no image file.", text)
        for member in members:
            paths.setdefault(Path(os.path.abspath(member)), None)
    if not paths:
        raise ParameterError(
            f"No input files found in {[os.fspath(i) for i in items]}; expected image files "
            f"({', '.join(SUFFIXES)}), folders holding them, or glob patterns."
        )
    ordered = sorted(paths, key=lambda p: natural_key(str(p)))
    return [BatchInput(p, output_name(p)) for p in ordered]
