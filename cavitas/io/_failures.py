"""Decoder failures in plain words: what every reader raises when a library gives up.

Libraries (tifffile, nibabel, NumPy, Pillow, h5py, zarr, zlib) fail on damaged files with
many exception types and texts meant for their own developers (``'<' not supported
between instances of 'str' and 'int'``, ``Error -3 while decompressing data``). A reader
turns each into one :class:`~cavitas._errors.InputFileError` sentence naming the file and
saying what is wrong in words a user can act on; the library's own text stays in the
chained exception (``--debug`` shows it).
"""

from __future__ import annotations

import contextlib
import errno
import gzip
import lzma
import tokenize
import zipfile
import zlib
from collections.abc import Iterator
from pathlib import Path

from .._errors import CavitasError, InputFileError

__all__ = ["check_signature", "reading", "unreadable"]

#: The bytes files of a format start with (the formats' published layouts: TIFF 6.0 and
#: BigTIFF headers, PNG signature, NumPy ``.npy`` magic, zip local file / empty archive).
SIGNATURES = {
    "TIFF": (b"II*\0", b"MM\0*", b"II+\0", b"MM\0+"),
    "PNG": (b"\x89PNG\r\n\x1a\n",),
    "NumPy .npy": (b"\x93NUMPY",),
    "NumPy .npz": (b"PK\x03\x04", b"PK\x05\x06"),
}

#: OS error codes and the plain words for them.
_OS_REASONS = {
    errno.EACCES: "permission to read it is denied",
    errno.EPERM: "permission to read it is denied",
    errno.EIO: "the disk reported an input/output error while reading it",
    errno.EISDIR: "it is a folder, not a file",
    errno.ENOENT: "it disappeared while being read",
    errno.ENAMETOOLONG: "its name is too long for the file system",
}


def plain_reason(exc: BaseException) -> str | None:
    """What a library failure means for the file, in plain words (None: nothing specific).

    Examples
    --------
    >>> import zlib
    >>> plain_reason(zlib.error("Error -3 while decompressing data: invalid code lengths set"))
    'its compressed data are damaged'
    >>> plain_reason(EOFError("Compressed file ended before the end-of-stream marker"))
    'it ends before its data do (the file is cut short)'
    >>> plain_reason(KeyError("x")) is None
    True
    """
    if isinstance(exc, MemoryError):
        return "it declares more data than there is memory to hold"
    if isinstance(exc, (zlib.error, gzip.BadGzipFile, lzma.LZMAError)):
        return "its compressed data are damaged"
    if isinstance(exc, zipfile.BadZipFile):
        return "it is not an intact zip archive"
    if isinstance(exc, EOFError):
        return "it ends before its data do (the file is cut short)"
    if isinstance(exc, (tokenize.TokenError, SyntaxError, UnicodeDecodeError)):
        return "its header is damaged"
    if isinstance(exc, OSError) and exc.errno in _OS_REASONS:
        return _OS_REASONS[exc.errno]
    return None


def unreadable(path: str | Path, kind: str, exc: BaseException) -> InputFileError:
    """The error for ``path`` that the ``kind`` decoder ("TIFF", "NIfTI") could not read.

    Examples
    --------
    >>> str(unreadable("a.tif", "TIFF", TypeError("'<' not supported")))
    "'a.tif' cannot be read as TIFF: it is damaged or not laid out as TIFF."
    """
    reason = plain_reason(exc) or f"it is damaged or not laid out as {kind}"
    error = InputFileError(f"'{path}' cannot be read as {kind}: {reason}.")
    error.__cause__ = exc
    return error


def check_signature(path: str | Path, kind: str) -> None:
    """Refuse a file that does not start as files of ``kind`` (a key of SIGNATURES) do.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> target = pathlib.Path(tempfile.mkdtemp()) / "notes.tif"
    >>> _ = target.write_text("hello")
    >>> try:
    ...     check_signature(target, "TIFF")
    ... except InputFileError as exc:
    ...     print(str(exc).split("' ", 1)[1])
    cannot be read as TIFF: it does not start with the TIFF signature (it is not a TIFF file).
    """
    with open(path, "rb") as stream:
        start = stream.read(8)
    if not any(start.startswith(magic) for magic in SIGNATURES[kind]):
        raise InputFileError(f"'{path}' cannot be read as {kind}: it does not start with "
                             f"the {kind} signature (it is not a {kind} file).")


@contextlib.contextmanager
def reading(path: str | Path, kind: str) -> Iterator[None]:
    """Within the block, any failure but a :class:`CavitasError` becomes :func:`unreadable`.

    ``KeyboardInterrupt`` and ``SystemExit`` pass through (they are not ``Exception``).

    Examples
    --------
    >>> try:
    ...     with reading("x.npy", "NumPy .npy"):
    ...         raise ValueError("cannot reshape array of size 3 into shape (2,2)")
    ... except InputFileError as exc:
    ...     print(exc)
    'x.npy' cannot be read as NumPy .npy: it is damaged or not laid out as NumPy .npy.
    """
    try:
        yield
    except CavitasError:
        raise
    except Exception as exc:  # every library raises its own types; see the module notes
        raise unreadable(path, kind, exc) from exc
