"""One batch at a time per output folder: an advisory lock the system drops if we die."""

from __future__ import annotations

import contextlib
import fcntl
import os
from collections.abc import Iterator
from pathlib import Path

from .._errors import OutputError

__all__ = ["LOCK_NAME", "folder_lock"]

LOCK_NAME = ".cavitas-batch.lock"


@contextlib.contextmanager
def folder_lock(root: Path) -> Iterator[None]:
    """Hold an exclusive lock on the batch folder ``root`` (created if needed).

    The lock is released when the block ends or the process dies (even by SIGKILL), so a
    killed run never blocks the next one.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> root = pathlib.Path(tempfile.mkdtemp())
    >>> with folder_lock(root):
    ...     with folder_lock(root):
    ...         pass
    Traceback (most recent call last):
    cavitas._errors.OutputError: ...
    """
    try:
        root.mkdir(parents=True, exist_ok=True)
        fd = os.open(root / LOCK_NAME, os.O_CREAT | os.O_RDWR | getattr(os, "O_NOFOLLOW", 0),
                     0o644)
    except OSError as exc:
        if (root / LOCK_NAME).is_symlink():
            raise OutputError(f"'{root / LOCK_NAME}' is a symbolic link; cavitas does not "
                              "follow links in its output folder (remove it).") from exc
        raise OutputError(f"Cannot use the output folder '{root}': {exc.strerror or exc}.") \
            from exc
    try:
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            raise OutputError(
                f"Output folder '{root}' is in use by another cavitas batch; wait for it to "
                "finish or stop it."
            ) from None
        yield
    finally:
        os.close(fd)
