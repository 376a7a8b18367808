"""The SHA-256 of an input: a file, a folder (a Zarr store, a slice folder) or a glob."""

from __future__ import annotations

import glob
import hashlib
import os
from pathlib import Path

from .._errors import InputFileError
from .._shared.checksum import feed_file
from ._slices import slice_files
from ._zarr import is_zarr_store

__all__ = ["input_checksum"]


def input_checksum(path: str | os.PathLike) -> str:
    """SHA-256 of what is read from an input: a file, a Zarr store, or the slices of a
    folder or glob.

    A path that exists is that file, even when its name holds ``[``, ``*`` or ``?``. For a
    Zarr store the digest covers every file's relative path and bytes; for a folder or glob
    of slices, the name and bytes of each slice :func:`cavitas.io.read` stacks, so renaming
    or changing any chunk or slice changes it. ``run.json`` records it and the batch runner
    compares it to decide whether an input must be done again.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> f = pathlib.Path(tempfile.mkdtemp()) / "a.raw"
    >>> _ = f.write_bytes(b"abc")
    >>> input_checksum(f)[:16]  # SHA-256 of b"abc" (FIPS 180-2, appendix B.1)
    'ba7816bf8f01cfea'
    """
    path = Path(path)
    digest = hashlib.sha256()
    try:
        if path.is_file() or not (path.is_dir() or glob.has_magic(str(path))):
            # a path that exists is that file, whatever its name
            files: list[tuple[Path, Path | None]] = [(path, None)]
        elif is_zarr_store(path):
            files = [(p, p.relative_to(path)) for p in path.rglob("*") if p.is_file()]
        else:  # the slices read_slices stacks, not every file the folder or pattern holds
            files = [(p, Path(p.name)) for p in slice_files(str(path))]
        for file, name in sorted(files, key=lambda item: str(item[1] or "")):
            if name is not None:
                digest.update(Path(name).as_posix().encode() + b"\0")
            feed_file(digest, file)
    except OSError as exc:
        raise InputFileError(f"Cannot read '{path}': {exc.strerror or exc}.") from exc
    return digest.hexdigest()
