"""Cubical persistent homology of 2D images and 3D volumes."""

from ._diagram import PAIR_DTYPE, Diagram
from ._tree import OUTSIDE, CavityTree

__all__ = ["PAIR_DTYPE", "OUTSIDE", "CavityTree", "Diagram"]

from ._diagram_io import is_diagram_file, load_diagram, save_diagram  # noqa: E402
from ._distance import (  # noqa: E402
    BottleneckMatching,
    Matching,
    WassersteinMatching,
    bottleneck,
    bottleneck_matching,
    wasserstein,
    wasserstein_matching,
)
from ._summary import diagram_summary, format_summary  # noqa: E402

__all__ += [
    "BottleneckMatching", "Matching", "WassersteinMatching", "bottleneck",
    "bottleneck_matching", "diagram_summary", "format_summary", "is_diagram_file",
    "load_diagram", "save_diagram", "wasserstein", "wasserstein_matching",
]

from ._persistence import cavity_sweep, persistence  # noqa: E402

__all__ += ["cavity_sweep", "persistence"]

from ._euler import (  # noqa: E402
    ConnectivityDensity,
    EulerCurve,
    connectivity_density,
    euler_curve,
)

__all__ += ["ConnectivityDensity", "EulerCurve", "connectivity_density", "euler_curve"]

from ._distance_matrix import (  # noqa: E402
    DistanceMatrix,
    distance_matrix,
    drop_shallow,
    match_diagrams,
)

__all__ += ["DistanceMatrix", "distance_matrix", "drop_shallow", "match_diagrams"]
