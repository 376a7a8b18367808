"""How many CPU cores this process may use (one definition for every parallel part)."""

from __future__ import annotations

import os

__all__ = ["usable_cores"]


def usable_cores() -> int:
    """CPU cores this process may run on (its affinity mask on Linux), at least 1.

    Examples
    --------
    >>> usable_cores() >= 1
    True
    """
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)
