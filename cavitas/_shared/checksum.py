"""The SHA-256 of a file, read in blocks (inputs of any size, constant memory)."""

from __future__ import annotations

import hashlib
import os
from pathlib import Path
from typing import Any

__all__ = ["feed_file", "file_checksum"]

_BLOCK = 1 << 20


def file_checksum(path: str | os.PathLike) -> str:
    """SHA-256 of one file's bytes (raises ``OSError`` as ``open`` does).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> f = pathlib.Path(tempfile.mkdtemp()) / "a.csv"
    >>> _ = f.write_bytes(b"abc")
    >>> file_checksum(f)[:16]  # SHA-256 of b"abc" (FIPS 180-2, appendix B.1)
    'ba7816bf8f01cfea'
    """
    digest = hashlib.sha256()
    feed_file(digest, Path(path))
    return digest.hexdigest()


def feed_file(digest: Any, file: str | os.PathLike) -> None:
    """Add the bytes of ``file`` to a ``hashlib`` digest, one block at a time."""
    with open(file, "rb") as fh:
        while block := fh.read(_BLOCK):
            digest.update(block)
