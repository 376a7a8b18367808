"""How much memory one input needs, how much the machine has, and so how many run at once."""

from __future__ import annotations

import logging
import os
from pathlib import Path

from .._shared.memory import WORK_BYTES_PER_VOXEL, available_memory, data_memory_bytes
from ..io._header import declared_layout

__all__ = ["MEMORY_SHARE", "admits", "available_memory", "estimate_task_bytes"]

log = logging.getLogger(__name__)

#: Share of the available memory (or of a cluster's memory limits) that concurrent tasks
#: may use together.
MEMORY_SHARE = 0.8

#: Compressed formats hold several times less than they unpack to (rule of thumb, kept
#: deliberately high so that the estimate errs on the safe side).
_COMPRESSED_FACTOR = 4
_COMPRESSED = (".gz", ".zarr", ".h5", ".hdf5")  # HDF5 datasets are often compressed
#: Peak memory per stored byte when the header cannot be read: 8-bit data, the worst case
#: of :func:`cavitas._shared.memory.data_memory_bytes` per stored byte.
_BYTES_PER_INPUT_BYTE = 1 + WORK_BYTES_PER_VOXEL[4]


def admits(need: int, used: int, running: int, budget: int | None, path: str) -> bool:
    """Whether a task estimated at ``need`` bytes may start beside ``running`` tasks that
    use ``used`` bytes together, within ``budget`` (``None``: no limit).

    A task larger than the whole budget starts alone, with a warning.

    Examples
    --------
    >>> admits(60, 50, 1, 100, "a.tif"), admits(60, 0, 0, 100, "a.tif")
    (False, True)
    """
    if budget is None:
        return True
    if running:
        return used + need <= budget
    if need > budget:
        log.warning("'%s' may need %.1f GiB, more than the %.1f GiB budget; running it "
                    "alone.", path, need / 2**30, budget / 2**30)
    return True


def _stored_bytes(path: Path) -> int:
    if path.is_dir():
        return sum(p.stat().st_size for p in path.rglob("*") if p.is_file())
    return path.stat().st_size


def estimate_task_bytes(path: str | os.PathLike) -> int:
    """Estimated peak memory of segmenting one input, from its header when possible.

    :func:`cavitas._shared.memory.data_memory_bytes` (the measured peak of ``segment_file`` with a
    margin) for the shape and type the file declares; files whose header cannot be read
    get an estimate from their size on disk. Never raises: an unreadable input gets a
    small estimate and fails in its worker. The batch raises every estimate when a worker
    reports a larger peak.

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np
    >>> f = pathlib.Path(tempfile.mkdtemp()) / "x.npy"
    >>> np.save(f, np.zeros((10, 10, 10), np.uint16))
    >>> estimate_task_bytes(f) == data_memory_bytes((10, 10, 10), np.uint16)
    True
    """
    path = Path(path)
    try:
        shape, dtype = declared_layout(path)
        return int(data_memory_bytes(shape, dtype))
    except Exception as exc:  # unreadable header: fall back on the size on disk
        log.debug("No header estimate for '%s' (%s); using its size on disk.", path, exc)
    try:
        stored = _stored_bytes(path)
    except OSError:
        return 0
    factor = _COMPRESSED_FACTOR if path.name.lower().endswith(_COMPRESSED) else 1
    return stored * factor * _BYTES_PER_INPUT_BYTE
