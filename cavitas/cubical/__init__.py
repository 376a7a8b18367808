"""Cubical persistent homology of 2D images and 3D volumes.

Public names are imported on first use: a command that needs one module of this package
(``cavitas info`` its memory planner) does not load numba and scipy for the others.

Examples
--------
>>> from cavitas.cubical import Diagram
>>> Diagram.__name__
'Diagram'
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # the names as the type checker sees them (loaded lazily below)
    from ._diagram import PAIR_DTYPE, Diagram
    from ._diagram_io import is_diagram_file, load_diagram, save_diagram
    from ._distance import (
        BottleneckMatching,
        Matching,
        WassersteinMatching,
        bottleneck,
        bottleneck_matching,
        wasserstein,
        wasserstein_matching,
    )
    from ._distance_matrix import DistanceMatrix, distance_matrix, drop_shallow, match_diagrams
    from ._euler import ConnectivityDensity, EulerCurve, connectivity_density, euler_curve
    from ._persistence import cavity_sweep, persistence
    from ._summary import diagram_summary, format_summary
    from ._tree import OUTSIDE, CavityTree

#: Where each public name lives; loaded on first attribute access.
_LAZY = {
    **dict.fromkeys(("PAIR_DTYPE", "Diagram"), "._diagram"),
    **dict.fromkeys(("OUTSIDE", "CavityTree"), "._tree"),
    **dict.fromkeys(("is_diagram_file", "load_diagram", "save_diagram"), "._diagram_io"),
    **dict.fromkeys(("BottleneckMatching", "Matching", "WassersteinMatching", "bottleneck",
                     "bottleneck_matching", "wasserstein", "wasserstein_matching"),
                    "._distance"),
    **dict.fromkeys(("diagram_summary", "format_summary"), "._summary"),
    **dict.fromkeys(("cavity_sweep", "persistence"), "._persistence"),
    **dict.fromkeys(("ConnectivityDensity", "EulerCurve", "connectivity_density",
                     "euler_curve"), "._euler"),
    **dict.fromkeys(("DistanceMatrix", "distance_matrix", "drop_shallow", "match_diagrams"),
                    "._distance_matrix"),
}

__all__ = [
    "OUTSIDE", "PAIR_DTYPE", "BottleneckMatching", "CavityTree", "ConnectivityDensity",
    "Diagram", "DistanceMatrix", "EulerCurve", "Matching", "WassersteinMatching",
    "bottleneck", "bottleneck_matching", "cavity_sweep", "connectivity_density",
    "diagram_summary", "distance_matrix", "drop_shallow", "euler_curve", "format_summary",
    "is_diagram_file", "load_diagram", "match_diagrams", "persistence", "save_diagram",
    "wasserstein", "wasserstein_matching",
]


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        value = getattr(importlib.import_module(_LAZY[name], __name__), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(__all__)
