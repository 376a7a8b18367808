"""The SHA-256 of an input: a file, a folder (a Zarr store, a slice folder) or a glob."""

from __future__ import annotations

import glob
import hashlib
import os
from pathlib import Path
from typing import Any

from .._errors import InputFileError

__all__ = ["input_checksum"]

_BLOCK = 1 << 20


def input_checksum(path: str | os.PathLike) -> str:
    """SHA-256 of an input file, of every file in an input folder, or of a glob's matches.

    For a folder or a glob the digest covers each file's relative path and bytes, in sorted
    order, so renaming or changing any chunk or slice changes it. ``run.json`` records it
    and the batch runner compares it to decide whether an input must be done again.

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
        if path.is_dir():
            files = [(p, p.relative_to(path)) for p in path.rglob("*") if p.is_file()]
        elif path.exists() or not glob.has_magic(str(path)):
            files = [(path, None)]
        else:
            files = [(Path(p), Path(p).name) for p in glob.glob(str(path)) if Path(p).is_file()]
        for file, name in sorted(files, key=lambda item: str(item[1] or "")):
            if name is not None:
                digest.update(Path(name).as_posix().encode() + b"\0")
            _feed(digest, file)
    except OSError as exc:
        raise InputFileError(f"Cannot read '{path}': {exc.strerror or exc}.") from exc
    return digest.hexdigest()


def _feed(digest: Any, file: Path) -> None:
    with open(file, "rb") as fh:
        while block := fh.read(_BLOCK):
            digest.update(block)
