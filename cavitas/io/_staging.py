"""Publishing a run's outputs together: written into a hidden staging folder, moved at the end.

A run writes every output into ``OUTDIR/.cavitas-staging-<pid>-<random>/`` and, once all
are written, moves them into ``OUTDIR`` (same file system: each move is one rename), the
completion record (``run.json``) last. An interrupted run therefore never leaves a set of
outputs that looks complete: either nothing of it is in ``OUTDIR`` (the next run finds
the folder as before and removes the abandoned staging folder), or every output is there
and ``run.json`` was moved last. Staging folders of processes that no longer run are
removed when a new run starts.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import uuid
from pathlib import Path

from .._errors import OutputError

__all__ = ["COMPLETION_RECORD", "discard_staging", "open_staging", "publish_staged",
           "write_failure"]

PREFIX = ".cavitas-staging-"
#: Moved last: its presence means the set of outputs is complete.
COMPLETION_RECORD = "run.json"


def _alive(pid: int) -> bool:
    """Whether a process ``pid`` runs (a staging folder of a dead one can be removed)."""
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:  # it exists but belongs to someone else
        return True
    return True


def remove_abandoned(outdir: Path) -> list[Path]:
    """Remove the staging folders in ``outdir`` whose process no longer runs."""
    removed = []
    for entry in outdir.glob(f"{PREFIX}*"):
        pid = entry.name[len(PREFIX):].split("-", 1)[0]
        if pid.isdigit() and not _alive(int(pid)) and not entry.is_symlink():
            shutil.rmtree(entry, ignore_errors=True)
            removed.append(entry)
    return removed


def open_staging(outdir: Path) -> Path:
    """Create ``outdir`` if needed and an empty staging folder in it; return the folder.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> out = pathlib.Path(tempfile.mkdtemp()) / "out"
    >>> staging = open_staging(out)
    >>> _ = (staging / "labels.tif").write_bytes(b"x")
    >>> _ = (staging / "run.json").write_text("{}")
    >>> publish_staged(staging, out)
    >>> sorted(p.name for p in out.iterdir())
    ['labels.tif', 'run.json']
    """
    try:
        outdir.mkdir(parents=True, exist_ok=True)
        remove_abandoned(outdir)
        staging = outdir / f"{PREFIX}{os.getpid()}-{uuid.uuid4().hex[:8]}"
        staging.mkdir()
    except OSError as exc:
        raise OutputError(f"Cannot write in the output folder '{outdir}': "
                          f"{exc.strerror or exc}.") from exc
    return staging


def publish_staged(staging: Path, outdir: Path) -> None:
    """Move every entry of ``staging`` into ``outdir`` (the completion record last), replacing
    what is there (the caller checked ``force`` before computing), and remove ``staging``."""
    entries = sorted(staging.iterdir(), key=lambda p: p.name == COMPLETION_RECORD)
    try:
        for entry in entries:
            target = outdir / entry.name
            if target.is_dir() and not target.is_symlink():  # meshes/ of an earlier run
                shutil.rmtree(target)
            os.replace(entry, target)
        staging.rmdir()
    except OSError as exc:
        raise OutputError(f"Cannot move the finished outputs into '{outdir}': "
                          f"{exc.strerror or exc}.") from exc


def discard_staging(staging: Path, outdir: Path, *, made: bool) -> None:
    """Remove an unpublished ``staging`` folder, and ``outdir`` too if this run ``made`` it
    and it is empty (a failed run leaves no empty folder behind)."""
    shutil.rmtree(staging, ignore_errors=True)
    if made:
        with contextlib.suppress(OSError):
            outdir.rmdir()


def write_failure(exc: OSError, path: Path, what: str) -> OutputError | None:
    """The :class:`OutputError` for ``exc`` raised while writing ``what`` to ``path`` (a
    Zarr store written by Dask workers: a full disk, a folder they cannot reach), or None
    when ``exc`` names a file elsewhere (reading the input failed: not an output's fault).

    Examples
    --------
    >>> err = OSError(28, "No space left on device", "/out/labels.zarr/c/0/0")
    >>> print(write_failure(err, Path("/out/labels.zarr"), "the label map"))
    Cannot write the label map to '/out/labels.zarr': No space left on device.
    >>> write_failure(OSError(5, "I/O error", "/in/v.zarr/c/0"), Path("/out/labels.zarr"),
    ...               "the label map") is None
    True
    """
    if exc.filename is not None and not Path(os.fsdecode(exc.filename)).is_relative_to(path):
        return None
    return OutputError(f"Cannot write {what} to '{path}': {exc.strerror or exc}.")
