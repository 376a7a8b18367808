"""Atomic output: write to a temporary file beside the target, then rename it into place.

The temporary file is flushed to disk (``fsync``) before the rename, so after a crash the
target holds the old or the new content, never a partial one; its name is short enough
for any target name the file system accepts. A symbolic link at the target is replaced by
the new file, never written through.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from collections.abc import Iterator
from pathlib import Path

from .._errors import OutputError

__all__ = ["atomic_path", "check_writable", "fsync_file"]

#: Longest part of the target's name kept in the temporary name (file systems allow 255
#: bytes; the rest is the random part and the ``.part`` suffix).
_NAME_PART = 80


def check_writable(path: str | os.PathLike, *, force: bool = False,
                   inputs: tuple[str | os.PathLike, ...] = ()) -> Path:
    """Check that ``path`` may be written: not an input, and not existing unless ``force``.

    Nothing is created: a missing folder is made by :func:`atomic_path` when the file is
    written, so a run that fails earlier (an unreadable input, a bad option) leaves no
    empty folder behind.

    Raises
    ------
    OutputError
        If ``path`` is one of ``inputs``, exists without ``force``, is a folder, or its
        folder cannot be created.
    """
    path = Path(path)
    for source in inputs:
        with contextlib.suppress(OSError):
            if Path(source).exists() and path.exists() and path.samefile(source):
                raise OutputError(f"Refusing to overwrite the input file '{path}'.")
    if path.is_dir() and not path.is_symlink():
        raise OutputError(f"Output '{path}' is a folder, expected a file path.")
    if (path.exists() or path.is_symlink()) and not force:
        raise OutputError(
            f"Output '{path}' already exists; use force=True to replace it.",
            parameters=("force",))
    folder = path.parent.absolute()
    while not folder.exists() and folder != folder.parent:
        folder = folder.parent  # the nearest folder that exists: the others will be made
    if not folder.is_dir():
        raise OutputError(f"Cannot create the folder of '{path}': '{folder}' is a file.")
    if not os.access(folder, os.W_OK | os.X_OK):
        raise OutputError(f"Cannot write '{path}': the folder '{folder}' is not writable.")
    return path


def _read_umask() -> int:
    umask = os.umask(0)
    os.umask(umask)
    return umask


#: Permission bits of a newly created ordinary file (read once: os.umask is process-wide).
_FILE_MODE = 0o666 & ~_read_umask()


@contextlib.contextmanager
def atomic_path(path: str | os.PathLike, *, force: bool = False,
                inputs: tuple[str | os.PathLike, ...] = ()) -> Iterator[Path]:
    """Yield a temporary path to write; on success it replaces ``path`` in one rename.

    On any error (or Ctrl-C) the temporary file is removed and ``path`` is left as it was,
    so an output is either complete or absent. The temporary name keeps the target's
    suffixes (``.nii.gz``), so libraries that pick a format by extension still work.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> target = pathlib.Path(tempfile.mkdtemp()) / "table.csv"
    >>> with atomic_path(target) as tmp:
    ...     _ = tmp.write_text("a,b\\n1,2\\n")
    >>> target.read_text()
    'a,b\\n1,2\\n'
    """
    path = check_writable(path, force=force, inputs=inputs)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(f"Cannot create the folder of '{path}': {exc.strerror or exc}.") from exc
    suffix = "".join(path.suffixes[-2:]) if path.suffixes else ""
    suffix = suffix if len(suffix) <= 16 else ""  # a dotted name, not an extension
    tmp = None
    try:
        fd, tmp_name = tempfile.mkstemp(prefix=f".{path.name[:_NAME_PART]}.",
                                        suffix=f".part{suffix}", dir=path.parent)
        os.close(fd)
        tmp = Path(tmp_name)
        yield tmp
        if not tmp.exists():
            raise OutputError(f"Writing '{path}' produced no file.")
        if (path.exists() or path.is_symlink()) and not force:  # appeared while writing
            raise OutputError(
                f"Output '{path}' appeared while it was being written; not replaced."
            )
        os.chmod(tmp, _FILE_MODE)  # mkstemp makes 0600 files; outputs are ordinary files
        fsync_file(tmp)
        os.replace(tmp, path)  # a link at ``path`` is replaced, not followed
    except OSError as exc:
        raise OutputError(f"Cannot write '{path}': {exc.strerror or exc}.") from exc
    finally:
        if tmp is not None:
            with contextlib.suppress(FileNotFoundError):
                tmp.unlink()


def fsync_file(path: str | os.PathLike) -> None:
    """Flush ``path``'s content to the disk (before a rename makes it the real file)."""
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)
