"""cavitas: find, segment and measure enclosed regions in 2D images and 3D volumes.

cavitas reads a scan into a cubical complex, computes the persistent homology of its
intensity filtration, keeps the long-lived cavities (regions enclosed by a wall of a
different intensity) and exports labelled masks, measurements and reports.

For research use only; not for diagnosis.

Public names are imported on first use, so ``import cavitas`` stays fast and the compiled
kernels are only loaded when a computation needs them.

Examples
--------
>>> import cavitas
>>> cavitas.Volume([[0, 1], [1, 0]], spacing=(0.5, 0.5)).unit
'µm'
"""

from __future__ import annotations

import importlib
from typing import Any

from ._caution import RESEARCH_ONLY
from ._errors import CavitasError, InputFileError, OutputError, ParameterError
from ._numba_cache import ensure_cache_dir
from ._version import __version__

ensure_cache_dir()  # before any kernel is compiled: a read-only install still runs

#: Where each public name lives; loaded on first attribute access.
_LAZY = {
    "Volume": "cavitas.io",
    "read": "cavitas.io",
    "write": "cavitas.io",
    "persistence": "cavitas.cubical",
    "Diagram": "cavitas.cubical",
    "CavityTree": "cavitas.cubical",
    "bottleneck": "cavitas.cubical",
    "bottleneck_matching": "cavitas.cubical",
    "wasserstein": "cavitas.cubical",
    "wasserstein_matching": "cavitas.cubical",
    "euler_curve": "cavitas.cubical",
    "connectivity_density": "cavitas.cubical",
    "segment": "cavitas.segment",
    "Segmentation": "cavitas.segment",
}

__all__ = [
    "RESEARCH_ONLY",
    "CavitasError",
    "InputFileError",
    "OutputError",
    "ParameterError",
    "__version__",
    *_LAZY,
]


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        module = importlib.import_module(_LAZY[name])
        value = getattr(module, name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'cavitas' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(__all__)
