"""Reading and writing volumes: the :class:`Volume` type, :func:`read` and :func:`write`.

Also the helpers later stages share: :func:`check_finite` (NaN/Inf make the computation
fail with a clear message) and :func:`estimate_memory_bytes` (what a segmentation needs).
"""

from .._shared.memory import estimate_memory_bytes
from ._dispatch import READ_SUFFIXES, WRITE_SUFFIXES, read, write
from ._stats import check_finite, summarize
from ._volume import Volume

__all__ = [
    "READ_SUFFIXES",
    "WRITE_SUFFIXES",
    "Volume",
    "check_finite",
    "estimate_memory_bytes",
    "read",
    "summarize",
    "write",
]
